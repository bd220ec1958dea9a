package noise

import (
	"errors"
	"image"
	"image/png"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
)

// Moments of a censored normal, checked by integrating the normal density
// numerically (trapezoid rule on a fine grid) against the closed forms
// of the censored variable (the clipped model of Foi et al. 2008).
func TestCensoredMoments(t *testing.T) {
	for _, tc := range [][4]float64{
		{0, 1, 0, math.Inf(1)}, {-2, 3, 0, math.Inf(1)}, {5, 2, 0, 8}, {250, 10, 0, 255},
		{3, 1, math.Inf(-1), math.Inf(1)}, {60000, 40, 0, 65535},
	} {
		mu, s, lo, hi := tc[0], tc[1], tc[2], tc[3]
		var m1, m2 float64
		const dt = 1e-4
		for u := -12.0; u <= 12; u += dt {
			x := math.Min(hi, math.Max(lo, mu+s*u))
			p := math.Exp(-u*u/2) / math.Sqrt(2*math.Pi) * dt
			m1 += x * p
			m2 += (x - mu) * (x - mu) * p
		}
		v := m2 - (m1-mu)*(m1-mu)
		gm, gv := censored(mu, s, lo, hi)
		if math.Abs(gm-m1) > 1e-5*s || math.Abs(gv-v) > 1e-5*s*s {
			t.Errorf("μ=%v s=%v [%v, %v]: censored mean %.8g var %.8g, integral %.8g %.8g", mu, s, lo, hi, gm, gv, m1, v)
		}
	}
}

func TestNelderMead(t *testing.T) {
	f := func(x [2]float64) float64 {
		a, b := x[0]-3, x[1]+1
		return 4*a*a + b*b + a*b
	}
	x := nelderMead(f, [2]float64{0, 0}, [2]float64{0.5, 0.5})
	if math.Abs(x[0]-3) > 1e-3 || math.Abs(x[1]+1) > 1e-3 {
		t.Errorf("minimum at %v, want (3, -1)", x)
	}
}

// Data clipped at 0 (a dark ground) and at 255 (saturated blobs), rounded:
// the censored model recovers α and σ within 15 % (the project's
// tolerance), where a plain line fit reads σ far too low.
func TestEstimatePoissonClipped(t *testing.T) {
	const w, h = 768, 512
	y := pgSceneN(w, h, 21, 12)
	for _, tc := range []struct {
		shift, scale, alpha, sigma float64
		lo, hi                     bool
	}{
		{-20, 1, 2, 6, true, false},
		{-25, 2.2, 2, 5, true, true},
		{-10, 2.5, 1, 4, false, true},
	} {
		yy := make([]float64, len(y))
		for i, v := range y {
			yy[i] = math.Max(0, tc.scale*v+tc.shift)
		}
		img := pgNoisy(yy, w, h, tc.alpha, tc.sigma, 22)
		img.Quantize()
		lo, hi := clipBounds(img.Plane(0), 255)
		if lo != tc.lo || hi != tc.hi {
			t.Fatalf("%+v: clipped at 0 %v, at 255 %v", tc, lo, hi)
		}
		a, s := EstimatePoisson(img, 0)
		a0, b0 := fitLine(levelSets(smoothTiles(img.Plane(0), w, h, pgTile), pgTile))
		t.Logf("truth α=%v σ=%v: estimate α=%.3f σ=%.3f; line fit α=%.3f σ=%.3f", tc.alpha, tc.sigma, a, s, a0, math.Sqrt(b0))
		if math.Abs(a-tc.alpha) > 0.15*tc.alpha || math.Abs(s-tc.sigma) > 0.15*tc.sigma {
			t.Errorf("truth α=%v σ=%v: estimate α=%.3f σ=%.3f, want within 15 %%", tc.alpha, tc.sigma, a, s)
		}
		if tc.lo && math.Sqrt(b0) > 0.7*tc.sigma {
			t.Errorf("the line fit reads σ=%.3f on data clipped at 0 (truth %v): the case does not test clipping", math.Sqrt(b0), tc.sigma)
		}
	}
	// Data with negative values were not clipped.
	if lo, hi := clipBounds([]float32{-1, 0, 0, 0, 255}, 255); lo || hi {
		t.Error("data below 0 counted as clipped")
	}
}

// The bundled fluorescence samples (samples/README.md: gain 40 units per
// photon, read noise 60 units, 16-bit, about 13 % of the samples clipped
// at 0): α within 30 % and σ within 20 % on each frame (the project's
// tolerances for a 256×256 frame).
func TestEstimatePoissonSamples(t *testing.T) {
	dir := filepath.Join(moduleRoot(t), "samples", "noisy", "fluorescence")
	for _, n := range []string{"t1.png", "t2.png", "t3.png", "t4.png"} {
		img := loadPNG16(t, filepath.Join(dir, n))
		a, s := EstimatePoisson(img, 0)
		t.Logf("%s: α=%.2f σ=%.2f (true 40, 60)", n, a, s)
		if math.Abs(a-40) > 12 || math.Abs(s-60) > 12 {
			t.Errorf("%s: α=%.2f σ=%.2f, true 40 and 60", n, a, s)
		}
	}
}

func moduleRoot(t *testing.T) string {
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		up := filepath.Dir(dir)
		if up == dir {
			t.Skip("module root not found")
		}
		dir = up
	}
}

// loadPNG16 reads a 16-bit gray PNG exactly, or skips when it is absent.
func loadPNG16(t *testing.T, path string) *patches.Image {
	f, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		t.Skipf("%s is absent (regenerate with go run ./samples/gen)", path)
	}
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	g, ok := m.(*image.Gray16)
	if !ok {
		t.Fatalf("%s: %T, want 16-bit gray", path, m)
	}
	b := g.Bounds()
	img := patches.New(b.Dx(), b.Dy(), 1, 16)
	for y := 0; y < b.Dy(); y++ {
		for x := 0; x < b.Dx(); x++ {
			img.Pix[y*b.Dx()+x] = float32(g.Gray16At(b.Min.X+x, b.Min.Y+y).Y)
		}
	}
	return img
}
