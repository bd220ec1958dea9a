package noise

import (
	"math/rand/v2"
	"testing"

	"tessera/patches"
)

// benchImage is a 1000×1000 (one megapixel) gray scene with smooth shading,
// edges and noise of σ = 10.
func benchImage() *patches.Image {
	const w, h = 1000, 1000
	img := patches.New(w, h, 1, 8)
	rng := rand.New(rand.NewPCG(7, 8))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			v := 60 + 0.1*float64(x) + 0.05*float64(y)
			if (x/125+y/125)%2 == 0 {
				v += 40
			}
			img.Pix[y*w+x] = float32(v + 10*rng.NormFloat64())
		}
	}
	return img
}

// BenchmarkEstimate times the default estimator on one megapixel, so ns/op
// is the time per megapixel.
func BenchmarkEstimate(b *testing.B) {
	img := benchImage()
	b.ResetTimer()
	for b.Loop() {
		Estimate(img, 0)
	}
}

func BenchmarkWavelet(b *testing.B) {
	img := benchImage()
	b.ResetTimer()
	for b.Loop() {
		Wavelet(img, 0)
	}
}

// BenchmarkEstimatePoisson times the Poisson–Gaussian fit on one megapixel.
func BenchmarkEstimatePoisson(b *testing.B) {
	img := benchImage()
	b.ResetTimer()
	for b.Loop() {
		EstimatePoisson(img, 0)
	}
}

// BenchmarkEstimatePoissonClipped: the same scene darkened so that a
// quarter of it is clipped at 0, which brings in the censored fit.
func BenchmarkEstimatePoissonClipped(b *testing.B) {
	img := benchImage()
	for i, v := range img.Pix {
		img.Pix[i] = max(0, v-70)
	}
	img.Quantize()
	b.ResetTimer()
	for b.Loop() {
		EstimatePoisson(img, 0)
	}
}
