package main

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tessera/learn"
	"tessera/learn/dictfile"
	"tessera/patches"
	"tessera/restore"
)

// series writes n noisy gray frames (σ = 10) into dir/sub and returns
// their clean versions.
func series(t *testing.T, dir, sub string, n int, seed uint64) {
	t.Helper()
	for i := 0; i < n; i++ {
		f, _ := testImage(48, 48, 1, 8, false, seed+uint64(i))
		writeImage(t, filepath.Join(dir, sub, fmt.Sprintf("f%02d.png", i)), f, "png")
	}
}

var learnFast = []string{"--sigma", "10", "--atoms", "64", "--train", "2000", "--rounds", "3"}

func TestLearnThenDenoiseWithDict(t *testing.T) {
	dir := t.TempDir()
	series(t, dir, "frames", 6, 0)
	r := tessera(t, dir, nil, nil, append([]string{"learn", "frames", "--out", "d.tdict"}, learnFast...)...)
	r.want(t, 0, "learned 64 atoms of 8×8 gray patches from 2000 patches of 6 gray images (3 rounds")
	f, err := dictfile.ReadFile(filepath.Join(dir, "d.tdict"))
	if err != nil {
		t.Fatal(err)
	}
	d := f.Dict
	tr := f.Training
	if d.K != 64 || d.Patch != 8 || d.Channels != 1 || len(f.Uses) != 64 ||
		tr.Images != 6 || tr.ImageChannels != 1 || tr.Patches != 2000 || tr.Sigma != 10 || tr.Rounds != 3 || tr.Seed != 1 || tr.Program != "tessera learn" {
		t.Fatalf("dictionary %d atoms p%d c%d, %d counts, training %+v", d.K, d.Patch, d.Channels, len(f.Uses), tr)
	}
	used := uint64(0)
	for _, u := range f.Uses {
		used += u
	}
	if used == 0 {
		t.Fatal("no atom use recorded")
	}
	// The same command gives the same bytes.
	first, _ := os.ReadFile(filepath.Join(dir, "d.tdict"))
	tessera(t, dir, nil, nil, append([]string{"learn", "frames", "--out", "d2.tdict", "--quiet"}, learnFast...)...).want(t, 0)
	if second, _ := os.ReadFile(filepath.Join(dir, "d2.tdict")); !bytes.Equal(first, second) {
		t.Error("learning twice gave different files")
	}

	// A later frame coded with the stored dictionary gains as a trained run does.
	noisy, clean := testImage(48, 48, 1, 8, false, 40)
	writeImage(t, filepath.Join(dir, "new.png"), noisy, "png")
	tessera(t, dir, nil, nil, "denoise", "--sigma", "10", "--dict", "d.tdict", "new.png", "--out", "out.png", "--report", "r.jsonl").want(t, 0)
	out := decode(t, filepath.Join(dir, "out.png"))
	before, after := mse(noisy.Img, clean), mse(out.Img, clean)
	t.Logf("MSE %.1f → %.1f with the stored dictionary", before, after)
	if !(after < 0.6*before) {
		t.Errorf("MSE %.1f after, %.1f before: want a gain of over 2.2 dB", after, before)
	}
	// --rounds adapts the stored dictionary: a different result.
	tessera(t, dir, nil, nil, "denoise", "--sigma", "10", "--dict", "d.tdict", "--rounds", "2", "--train", "1000", "new.png", "--out", "out2.png").want(t, 0)
	if a, _ := os.ReadFile(filepath.Join(dir, "out.png")); bytes.Equal(a, mustRead(t, filepath.Join(dir, "out2.png"))) {
		t.Error("--rounds 2 with --dict gave the same output as no rounds")
	}

	// atoms: the grid is ⌈√64⌉ = 8 cells of 8·3 + 1 pixels each way, plus the frame.
	tessera(t, dir, nil, nil, "atoms", "d.tdict", "--out", "atoms.png", "--scale", "3").want(t, 0)
	a := decode(t, filepath.Join(dir, "atoms.png"))
	if a.Img.W != 8*25+1 || a.Img.H != 8*25+1 || a.Img.C != 1 {
		t.Fatalf("atoms picture %d×%d×%d, want 201×201×1", a.Img.W, a.Img.H, a.Img.C)
	}
	want := drawAtoms(f, 3)
	for i, v := range want.Pix {
		if a.Img.Pix[i] != v {
			t.Fatalf("atoms picture sample %d is %g, want %g", i, a.Img.Pix[i], v)
		}
	}
}

