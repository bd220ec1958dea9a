package restore

import (
	"errors"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"tessera/patches"
	"tessera/restore/noise"
)

// Photon-test settings. The invented frame: y photons, peak 30; gain α = 8
// units per photon and read noise σ = 4 units (half a photon), so the
// stored frame z = 8·Poisson(y) + N(0, 4²) sits in 8-bit units (peak 240).
const (
	photonSide  = 192
	photonPeak  = 30.0
	photonGain  = 8.0
	photonRead  = 4.0
	photonTrain = 4000
	photonRound = 4
)

// photonScene is an invented fluorescence-like field in photons: a dim
// uneven ground, soft blobs and thin bright fibres, scaled to peak 30.
func photonScene(w, h int, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 11))
	y := make([]float64, w*h)
	for j := 0; j < h; j++ {
		for i := 0; i < w; i++ {
			y[j*w+i] = 1 + 1.5*float64(i)/float64(w) + math.Sin(float64(j)/23)
		}
	}
	for range 10 {
		cx, cy := rng.Float64()*float64(w), rng.Float64()*float64(h)
		r, amp := 6+14*rng.Float64(), 4+14*rng.Float64()
		for j := 0; j < h; j++ {
			for i := 0; i < w; i++ {
				dx, dy := float64(i)-cx, float64(j)-cy
				y[j*w+i] += amp * math.Exp(-(dx*dx+dy*dy)/(2*r*r))
			}
		}
	}
	for range 6 {
		y0, a := rng.Float64()*float64(h), 8+25*rng.Float64()
		period, phase := 50+120*rng.Float64(), 2*math.Pi*rng.Float64()
		amp := 8 + 10*rng.Float64()
		for i := 0; i < w; i++ {
			c := y0 + a*math.Sin(2*math.Pi*float64(i)/period+phase)
			for j := int(c) - 4; j <= int(c)+4; j++ {
				if j >= 0 && j < h {
					d := float64(j) - c
					y[j*w+i] += amp * math.Exp(-d*d/(2*1.1*1.1))
				}
			}
		}
	}
	var top float64
	for _, v := range y {
		top = math.Max(top, v)
	}
	for i := range y {
		y[i] *= photonPeak / top
	}
	return y
}

// photonDraw is Poisson(λ) by Knuth's product of uniforms (D. E. Knuth,
// The Art of Computer Programming vol. 2, 3.4.1); fine for λ ≤ 30.
func photonDraw(rng *rand.Rand, lambda float64) float64 {
	l := math.Exp(-lambda)
	k, p := 0, rng.Float64()
	for p > l {
		k++
		p *= rng.Float64()
	}
	return float64(k)
}

var photonFrame = sync.OnceValues(func() (clean, noisy *patches.Image) {
	y := photonScene(photonSide, photonSide, 5)
	rng := rand.New(rand.NewPCG(6, 7))
	clean = patches.New(photonSide, photonSide, 1, 8)
	noisy = patches.New(photonSide, photonSide, 1, 8)
	for i, v := range y {
		clean.Pix[i] = float32(photonGain * v)
		noisy.Pix[i] = float32(photonGain*photonDraw(rng, v) + photonRead*rng.NormFloat64())
	}
	return clean, noisy
})

func photonOptions() Options {
	o := Defaults(25)
	o.Train, o.Rounds = photonTrain, photonRound
	return o
}

func clipPeak(img *patches.Image) *patches.Image {
	out := img.Clone()
	p := float32(img.Peak())
	for i, v := range out.Pix {
		out.Pix[i] = min(max(v, 0), p)
	}
	return out
}

