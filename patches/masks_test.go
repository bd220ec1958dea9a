package patches

import (
	"math"
	"testing"
)

func TestRandomMaskFraction(t *testing.T) {
	for _, f := range []float64{0.5, 0.8} {
		m := RandomMask(512, 512, f, 3)
		n := 0
		for _, v := range m {
			if v {
				n++
			}
		}
		// Binomial: the count's s.d. is √(N f (1−f)) ≈ 256·0.5; 5 s.d. bound.
		N := float64(len(m))
		if d := math.Abs(float64(n) - f*N); d > 5*math.Sqrt(N*f*(1-f)) {
			t.Errorf("frac %g: %d of %d missing", f, n, len(m))
		}
		if !equalMasks(m, RandomMask(512, 512, f, 3)) || equalMasks(m, RandomMask(512, 512, f, 4)) {
			t.Errorf("frac %g: the mask must follow the seed", f)
		}
	}
}

func TestTextMask(t *testing.T) {
	w, h := 768, 512
	m := TextMask(w, h, 1)
	n, rows := 0, 0
	for y := 0; y < h; y++ {
		any := false
		for x := 0; x < w; x++ {
			if m[y*w+x] {
				n++
				any = true
			}
		}
		if any {
			rows++
		}
	}
	frac := float64(n) / float64(w*h)
	t.Logf("text mask %d×%d: %.1f%% of the pixels, on %d of %d rows", w, h, 100*frac, rows, h)
	// Lines every 40 rows with glyphs 26 rows tall: text on well under
	// two thirds of the rows, and a few percent of the pixels.
	if frac < 0.02 || frac > 0.25 || rows > 2*h/3 || rows < h/5 {
		t.Errorf("text mask covers %.3f of the pixels on %d rows", frac, rows)
	}
	if !equalMasks(m, TextMask(w, h, 1)) || equalMasks(m, TextMask(w, h, 2)) {
		t.Error("the mask must follow the seed")
	}
}

func equalMasks(a, b []bool) bool {
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return len(a) == len(b)
}
