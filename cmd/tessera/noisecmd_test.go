package main

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
	"tessera/restore/noise"
)

// photonImage is an invented 16-bit frame under the photon model: a ramp
// of 2 … 14 photons with soft blobs up to about 30, stored as
// gain·Poisson(y) + N(0, read²), rounded and clipped. It returns the
// noisy file and the clean frame (gain·y).
func photonImage(w int, gain, read float64, seed uint64) (*imgfile.File, *patches.Image) {
	r := rand.New(rand.NewPCG(seed, 9))
	clean := patches.New(w, w, 1, 16)
	noisy := patches.New(w, w, 1, 16)
	for y := 0; y < w; y++ {
		for x := 0; x < w; x++ {
			v := 2 + 12*float64(x)/float64(w)
			for _, b := range [][3]float64{{0.3, 0.3, 16}, {0.7, 0.6, 12}, {0.4, 0.8, 9}} {
				dx, dy := float64(x)/float64(w)-b[0], float64(y)/float64(w)-b[1]
				v += b[2] * math.Exp(-(dx*dx+dy*dy)/(2*0.08*0.08))
			}
			clean.Pix[y*w+x] = float32(gain * v)
			noisy.Pix[y*w+x] = float32(gain*knuthPoisson(r, v) + read*r.NormFloat64())
		}
	}
	noisy.Quantize()
	return &imgfile.File{Img: noisy, Format: "png"}, clean
}

// knuthPoisson draws Poisson(λ) by Knuth's product of uniforms (The Art
// of Computer Programming vol. 2, 3.4.1); fine for the λ ≤ 40 used here.
func knuthPoisson(r *rand.Rand, lambda float64) float64 {
	l := math.Exp(-lambda)
	k, p := 0, r.Float64()
	for p > l {
		k++
		p *= r.Float64()
	}
	return float64(k)
}

// TestNoiseCommand: the JSON records hold what the estimators give for the
// decoded files (so units and channels are plumbed through), sigma is the
// RMS over channels, a bad file fails alone with a line naming it, and the
// table has one row per input.
func TestNoiseCommand(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	g8, _ := testImage(96, 96, 1, 8, false, 1)
	c8, _ := testImage(96, 80, 3, 8, true, 2)
	g16, _ := testImage(96, 96, 1, 16, false, 3)
	writeImage(t, filepath.Join(in, "a-gray.png"), g8, "png")
	writeImage(t, filepath.Join(in, "sub", "b-colour.png"), c8, "png")
	writeImage(t, filepath.Join(in, "c-16.tif"), g16, "tiff")
	os.WriteFile(filepath.Join(in, "d-broken.png"), []byte("not a PNG at all"), 0o644)
	os.WriteFile(filepath.Join(in, "notes.txt"), []byte("skipped"), 0o644)

	for _, method := range []string{"pca", "wavelet"} {
		r := tessera(t, dir, nil, nil, "noise", "in", "--json", "--method", method)
		r.want(t, 1, "in/d-broken.png", "1 of 4 images could not be measured")
		recs := parseReport(t, r.stdout)
		if len(recs) != 4 {
			t.Fatalf("%d records, want 4:\n%s", len(recs), r.stdout)
		}
		m, _ := noise.ParseMethod(method)
		for _, rec := range recs {
			name := rec["input"].(string)
			if strings.HasSuffix(name, "d-broken.png") {
				if rec["error"] == nil || rec["sigma"] != nil {
					t.Fatalf("broken file: %v", rec)
				}
				continue
			}
			if rec["method"] != method {
				t.Fatalf("%s: method %v", name, rec["method"])
			}
			img := decode(t, filepath.Join(dir, name)).Img
			want := m.EstimateAll(img)
			ch, _ := rec["sigma_channels"].([]any)
			if len(ch) != img.C || rec["channels"] != float64(img.C) || rec["width"] != float64(img.W) ||
				rec["height"] != float64(img.H) || rec["bit_depth"] != float64(img.Depth) {
				t.Fatalf("%s: record %v for a %d×%d×%d %d-bit image", name, rec, img.W, img.H, img.C, img.Depth)
			}
			sum := 0.0
			for c, v := range ch {
				if math.Abs(v.(float64)-want[c]) > 1e-4 {
					t.Fatalf("%s channel %d: %v, estimator gives %v", name, c, v, want[c])
				}
				sum += want[c] * want[c]
			}
			if s := rec["sigma"].(float64); math.Abs(s-math.Sqrt(sum/float64(len(ch)))) > 1e-4 {
				t.Fatalf("%s: sigma %v is not the RMS of %v", name, s, want)
			}
			// testImage adds σ = 10 (8-bit units, ×257 at 16 bits); the
			// factor 1.3 checks the units only.
			truth := 10 * img.Peak() / 255
			if s := rec["sigma"].(float64); !(s > truth/1.3 && s < truth*1.3) {
				t.Fatalf("%s: sigma %v, true %v", name, s, truth)
			}
			if _, ok := rec["gain"]; ok {
				t.Fatalf("%s: gain without --noise poisson", name)
			}
		}
	}

	r := tessera(t, dir, nil, nil, "noise", "in")
	r.want(t, 1, "tessera: in/d-broken.png: ")
	lines := strings.Split(strings.TrimSpace(r.stdout), "\n")
	if len(lines) != 5 || !strings.HasPrefix(lines[0], "input") || !strings.Contains(lines[0], "sigma (pca)") {
		t.Fatalf("table:\n%s", r.stdout)
	}
	if !strings.Contains(r.stdout, "96×80 RGB") || !strings.Contains(lines[3], "failed") {
		t.Fatalf("table rows:\n%s", r.stdout)
	}

	// Standard input, and a file named on its own.
	data, _ := os.ReadFile(filepath.Join(in, "a-gray.png"))
	s := parseReport(t, tessera(t, dir, data, nil, "noise", "--json", "-").stdout)
	f := parseReport(t, tessera(t, dir, nil, nil, "noise", "--json", "in/a-gray.png").stdout)
	if len(s) != 1 || len(f) != 1 || s[0]["input"] != "stdin" || s[0]["sigma"] != f[0]["sigma"] {
		t.Fatalf("stdin %v, file %v", s, f)
	}
}

