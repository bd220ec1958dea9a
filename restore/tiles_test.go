package restore

import (
	"bufio"
	"errors"
	"fmt"
	"math"
	"os"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"

	"tessera/learn"
	"tessera/patches"
)

// The sparse shuffle draws the very patches trainingSet draws, so tiled
// and untiled runs train the same dictionary.
func TestSamplePositionsMatchTrainingSet(t *testing.T) {
	img := newScene(70, 50, 3).frame(0)
	for _, want := range []int{1, 100, 63 * 43, 5000} {
		seed := learn.SubSeed(9, "train")
		X, m := trainingSet(img, 8, want, seed)
		pos := samplePositions(63*43, min(want, 63*43), seed)
		if len(pos) != m {
			t.Fatalf("want %d: %d positions, trainingSet drew %d", want, len(pos), m)
		}
		seen := map[int]bool{}
		got := make([]float64, 64)
		for i, q := range pos {
			if seen[q] || q < 0 || q >= 63*43 {
				t.Fatalf("position %d repeated or out of range", q)
			}
			seen[q] = true
			extractScaled(img, q%63, q/63, 8, 1, got)
			for j, v := range got {
				if v != X[i*64+j] {
					t.Fatalf("want %d: patch %d differs from trainingSet's", want, i)
				}
			}
		}
	}
}

// seamSteps returns the largest |step| between horizontally or vertically
// adjacent pixels across tile borders, and the largest elsewhere.
func seamSteps(img *patches.Image, bx, by []int) (seam, other float64) {
	isB := func(b []int, v int) bool {
		for _, e := range b[1 : len(b)-1] {
			if v == e {
				return true
			}
		}
		return false
	}
	for c := 0; c < img.C; c++ {
		pl := img.Plane(c)
		for y := 0; y < img.H; y++ {
			for x := 0; x < img.W; x++ {
				v := float64(pl[y*img.W+x])
				if x > 0 {
					d := math.Abs(v - float64(pl[y*img.W+x-1]))
					if isB(bx, x) {
						seam = math.Max(seam, d)
					} else {
						other = math.Max(other, d)
					}
				}
				if y > 0 {
					d := math.Abs(v - float64(pl[(y-1)*img.W+x]))
					if isB(by, y) {
						seam = math.Max(seam, d)
					} else {
						other = math.Max(other, d)
					}
				}
			}
		}
	}
	return seam, other
}

// compareTiled restores noisy whole and in tiles and checks that the two
// agree: PSNR within 0.05 dB (the project's acceptance figure), no sample
// further apart than maxDiff, and no seam step larger than the largest
// step elsewhere.
func compareTiled(t testing.TB, clean, noisy *patches.Image, sigma float64, tile int, opt Options, maxDiff float64) {
	t.Helper()
	t0 := time.Now()
	whole, rw, err := Denoise(noisy, sigma, opt)
	if err != nil {
		t.Fatal(err)
	}
	t1 := time.Now()
	tiled, rt, err := DenoiseTiled(noisy, sigma, tile, opt)
	if err != nil {
		t.Fatal(err)
	}
	t2 := time.Now()
	diff := 0.0
	for i := range whole.Pix {
		diff = math.Max(diff, math.Abs(float64(whole.Pix[i]-tiled.Pix[i])))
	}
	pw, pt := psnr(t, clean, whole), psnr(t, clean, tiled)
	bx, by := tileBounds(noisy.W, tile), tileBounds(noisy.H, tile)
	seam, other := seamSteps(tiled, bx, by)
	t.Logf("%d×%d×%d, tile %d (%d×%d tiles): whole %.4f dB in %.2f s, tiled %.4f dB in %.2f s; largest sample difference %.3g; seam step %.2f, elsewhere %.2f; atoms/patch %.4f vs %.4f",
		noisy.W, noisy.H, noisy.C, tile, len(bx)-1, len(by)-1, pw, t1.Sub(t0).Seconds(), pt, t2.Sub(t1).Seconds(), diff, seam, other, rw.MeanAtoms, rt.MeanAtoms)
	if math.Abs(pw-pt) > 0.05 {
		t.Errorf("tiled %.4f dB vs whole %.4f dB: more than 0.05 dB apart", pt, pw)
	}
	if diff > maxDiff {
		t.Errorf("samples differ by up to %g, want ≤ %g", diff, maxDiff)
	}
	if seam > other {
		t.Errorf("largest step across tile borders %.3f exceeds the largest elsewhere %.3f", seam, other)
	}
	if rw.MeanAtoms != rt.MeanAtoms {
		t.Errorf("mean atoms per patch %v whole, %v tiled: the codes differ", rw.MeanAtoms, rt.MeanAtoms)
	}
}

