package noise

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"tessera/patches"
)

func TestParseMethod(t *testing.T) {
	for _, m := range []Method{MethodPCA, MethodWavelet} {
		got, err := ParseMethod(m.String())
		if err != nil || got != m {
			t.Errorf("ParseMethod(%q) = %v, %v", m.String(), got, err)
		}
	}
	var me *MethodError
	if _, err := ParseMethod("median"); !errors.As(err, &me) || me.Name != "median" {
		t.Errorf("ParseMethod(median): error %v, want *MethodError", err)
	}
	if Default.String() != "pca" {
		t.Errorf("Default is %v", Default)
	}
}

func gaussImage(w, h, c int, sigmas []float64, seed uint64) *patches.Image {
	rng := rand.New(rand.NewPCG(seed, 3))
	img := patches.New(w, h, c, 8)
	n := w * h
	for ch := 0; ch < c; ch++ {
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				v := 100 + 50*math.Sin(float64(x)/40)*math.Cos(float64(y)/55) + 20*float64(ch)
				img.Pix[ch*n+y*w+x] = float32(v + sigmas[ch]*rng.NormFloat64())
			}
		}
	}
	return img
}

// Per-channel estimates of a color image with a different σ per channel.
func TestEstimateAll(t *testing.T) {
	sig := []float64{3, 8, 15}
	img := gaussImage(300, 200, 3, sig, 1)
	for _, m := range []Method{MethodPCA, MethodWavelet} {
		got := m.EstimateAll(img)
		for c, s := range sig {
			if math.Abs(got[c]-s) > 0.05*s {
				t.Errorf("%v channel %d: estimate %.3f, want %.1f ± 5 %%", m, c, got[c], s)
			}
		}
	}
	if got := EstimateAll(img); len(got) != 3 || got[1] != PCA(img, 1) {
		t.Errorf("EstimateAll = %v, want the PCA estimates", got)
	}
}

// Noise estimates scale with the data: a 16-bit copy scaled by 257 gives
// 257 times the estimate (equivariance of both methods).
func TestEstimateScales(t *testing.T) {
	img := gaussImage(256, 256, 1, []float64{6}, 2)
	big := img.Clone()
	big.Depth = 16
	for i := range big.Pix {
		big.Pix[i] *= 257
	}
	for _, m := range []Method{MethodPCA, MethodWavelet} {
		a, b := m.Estimate(img, 0), m.Estimate(big, 0)
		if math.Abs(b/a-257) > 257*1e-4 {
			t.Errorf("%v: %v at 8 bits, %v scaled by 257 (ratio %v)", m, a, b, b/a)
		}
	}
}

// Images too small for patches fall back to Wavelet; a flat image is
// noise-free.
func TestEstimateEdgeCases(t *testing.T) {
	small := gaussImage(12, 9, 1, []float64{4}, 3)
	if got, want := PCA(small, 0), Wavelet(small, 0); got != want {
		t.Errorf("small image: PCA %v, want the Wavelet fallback %v", got, want)
	}
	flat := patches.New(64, 64, 1, 8)
	for i := range flat.Pix {
		flat.Pix[i] = 77
	}
	if p, w := PCA(flat, 0), Wavelet(flat, 0); p > 1e-6 || w > 1e-6 {
		t.Errorf("flat image: PCA %v, Wavelet %v, want 0", p, w)
	}
	defer func() {
		if recover() == nil {
			t.Error("channel 1 of a gray image did not panic")
		}
	}()
	Estimate(flat, 1)
}

// The weak-texture threshold uses tr(DᵀD) = p(p−2) and rank(DᵀD) = p²−4
// for the in-patch gradient operators D (Liu et al. 2013); checked here by
// building D.
func TestGradientOperatorTraceRank(t *testing.T) {
	const p, n = pcaPatch, pcaDim
	rows := 2 * p * (p - 2)
	d := mat.NewDense(rows, n, nil)
	r := 0
	for y := 0; y < p; y++ {
		for x := 1; x < p-1; x++ {
			d.Set(r, y*p+x+1, 0.5)
			d.Set(r, y*p+x-1, -0.5)
			r++
		}
	}
	for y := 1; y < p-1; y++ {
		for x := 0; x < p; x++ {
			d.Set(r, (y+1)*p+x, 0.5)
			d.Set(r, (y-1)*p+x, -0.5)
			r++
		}
	}
	var dd mat.SymDense
	dd.SymOuterK(1, d.T())
	if tr := mat.Trace(&dd); math.Abs(tr-float64(p*(p-2))) > 1e-12 {
		t.Errorf("tr(DᵀD) = %v, want %d", tr, p*(p-2))
	}
	var eig mat.EigenSym
	if !eig.Factorize(&dd, false) {
		t.Fatal("eigen decomposition failed")
	}
	rank := 0
	for _, v := range eig.Values(nil) {
		if v > 1e-9 {
			rank++
		}
	}
	if rank != p*p-4 {
		t.Errorf("rank(DᵀD) = %d, want %d", rank, p*p-4)
	}
}

func TestGATPanicsOnBadGain(t *testing.T) {
	for _, a := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("GAT with α = %v did not panic", a)
				}
			}()
			GAT(1, a, 0)
		}()
	}
}

func TestGATImageRoundTrip(t *testing.T) {
	img := gaussImage(40, 30, 2, []float64{0, 0}, 4)
	back := InverseGATImage(GATImage(img, 2, 3), 2, 3)
	for i, v := range img.Pix {
		// Without noise the inverse is off by design (it inverts the mean
		// of transformed noisy data): D²/4 − 1/8 gives back z/α + 3/8 − 1/8,
		// so about +α/4 = 0.5 here, plus the D⁻¹ terms (< 0.08 for these
		// values, D > 10).
		if d := float64(back.Pix[i] - v); math.Abs(d-0.5) > 0.08 {
			t.Fatalf("sample %d: %v → %v", i, v, back.Pix[i])
		}
	}
}