// The photon model through the command line: α and σ near the truth on
// the invented frame (α = 40, σ = 60, as the fluorescence samples; the
// 25 % tolerance checks the plumbing, restore/noise tests the fit).
func TestNoisePoisson(t *testing.T) {
	dir := t.TempDir()
	f, _ := photonImage(256, 40, 60, 1)
	writeImage(t, filepath.Join(dir, "p.png"), f, "png")
	r := tessera(t, dir, nil, nil, "noise", "--noise", "poisson", "--json", "p.png")
	r.want(t, 0)
	recs := parseReport(t, r.stdout)
	if len(recs) != 1 {
		t.Fatalf("records: %s", r.stdout)
	}
	a, _ := recs[0]["gain"].(float64)
	s, _ := recs[0]["read_noise"].(float64)
	t.Logf("gain %.2f, read noise %.2f (true 40, 60)", a, s)
	if math.Abs(a-40) > 10 || math.Abs(s-60) > 15 {
		t.Fatalf("gain %v read noise %v, true 40 and 60", a, s)
	}
	wantA, wantS := noise.EstimatePoisson(decode(t, filepath.Join(dir, "p.png")).Img, 0)
	if math.Abs(a-wantA) > 1e-4 || math.Abs(s-wantS) > 1e-4 {
		t.Fatalf("gain %v read noise %v, EstimatePoisson gives %v %v", a, s, wantA, wantS)
	}
	tab := tessera(t, dir, nil, nil, "noise", "--noise", "poisson", "p.png")
	if !strings.Contains(tab.stdout, "gain") || !strings.Contains(tab.stdout, "read noise") {
		t.Fatalf("table:\n%s", tab.stdout)
	}
}