func mustRead(t *testing.T, p string) []byte {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestDictErrors(t *testing.T) {
	dir := t.TempDir()
	series(t, dir, "frames", 2, 0)
	tessera(t, dir, nil, nil, append([]string{"learn", "frames", "--out", "d.tdict", "--quiet"}, learnFast...)...).want(t, 0)
	raw := mustRead(t, filepath.Join(dir, "d.tdict"))
	damaged := append([]byte(nil), raw...)
	damaged[len(damaged)/2] ^= 4
	os.WriteFile(filepath.Join(dir, "damaged.tdict"), damaged, 0o644)
	os.WriteFile(filepath.Join(dir, "short.tdict"), raw[:100], 0o644)
	colour, _ := testImage(48, 48, 3, 8, false, 5)
	writeImage(t, filepath.Join(dir, "colour.png"), colour, "png")

	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"denoise", "--sigma", "10", "--dict", "frames/f00.png", "frames/f01.png", "--out", "o.png"}, 2, "frames/f00.png: not a tessera dictionary file"},
		{[]string{"denoise", "--sigma", "10", "--dict", "damaged.tdict", "frames/f01.png", "--out", "o.png"}, 2, "damaged.tdict: damaged dictionary file (payload checksum mismatch)"},
		{[]string{"denoise", "--sigma", "10", "--dict", "short.tdict", "frames/f01.png", "--out", "o.png"}, 2, "short.tdict: truncated dictionary file"},
		{[]string{"denoise", "--sigma", "10", "--dict", "none.tdict", "frames/f01.png", "--out", "o.png"}, 2, "none.tdict: no such file"},
		{[]string{"denoise", "--sigma", "10", "--dict", "d.tdict", "--patch", "6", "frames/f01.png", "--out", "o.png"}, 2, "--patch 6 does not match --dict d.tdict, which holds 8×8 patches"},
		{[]string{"denoise", "--sigma", "10", "--dict", "d.tdict", "--atoms", "100", "frames/f01.png", "--out", "o.png"}, 2, "--atoms 100 does not match --dict d.tdict, which holds 64 atoms"},
		{[]string{"denoise", "--sigma", "10", "--tile", "10", "frames/f01.png", "--out", "o.png"}, 2, "--tile 10: must be 64..1048576"},
		{[]string{"denoise", "--sigma", "10", "--dict", "d.tdict", "colour.png", "--out", "o.png"}, 1, "learned on gray images (1 channel) but this image is colour (3 channels)"},
		{[]string{"atoms", "damaged.tdict", "--out", "a.png"}, 2, "payload checksum mismatch"},
		{[]string{"atoms", "d.tdict", "--out", "a.jpg"}, 2, "give a .png, .tif or .pgm name"},
		{[]string{"atoms", "d.tdict"}, 2, "--out IMAGE"},
		{[]string{"atoms", "d.tdict", "--out", "a.png", "--scale", "0"}, 2, "--scale 0: must be 1..64"},
		{[]string{"learn", "frames"}, 2, "--out FILE"},
		{[]string{"learn", "nowhere", "--out", "x.tdict"}, 2, "nowhere: no such file or folder"},
		{[]string{"learn", "-", "--out", "x.tdict"}, 2, "not standard input"},
		{[]string{"learn", "frames", "colour.png", "--out", "x.tdict", "--sigma", "10"}, 1, "frames/f00.png is gray (1 channel) but the first image, colour.png, is colour (3 channels)"},
		{[]string{"learn", "frames", "--out", "x.tdict", "--sigma", "300"}, 1, "frames/f00.png: σ = 300 is not below the 8-bit peak 255"},
		{[]string{"learn", "frames", "--out", "x.tdict", "--patch", "64"}, 2, "--patch 64: the patch side must be 2..32"},
		{[]string{"learn", "frames", "--out", "x.tdict", "--max-pixels", "100", "--sigma", "10"}, 1, "over the limit of 100"},
		{[]string{"learn", "frames", "--out", "frames/f00.png", "--sigma", "10"}, 2, "is the input image"},
	} {
		r := tessera(t, dir, nil, nil, c.args...)
		if r.code != c.code || !strings.Contains(r.stderr, c.msg) {
			t.Errorf("tessera %s: status %d, stderr %q; want status %d and %q", strings.Join(c.args, " "), r.code, r.stderr, c.code, c.msg)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "x.tdict")); err == nil {
		t.Error("a failed learn left a dictionary file")
	}
}

// A dictionary learned on colour frames (one-channel atoms for the
// opponent channels coded apart) restores a later colour frame.
func TestLearnColour(t *testing.T) {
	dir := t.TempDir()
	for i := 0; i < 3; i++ {
		f, _ := testImage(48, 48, 3, 8, false, uint64(i))
		writeImage(t, filepath.Join(dir, "c", fmt.Sprintf("c%d.png", i)), f, "png")
	}
	tessera(t, dir, nil, nil, append([]string{"learn", "c", "--out", "c.tdict"}, learnFast...)...).want(t, 0,
		"learned 64 atoms of 8×8 one-channel patches from 2000 patches of 3 colour images")
	f, err := dictfile.ReadFile(filepath.Join(dir, "c.tdict"))
	if err != nil {
		t.Fatal(err)
	}
	if f.Dict.Channels != 1 || f.Training.ImageChannels != 3 {
		t.Fatalf("atoms of %d channels, learned on %d-channel images", f.Dict.Channels, f.Training.ImageChannels)
	}
	noisy, clean := testImage(48, 48, 3, 8, false, 9)
	writeImage(t, filepath.Join(dir, "new.png"), noisy, "png")
	tessera(t, dir, nil, nil, "denoise", "--sigma", "10", "--dict", "c.tdict", "new.png", "--out", "out.png").want(t, 0)
	before, after := mse(noisy.Img, clean), mse(decode(t, filepath.Join(dir, "out.png")).Img, clean)
	if !(after < 0.6*before) {
		t.Errorf("MSE %.1f after, %.1f before: want a gain of over 2.2 dB", after, before)
	}
}