// Only the order of additions differs, so the samples agree to float32
// rounding of values up to 255 (a few 1e-5); 1e-3 leaves room.
func TestTiledEqualsWhole(t *testing.T) {
	clean := newScene(512, 512, 11).frame(0)
	noisy := AddNoise(clean, 20, 1, "tiles")
	opt := Defaults(20)
	opt.Train, opt.Rounds = 4000, 3
	compareTiled(t, clean, noisy, 20, 200, opt, 1e-3)
}

// Uneven sizes, 16 bits, colour coded jointly and apart, a stride, and a
// stored dictionary: every path of DenoiseTiled against Denoise.
func TestTiledVariants(t *testing.T) {
	gray := newScene(157, 131, 5)
	mk := func(c, depth int) (*patches.Image, *patches.Image) {
		clean := patches.New(157, 131, c, depth)
		for ch := 0; ch < c; ch++ {
			f := gray.frame(float64(3 * ch))
			for i, v := range f.Pix {
				clean.Plane(ch)[i] = float32(math.Round(float64(v) * (clean.Peak() / 255)))
			}
		}
		return clean, AddNoise(clean, 15*clean.Peak()/255, 2, "variant")
	}
	base := Defaults(15)
	base.Train, base.Rounds, base.Atoms = 1500, 2, 100
	dict := learn.OvercompleteDCT(6, 9, 1)
	for _, v := range []struct {
		name     string
		c, depth int
		tile     int
		edit     func(*Options)
	}{
		{"gray 8-bit", 1, 8, 40, func(o *Options) {}},
		{"gray 16-bit", 1, 16, 64, func(o *Options) {}},
		{"colour joint 16-bit", 3, 16, 50, func(o *Options) { o.Color = ColorJoint }},
		{"colour apart", 3, 8, 60, func(o *Options) { o.Color = ColorSeparate }},
		{"colour apart 16-bit", 3, 16, 70, func(o *Options) { o.Color = ColorSeparate }},
		{"stride 3", 1, 8, 48, func(o *Options) { o.Stride = 3 }},
		{"stored dictionary", 1, 8, 45, func(o *Options) { o.Dict, o.Rounds, o.Patch = dict, 0, 6 }},
	} {
		t.Run(strings.ReplaceAll(v.name, " ", "_"), func(t *testing.T) {
			clean, noisy := mk(v.c, v.depth)
			o := base
			v.edit(&o)
			// 1e-3 on the 0–255 scale, in the image's units.
			compareTiled(t, clean, noisy, 15*clean.Peak()/255, v.tile, o, 1e-3*clean.Peak()/255)
		})
	}
}

func TestTiledRejectsSmallTiles(t *testing.T) {
	img := newScene(64, 64, 1).frame(0)
	var oe *OptionError
	_, _, err := DenoiseTiled(img, 10, 15, Defaults(10))
	if !errors.As(err, &oe) || oe.Field != "tile" {
		t.Errorf("tile 15 with 8×8 patches: %v", err)
	}
}

func TestTileBounds(t *testing.T) {
	for _, c := range []struct {
		n, tile int
		want    string
	}{{512, 200, "[0 170 341 512]"}, {100, 100, "[0 100]"}, {101, 100, "[0 50 101]"}, {10, 64, "[0 10]"}} {
		if got := fmt.Sprint(tileBounds(c.n, c.tile)); got != c.want {
			t.Errorf("tileBounds(%d, %d) = %s, want %s", c.n, c.tile, got, c.want)
		}
	}
}

// BenchmarkTiled2048 is the 2048×2048 comparison of tiled and whole runs
// (default settings, tile 1024), too heavy for a test:
//
//	go test ./restore -run '^$' -bench Tiled2048 -benchtime 1x
func BenchmarkTiled2048(b *testing.B) {
	clean := newScene(2048, 2048, 13).frame(0)
	noisy := AddNoise(clean, 20, 1, "tiles2048")
	for i := 0; i < b.N; i++ {
		compareTiled(b, clean, noisy, 20, tileOf(b, 1024), Defaults(20), 1e-3)
	}
}