func TestNoiseUsage(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		args []string
		msg  string
	}{
		{[]string{"noise"}, "give at least one PATH"},
		{[]string{"noise", "--method", "median", "x.png"}, `--method "median": unknown estimator`},
		{[]string{"noise", "--noise", "speckle", "x.png"}, `--noise "speckle": unknown noise model`},
		{[]string{"noise", "--jobs", "0", "x.png"}, "--jobs 0"},
		{[]string{"noise", "a.png", "-"}, "must be the only PATH"},
		{[]string{"denoise", "--gain", "3", "x.png"}, "--gain goes with --noise poisson"},
		{[]string{"denoise", "--noise", "poisson", "--sigma", "3", "x.png"}, "--sigma goes with --noise gauss"},
		{[]string{"denoise", "--noise", "poisson", "--gain", "0", "x.png"}, `--gain "0": must be a finite number above 0`},
		{[]string{"denoise", "--noise", "poisson", "--read-noise", "-1", "x.png"}, `--read-noise "-1": must be a finite number 0 or more`},
		{[]string{"denoise", "--noise", "laplace", "x.png"}, `--noise "laplace"`},
	} {
		r := tessera(t, dir, nil, nil, tc.args...)
		if r.code != 2 || !strings.Contains(r.stderr, tc.msg) {
			t.Errorf("tessera %v: status %d, stderr %q; want 2 and %q", tc.args, r.code, r.stderr, tc.msg)
		}
	}
	r := tessera(t, dir, nil, nil, "noise", "--help")
	if r.code != 0 || !strings.Contains(r.stdout, "--noise poisson also fits the photon model") {
		t.Fatalf("help: status %d\n%s", r.code, r.stdout)
	}
}

// tessera denoise --noise poisson: estimated α and σ in the report (sigma
// null), given ones marked as given, and a result closer to the clean
// frame than the input. The gain bound is loose (a factor 0.6 in MSE);
// restore's tests measure the method.
func TestDenoisePoisson(t *testing.T) {
	dir := t.TempDir()
	f, clean := photonImage(96, 40, 60, 2)
	writeImage(t, filepath.Join(dir, "p.png"), f, "png")
	r := tessera(t, dir, nil, nil, append(append([]string{"denoise"}, fast...),
		"--noise", "poisson", "p.png", "--out", "est.png", "--report", "-")...)
	r.want(t, 0, "1 done")
	rec := parseReport(t, r.stdout)[0]
	if rec["sigma"] != nil || rec["gain_estimated"] != true || rec["read_noise_estimated"] != true {
		t.Fatalf("report %v", rec)
	}
	if a, _ := rec["gain"].(float64); !(a > 20 && a < 60) {
		t.Fatalf("estimated gain %v, true 40", rec["gain"])
	}
	out := decode(t, filepath.Join(dir, "est.png")).Img
	if before, after := mse(f.Img, clean), mse(out, clean); !(after < 0.6*before) {
		t.Fatalf("MSE to the clean frame %.0f after, %.0f before", after, before)
	}

	r = tessera(t, dir, nil, nil, append(append([]string{"denoise"}, fast...),
		"--noise", "poisson", "--gain", "40", "--read-noise", "60", "p.png", "--out", "given.png", "--report", "-")...)
	r.want(t, 0, "1 done")
	rec = parseReport(t, r.stdout)[0]
	if rec["gain"] != 40.0 || rec["read_noise"] != 60.0 || rec["gain_estimated"] != false || rec["read_noise_estimated"] != false {
		t.Fatalf("report %v", rec)
	}
	if _, ok := rec["gain_channels"]; ok {
		t.Fatalf("per-channel fits reported for given parameters: %v", rec)
	}

	// A noise-free ramp has no signal-dependent noise to find.
	ramp := patches.New(64, 64, 1, 8)
	for i := range ramp.Pix {
		ramp.Pix[i] = float32(i % 64 * 2)
	}
	writeImage(t, filepath.Join(dir, "ramp.png"), &imgfile.File{Img: ramp}, "png")
	tessera(t, dir, nil, nil, append(append([]string{"denoise"}, fast...), "--noise", "poisson", "ramp.png")...).
		want(t, 1, "tessera: ramp.png: no signal-dependent noise found (estimated gain 0); give --gain, or use --noise gauss")
}