// The Poisson model beats the Gaussian one at its best single σ by at
// least 0.5 dB: the noise deviation here runs from about 5 units in the
// ground to 16 at the peak (√(16 + 8y)), which one σ cannot follow; the
// variance-stabilising route is that of Mäkitalo & Foi (2011, 2013), who
// report gains of this kind over a fixed σ at low counts. The 0.5 dB
// margin is this project's.
func TestPhotonBeatsGaussian(t *testing.T) {
	clean, noisy := photonFrame()
	opt := photonOptions()
	out, res, err := DenoisePhoton(noisy, photonGain, photonRead, opt)
	if err != nil {
		t.Fatal(err)
	}
	if out.Depth != 8 || out.W != photonSide || out.C != 1 {
		t.Fatalf("output %dx%dx%d depth %d", out.W, out.H, out.C, out.Depth)
	}
	for _, v := range out.Pix {
		if v < 0 || v > 255 {
			t.Fatalf("output sample %v outside 0 … 255", v)
		}
	}
	pPoisson := psnr(t, clean, out)
	pNoisy := psnr(t, clean, clipPeak(noisy))

	// The Gaussian model over a grid from the ground's deviation to well
	// above the peak's (K-SVD at one σ does best above the mean deviation
	// here, near 20); the best must lie inside the grid.
	grid := []float64{8, 11, 14, 18, 22, 27}
	bestS, bestP := 0.0, math.Inf(-1)
	for _, s := range grid {
		g, _, err := Denoise(noisy, s, opt)
		if err != nil {
			t.Fatal(err)
		}
		if p := psnr(t, clean, clipPeak(g)); p > bestP {
			bestS, bestP = s, p
		}
	}
	t.Logf("photon frame %d², peak %.0f photons, α=%.0f σ=%.0f: noisy %.2f dB; Poisson model %.2f dB (%.2f atoms/patch); Gaussian best %.2f dB at σ=%.0f",
		photonSide, photonPeak, photonGain, photonRead, pNoisy, pPoisson, res.MeanAtoms, bestP, bestS)
	if bestS == grid[0] || bestS == grid[len(grid)-1] {
		t.Errorf("the Gaussian model's best σ %.0f is at the end of the grid %v", bestS, grid)
	}
	if pPoisson < bestP+0.5 {
		t.Errorf("Poisson model %.2f dB, Gaussian best %.2f dB (σ=%.0f): want a gain of at least 0.5 dB", pPoisson, bestP, bestS)
	}
	if pPoisson < pNoisy+5 {
		t.Errorf("Poisson model %.2f dB, noisy %.2f dB: want a gain of at least 5 dB", pPoisson, pNoisy)
	}
}

// With α and σ estimated from the frame itself the result stays within
// 1 dB of the run with the true values (the project's tolerance).
func TestPhotonEstimatedParameters(t *testing.T) {
	clean, noisy := photonFrame()
	opt := photonOptions()
	a, s := noise.EstimatePoisson(noisy, 0)
	t.Logf("estimated α=%.3f σ=%.3f (true %.0f, %.0f)", a, s, photonGain, photonRead)
	if !(a > 0) {
		t.Fatalf("estimated gain %v", a)
	}
	est, _, err := DenoisePhoton(noisy, a, s, opt)
	if err != nil {
		t.Fatal(err)
	}
	truth, _, err := DenoisePhoton(noisy, photonGain, photonRead, opt)
	if err != nil {
		t.Fatal(err)
	}
	pe, pt := psnr(t, clean, est), psnr(t, clean, truth)
	t.Logf("estimated parameters %.2f dB, true parameters %.2f dB", pe, pt)
	if math.Abs(pe-pt) > 1 {
		t.Errorf("estimated parameters %.2f dB, true ones %.2f dB: want within 1 dB", pe, pt)
	}
}

func TestPhotonBadParameters(t *testing.T) {
	img := patches.New(16, 16, 1, 8)
	opt := photonOptions()
	for _, tc := range []struct {
		alpha, sigma float64
		field        string
	}{
		{0, 1, "gain"}, {-2, 1, "gain"}, {math.NaN(), 1, "gain"}, {math.Inf(1), 1, "gain"},
		{1, -1, "read-noise"}, {1, math.NaN(), "read-noise"}, {1, math.Inf(1), "read-noise"},
	} {
		_, _, err := DenoisePhoton(img, tc.alpha, tc.sigma, opt)
		var oe *OptionError
		if !errors.As(err, &oe) || oe.Field != tc.field {
			t.Errorf("α=%v σ=%v: error %v, want an OptionError on %s", tc.alpha, tc.sigma, err, tc.field)
		}
	}
	// Zero read noise is pure Poisson data, and allowed; a flat frame
	// stays flat (within float rounding of the transforms).
	for i := range img.Pix {
		img.Pix[i] = 40
	}
	out, _, err := DenoisePhoton(img, 2, 0, opt)
	if err != nil {
		t.Fatal(err)
	}
	// E[f] of Poisson(20) maps back to 20 photons; a noise-free 20 is
	// off by about α/4 by design (see noise.InverseGAT), here 0.5 units.
	for _, v := range out.Pix {
		if math.Abs(float64(v)-40.5) > 0.1 {
			t.Fatalf("flat frame of 40: output %v, want about 40.5", v)
		}
	}
}
