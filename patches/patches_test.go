package patches

import (
	"math"
	"testing"
)

func TestPositionsCoverEveryPixel(t *testing.T) {
	for _, c := range []struct{ n, p, s int }{{10, 8, 1}, {10, 8, 3}, {8, 8, 1}, {37, 8, 4}} {
		pos := Positions(c.n, c.p, c.s)
		covered := make([]bool, c.n)
		for _, x := range pos {
			for i := x; i < x+c.p; i++ {
				covered[i] = true
			}
		}
		for i, ok := range covered {
			if !ok {
				t.Errorf("n=%d p=%d stride=%d: pixel %d not covered by %v", c.n, c.p, c.s, i, pos)
			}
		}
		if pos[len(pos)-1] != c.n-c.p {
			t.Errorf("n=%d p=%d stride=%d: last window at %d", c.n, c.p, c.s, pos[len(pos)-1])
		}
	}
}

// A worked case of eq. 21 of Elad & Aharon (2006): on a 3×1 image with 2×1
// patches (positions 0 and 1), pixel 1 is covered twice, so its value is
// (λ·y₁ + a₁ + b₀)/(λ + 2), where a and b are the two restored patches.
func TestBlendIsTheWeightedAverage(t *testing.T) {
	img := New(3, 1, 1, 8)
	copy(img.Pix, []float32{10, 20, 30})
	// Restored patches a = (12, 22) at 0 and b = (26, 28) at 1.
	acc := NewAccumulator(3, 1, 1, 1)
	acc.Sum = []float64{12, 22 + 26, 28}
	acc.Count = []float64{1, 2, 1}
	lambda := 0.5
	out := acc.Blend(img, lambda)
	want := []float64{(0.5*10 + 12) / 1.5, (0.5*20 + 48) / 2.5, (0.5*30 + 28) / 1.5}
	for i, w := range want {
		if math.Abs(float64(out.Pix[i])-w) > 1e-5 {
			t.Errorf("pixel %d: %g, want %g", i, out.Pix[i], w)
		}
	}
}

func TestExtractAndAddAreInverse(t *testing.T) {
	img := New(5, 4, 2, 8)
	for i := range img.Pix {
		img.Pix[i] = float32(i)
	}
	p := 3
	buf := make([]float64, 2*p*p)
	mean := Extract(img, 1, 1, p, buf, true)
	s := 0.0
	for _, v := range buf {
		s += v
	}
	if math.Abs(s) > 1e-9 {
		t.Fatalf("centred patch sums to %g", s)
	}
	for i := range buf {
		buf[i] += mean
	}
	acc := NewAccumulator(5, 4, 2, p)
	acc.Add(1, 1, buf, 1)
	for c := 0; c < 2; c++ {
		for y := 1; y < 4; y++ {
			for x := 1; x < 4; x++ {
				i := c*20 + y*5 + x
				if math.Abs(acc.Sum[i]-float64(img.Pix[i])) > 1e-9 || acc.Count[y*5+x] != 1 {
					t.Fatalf("channel %d (%d,%d): sum %g count %g, want %g and 1", c, x, y, acc.Sum[i], acc.Count[y*5+x], img.Pix[i])
				}
			}
		}
	}
}

func TestQuantizeRoundsHalfUpAndClips(t *testing.T) {
	img := New(5, 1, 1, 8)
	copy(img.Pix, []float32{-3, 0.5, 1.49, 254.5, 300})
	img.Quantize()
	want := []float32{0, 1, 1, 255, 255}
	for i, w := range want {
		if img.Pix[i] != w {
			t.Errorf("sample %d: %g, want %g", i, img.Pix[i], w)
		}
	}
}