func tileOf(b *testing.B, def int) int {
	if v, err := strconv.Atoi(os.Getenv("TESSERA_TILE")); err == nil {
		return v
	}
	return def
}

// giant is the invented 16-bit gray texture of the large-image
// measurements: the grains-and-fibres scene at 16 bits with white noise of
// σ = 20 on the 8-bit scale (5140 in 16-bit units).
func giant(w, h int) (clean, noisy *patches.Image) {
	g := newScene(w, h, 17).frame(0)
	g.Depth = 16
	for i, v := range g.Pix {
		g.Pix[i] = float32(math.Round(float64(v) * 257))
	}
	n := AddNoise(g, 20*257, 1, "giant")
	n.Quantize()
	return g, n
}

// TestWriteGiantPGM writes the noisy giant texture as a 16-bit PGM for a
// command-line measurement; it runs only when TESSERA_GIANT_PGM names the
// file (TESSERA_GIANT gives the side, default 10000, or W×H as 768x512):
//
//	TESSERA_GIANT_PGM=/tmp/big.pgm go test ./restore -run WriteGiantPGM
func TestWriteGiantPGM(t *testing.T) {
	path := os.Getenv("TESSERA_GIANT_PGM")
	if path == "" {
		t.Skip("set TESSERA_GIANT_PGM to write the giant test image")
	}
	gw, gh := giantSize(10000)
	_, n := giant(gw, gh)
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	w := bufio.NewWriterSize(f, 1<<20)
	fmt.Fprintf(w, "P5\n%d %d\n65535\n", n.W, n.H)
	for _, v := range n.Pix {
		u := uint16(v)
		w.WriteByte(byte(u >> 8))
		w.WriteByte(byte(u))
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
}

// BenchmarkGiant restores the giant texture of TESSERA_GIANT pixels per
// side (default 4000) in tiles of TESSERA_TILE (default 1024), and a
// Kodak-size 768×512 image of the same texture whole, and reports seconds
// per megapixel of both and the peak resident memory of the process
// (VmHWM, which includes the generated image):
//
//	TESSERA_GIANT=10000 go test ./restore -run '^$' -bench Giant -benchtime 1x -timeout 0
func BenchmarkGiant(b *testing.B) {
	w, h := giantSize(4000)
	tile := tileOf(b, 1024)
	opt := Defaults(20)
	_, small := giant(768, 512)
	t0 := time.Now()
	if _, _, err := Denoise(small, 20*257, opt); err != nil {
		b.Fatal(err)
	}
	kodak := time.Since(t0).Seconds() / (768 * 512 / 1e6)
	_, big := giant(w, h)
	runtime.GC()
	for i := 0; i < b.N; i++ {
		t1 := time.Now()
		if _, _, err := DenoiseTiled(big, 20*257, tile, opt); err != nil {
			b.Fatal(err)
		}
		perMP := time.Since(t1).Seconds() / (float64(w*h) / 1e6)
		b.ReportMetric(perMP, "s/MP")
		b.ReportMetric(kodak, "kodak-s/MP")
		b.Logf("%d×%d in tiles of %d: %.2f s/MP; 768×512 whole: %.2f s/MP; peak resident %s", w, h, tile, perMP, kodak, peakRSS())
	}
}

// giantSize reads TESSERA_GIANT: a side, or WxH.
func giantSize(def int) (int, int) {
	v := os.Getenv("TESSERA_GIANT")
	if a, b, ok := strings.Cut(v, "x"); ok {
		w, e1 := strconv.Atoi(a)
		h, e2 := strconv.Atoi(b)
		if e1 == nil && e2 == nil && w > 0 && h > 0 {
			return w, h
		}
	}
	if n, err := strconv.Atoi(v); err == nil && n > 0 {
		return n, n
	}
	return def, def
}

// peakRSS reads the process's peak resident set size from /proc.
func peakRSS() string {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return "unknown"
	}
	for _, l := range strings.Split(string(b), "\n") {
		if v, ok := strings.CutPrefix(l, "VmHWM:"); ok {
			return strings.TrimSpace(v)
		}
	}
	return "unknown"
}
