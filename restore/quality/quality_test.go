package quality

import (
	"errors"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"tessera/patches"
)

// Source of the expected values: ../shared/reference/reference.json
// metric_pairs, computed with scikit-image 0.19.3 peak_signal_noise_ratio and
// structural_similarity (gaussian_weights=True, sigma=1.5,
// use_sample_covariance=False, data_range=255).
func TestMetricPairs(t *testing.T) {
	s, ref := loadReference(t)
	if len(ref.MetricPairs) == 0 {
		t.Fatal("no metric_pairs in reference.json")
	}
	dir := filepath.Join(s, "reference", "metrics")
	cache := map[string]*patches.Image{}
	load := func(name string) *patches.Image {
		if m, ok := cache[name]; ok {
			return m
		}
		m := loadPNG(t, filepath.Join(dir, name))
		cache[name] = m
		return m
	}
	for _, p := range ref.MetricPairs {
		a, b := load(p.Reference), load(p.Test)
		psnr, err := PSNR(a, b)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(psnr-p.PSNR) > 1e-6 {
			t.Errorf("%s vs %s: PSNR %.9f, scikit-image %.9f", p.Reference, p.Test, psnr, p.PSNR)
		}
		if p.SSIM == nil {
			t.Logf("%-24s PSNR %.6f (diff %.1e)", p.Test, psnr, psnr-p.PSNR)
			continue
		}
		ssim, err := SSIM(a, b)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(ssim-*p.SSIM) > 1e-4 {
			t.Errorf("%s vs %s: SSIM %.7f, scikit-image %.7f", p.Reference, p.Test, ssim, *p.SSIM)
		}
		t.Logf("%-24s PSNR %.6f (diff %.1e)  SSIM %.6f (diff %.1e)", p.Test, psnr, psnr-p.PSNR, ssim, ssim-*p.SSIM)
	}
}

// Source: IPOL "Image Quality Assessment / local image indices" (imdiff -m
// mssim), 0.357959, as cited in scikit-image 0.19.3's tests; via
// reference.json ssim_ipol.
func TestSSIMIPOL(t *testing.T) {
	s, ref := loadReference(t)
	dir := filepath.Join(s, "reference")
	a := loadPNG(t, filepath.Join(dir, ref.SSIMIPOL.Reference))
	b := loadPNG(t, filepath.Join(dir, ref.SSIMIPOL.Test))
	got, err := SSIM(a, b)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("SSIM %.7f; IPOL imdiff %.7f, scikit-image %.7f", got, ref.SSIMIPOL.IPOL, ref.SSIMIPOL.Skimage)
	if math.Abs(got-ref.SSIMIPOL.IPOL) > 1e-3 {
		t.Errorf("SSIM %.6f, IPOL imdiff %.6f", got, ref.SSIMIPOL.IPOL)
	}
	// scikit-image 0.19.3 on the same pair.
	if math.Abs(got-ref.SSIMIPOL.Skimage) > 1e-4 {
		t.Errorf("SSIM %.6f, scikit-image %.6f", got, ref.SSIMIPOL.Skimage)
	}
}

// Source: reference.json gray_conversion (BT.601 luma, rounded half up) and
// the gray file made that way from the same Kodak image.
func TestLumaMatchesReferenceGray(t *testing.T) {
	s := sharedDir(t)
	rgb := loadPNG(t, filepath.Join(s, "kodak", "kodim03.png"))
	want := loadPNG(t, filepath.Join(s, "reference", "metrics", "kodim03_gray.png"))
	got := Luma(rgb, true)
	if got.W != want.W || got.H != want.H || got.C != 1 {
		t.Fatalf("luma size %dx%dx%d, want %dx%dx1", got.W, got.H, got.C, want.W, want.H)
	}
	bad := 0
	for i := range got.Pix {
		if got.Pix[i] != want.Pix[i] {
			if bad < 5 {
				t.Errorf("pixel %d: luma %v, reference %v", i, got.Pix[i], want.Pix[i])
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%d of %d pixels differ", bad, len(got.Pix))
	}
}

// Source: the standard PSNR formula; for N(0, 25²) noise MSE ≈ 625, so
// PSNR ≈ 20·log10(255/25) = 20.17 dB.
func TestPSNRGaussianNoise(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	a := patches.New(512, 512, 1, 8)
	for i := range a.Pix {
		a.Pix[i] = float32(rng.IntN(256))
	}
	b := a.Clone()
	for i := range b.Pix {
		b.Pix[i] += float32(25 * rng.NormFloat64())
	}
	got, err := PSNR(a, b)
	if err != nil {
		t.Fatal(err)
	}
	want := 20 * math.Log10(255.0/25)
	if math.Abs(got-want) > 0.05 {
		t.Errorf("PSNR %.4f, want %.4f ± 0.05", got, want)
	}
}

func TestIdenticalAndErrors(t *testing.T) {
	a := patches.New(32, 20, 3, 8)
	for i := range a.Pix {
		a.Pix[i] = float32(i % 251)
	}
	if p, err := PSNR(a, a.Clone()); err != nil || !math.IsInf(p, 1) {
		t.Errorf("PSNR of identical images = %v, %v; want +Inf", p, err)
	}
	// SSIM of an image with itself is 1 by the definition (Wang et al. 2004).
	if s, err := SSIM(a, a.Clone()); err != nil || math.Abs(s-1) > 1e-12 {
		t.Errorf("SSIM of identical images = %v, %v; want 1", s, err)
	}
	var se *SizeError
	if _, err := PSNR(a, patches.New(32, 21, 3, 8)); !errors.As(err, &se) {
		t.Errorf("PSNR size mismatch: error %v, want *SizeError", err)
	}
	if _, err := SSIM(a, patches.New(32, 20, 1, 8)); !errors.As(err, &se) {
		t.Errorf("SSIM channel mismatch: error %v, want *SizeError", err)
	}
	small := patches.New(10, 40, 1, 8)
	if _, err := SSIM(small, small.Clone()); !errors.As(err, &se) {
		t.Errorf("SSIM of a 10-wide image: error %v, want *SizeError", err)
	}
}

// SSIM of a color pair equals SSIM of the two unrounded lumas (this
// package's documented rule).
func TestSSIMColorIsLuma(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	a := patches.New(40, 30, 3, 8)
	for i := range a.Pix {
		a.Pix[i] = float32(rng.IntN(256))
	}
	b := a.Clone()
	for i := range b.Pix {
		b.Pix[i] += float32(10 * rng.NormFloat64())
	}
	got, _ := SSIM(a, b)
	want, _ := SSIM(Luma(a, false), Luma(b, false))
	if got != want || got >= 1 || got <= 0 {
		t.Errorf("color SSIM %v, luma SSIM %v", got, want)
	}
}

func BenchmarkSSIM(b *testing.B) {
	rng := rand.New(rand.NewPCG(5, 6))
	x := patches.New(768, 512, 1, 8)
	for i := range x.Pix {
		x.Pix[i] = float32(rng.IntN(256))
	}
	y := x.Clone()
	for i := range y.Pix {
		y.Pix[i] += float32(20 * rng.NormFloat64())
	}
	b.ResetTimer()
	for b.Loop() {
		if _, err := SSIM(x, y); err != nil {
			b.Fatal(err)
		}
	}
}