// The --tile path gives the untiled result, and a stored dictionary of
// another channel count is refused with both counts named.
func TestGaussDenoiseTilesAndChannels(t *testing.T) {
	noisy, _ := testImage(150, 97, 1, 16, false, 3)
	opt := restore.Defaults(10)
	opt.Train, opt.Rounds, opt.Atoms = 1000, 2, 64
	sigma := 10 * 257.0
	whole, _, err := restore.Denoise(noisy.Img, sigma, opt)
	if err != nil {
		t.Fatal(err)
	}
	c := &config{dictConfig: dictConfig{tile: 64}}
	tiled, _, err := c.gaussDenoise(noisy.Img, sigma, opt)
	if err != nil {
		t.Fatal(err)
	}
	diff := 0.0
	for i := range whole.Pix {
		diff = math.Max(diff, math.Abs(float64(whole.Pix[i]-tiled.Pix[i])))
	}
	if diff > 0.3 { // 1e-3 on the 8-bit scale, in 16-bit units
		t.Errorf("tiled and whole differ by up to %g", diff)
	}

	// Colour images are coded per opponent channel with one-channel atoms,
	// so the atoms alone do not tell a gray dictionary from a colour one:
	// the file's record of the images does.
	d := learn.OvercompleteDCT(8, 16, 1)
	colour, _ := testImage(40, 40, 3, 8, false, 1)
	gray, _ := testImage(40, 40, 1, 8, false, 1)
	for _, k := range []struct {
		learned int
		img     *patches.Image
		ok      bool
	}{{1, colour.Img, false}, {3, gray.Img, false}, {3, colour.Img, true}, {1, gray.Img, true}, {0, colour.Img, true}} {
		c = &config{dictConfig: dictConfig{dict: d, dictPath: "s.tdict", dictImgC: k.learned}}
		o := restore.Defaults(10)
		c.applyDict(&o)
		if o.Rounds != 0 || o.Dict != d || o.Atoms != d.K {
			t.Fatalf("--dict without --rounds: rounds %d, atoms %d", o.Rounds, o.Atoms)
		}
		_, _, err = c.gaussDenoise(k.img, 10, o)
		var oe *restore.OptionError
		if k.ok != (err == nil) {
			t.Errorf("dictionary from %d-channel images on a %d-channel image: %v", k.learned, k.img.C, err)
		}
		if k.learned == 1 && !k.ok && (!errors.As(err, &oe) || oe.Field != "dict" ||
			!strings.Contains(oe.Reason, "s.tdict was learned on gray images (1 channel) but this image is colour (3 channels)")) {
			t.Errorf("colour image with a gray dictionary: %v", err)
		}
	}
}

func TestAtomOrderAndDrawing(t *testing.T) {
	d := learn.OvercompleteDCT(4, 4, 3)
	f := &dictfile.File{Dict: d, Uses: make([]uint64, d.K)}
	f.Uses[5], f.Uses[2], f.Uses[9] = 7, 7, 9
	order := atomOrder(f)
	if fmt.Sprint(order[:4]) != "[9 2 5 0]" {
		t.Errorf("order %v, want the most used first and ties in file order", order[:4])
	}
	img := drawAtoms(f, 2)
	// 16 atoms: a 4×4 grid of cells 4·2 + 1 wide, framed.
	if img.W != 37 || img.H != 37 || img.C != 3 {
		t.Fatalf("picture %d×%d×%d", img.W, img.H, img.C)
	}
	for i := 0; i < img.W; i++ {
		for _, at := range [][2]int{{i, 0}, {0, i}, {i, 9}, {9, i}, {i, 36}} {
			for c := 0; c < 3; c++ {
				if img.At(at[0], at[1], c) != 255 {
					t.Fatalf("separator pixel %v channel %d is %g", at, c, img.At(at[0], at[1], c))
				}
			}
		}
	}
	// The first cell is atom 9 stretched to 0..255; the flat first DCT
	// atom (position 3 in the order) is mid-gray.
	lo, hi := 255.0, 0.0
	for y := 1; y < 9; y++ {
		for x := 1; x < 9; x++ {
			v := float64(img.At(x, y, 0))
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if lo != 0 || hi != 255 {
		t.Errorf("first cell spans %g..%g, want its own full range", lo, hi)
	}
	if v := img.At(3*9+1, 1, 1); v != 128 {
		t.Errorf("flat atom drawn as %g, want 128", v)
	}
	// Scale 2: each atom pixel is a 2×2 block.
	if img.At(1, 1, 0) != img.At(2, 2, 0) || img.At(1, 1, 0) != img.At(2, 1, 0) {
		t.Error("atom pixels are not drawn as 2×2 blocks")
	}
}
