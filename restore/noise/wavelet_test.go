package noise

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"testing"
)

// Source: reference.json wavelet_sigma, scikit-image 0.19.3 estimate_sigma on
// the uint8 images.
func TestWaveletMatchesReference(t *testing.T) {
	s, ref := loadReference(t)
	if len(ref.WaveletSigma.Values) == 0 {
		t.Fatal("no wavelet_sigma values")
	}
	for _, v := range ref.WaveletSigma.Values {
		img := loadPNG(t, filepath.Join(s, "reference", "metrics", v.Image))
		got := Wavelet(img, 0)
		if math.Abs(got-v.Sigma) > 1e-6 {
			t.Errorf("%s: wavelet sigma %.9f, scikit-image %.9f", v.Image, got, v.Sigma)
		}
		t.Logf("%-24s %.9f (diff %.1e)", v.Image, got, got-v.Sigma)
	}
}

func TestMedian(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	for n := 1; n < 300; n += 7 {
		a := make([]float64, n)
		for i := range a {
			a[i] = float64(rng.IntN(50)) // ties on purpose
		}
		s := slices.Clone(a)
		slices.Sort(s)
		want := s[n/2]
		if n%2 == 0 {
			want = 0.5 * (s[n/2-1] + s[n/2])
		}
		if got := median(a); got != want {
			t.Fatalf("n=%d: median %v, want %v", n, got, want)
		}
	}
}

// The symmetric extension, built here by literally mirroring the line
// (… x1 x0 | x0 … xn-1 | xn-1 xn-2 …, PyWavelets mode "symmetric"), also for
// lines shorter than the filter.
func TestDWTHiExtension(t *testing.T) {
	for n := 1; n <= 9; n++ {
		x := make([]float64, n)
		for i := range x {
			x[i] = float64(i*i + 1)
		}
		// Mirror repeatedly: period 2n of x followed by x reversed.
		period := append(slices.Clone(x), x...)
		slices.Reverse(period[n:])
		ext := func(m int) float64 { return period[((m%(2*n))+2*n)%(2*n)] }
		out := make([]float64, (n+3)/2)
		dwtHi(out, x)
		for o := range out {
			var want float64
			for j := 0; j < 4; j++ {
				want += db2DecHi[j] * ext(2*o+1-j)
			}
			if math.Abs(out[o]-want) > 1e-12 {
				t.Errorf("n=%d o=%d: %v, want %v", n, o, out[o], want)
			}
		}
	}
	// The high pass kills constants and ramps (two vanishing moments).
	ramp := []float64{3, 5, 7, 9, 11, 13, 15, 17}
	out := make([]float64, 5)
	dwtHi(out, ramp)
	for o := 1; o < 4; o++ {
		if math.Abs(out[o]) > 1e-12 {
			t.Errorf("ramp: interior coefficient %d = %v", o, out[o])
		}
	}
}
