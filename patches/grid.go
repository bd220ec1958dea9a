package patches

import "fmt"

// Positions returns the top-left coordinates of p-long windows along a
// side of length n at the given stride, always including the last window
// (n−p) so that every pixel is covered.
func Positions(n, p, stride int) []int {
	if p > n || p <= 0 || stride <= 0 {
		panic(fmt.Sprintf("patches: no %d-wide windows at stride %d in %d", p, stride, n))
	}
	var out []int
	for x := 0; x+p <= n; x += stride {
		out = append(out, x)
	}
	if out[len(out)-1] != n-p {
		out = append(out, n-p)
	}
	return out
}

// Extract copies the C·p² samples of the patch at (x, y) into dst, channel
// by channel, row by row, and returns their mean when center is set (after
// subtracting it from dst), else 0. The mean is over all channels.
func Extract(img *Image, x, y, p int, dst []float64, center bool) float64 {
	wh := img.W * img.H
	i := 0
	sum := 0.0
	for c := 0; c < img.C; c++ {
		base := c*wh + y*img.W + x
		for r := 0; r < p; r++ {
			row := img.Pix[base+r*img.W : base+r*img.W+p]
			for _, v := range row {
				dst[i] = float64(v)
				sum += float64(v)
				i++
			}
		}
	}
	if !center {
		return 0
	}
	mean := sum / float64(i)
	for j := 0; j < i; j++ {
		dst[j] -= mean
	}
	return mean
}

// Accumulator sums restored patches and their counts over an image, for
// the weighted average back of Elad & Aharon (2006, eq. 21).
type Accumulator struct {
	W, H, C, P int
	Sum        []float64 // C×W×H
	Count      []float64 // W×H (patches cover all channels alike)
}

// NewAccumulator returns an empty accumulator for p×p patches.
func NewAccumulator(w, h, c, p int) *Accumulator {
	return &Accumulator{W: w, H: h, C: c, P: p, Sum: make([]float64, w*h*c), Count: make([]float64, w*h)}
}

// Add puts a restored patch (laid out as Extract lays it, mean included)
// back at (x, y) with the given weight.
func (a *Accumulator) Add(x, y int, patch []float64, weight float64) {
	p, wh := a.P, a.W*a.H
	i := 0
	for c := 0; c < a.C; c++ {
		base := c*wh + y*a.W + x
		for r := 0; r < p; r++ {
			row := a.Sum[base+r*a.W : base+r*a.W+p]
			for j := range row {
				row[j] += weight * patch[i]
				i++
			}
		}
	}
	base := y*a.W + x
	for r := 0; r < p; r++ {
		row := a.Count[base+r*a.W : base+r*a.W+p]
		for j := range row {
			row[j] += weight
		}
	}
}

// Blend returns (λ·noisy + Σ Rᵢᵀ patches) / (λ + Σ RᵢᵀRᵢ) per pixel: the
// closed-form minimiser of eq. 21 of Elad & Aharon (2006). Pixels that no
// patch covered keep the noisy value.
func (a *Accumulator) Blend(noisy *Image, lambda float64) *Image {
	out := New(a.W, a.H, a.C, noisy.Depth)
	wh := a.W * a.H
	for c := 0; c < a.C; c++ {
		for i := 0; i < wh; i++ {
			y := float64(noisy.Pix[c*wh+i])
			d := lambda + a.Count[i]
			if d == 0 {
				out.Pix[c*wh+i] = float32(y)
				continue
			}
			out.Pix[c*wh+i] = float32((lambda*y + a.Sum[c*wh+i]) / d)
		}
	}
	return out
}
