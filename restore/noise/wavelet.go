package noise

import (
	"math"
	"slices"

	"tessera/patches"
)

// Daubechies' 4-tap (db2) scaling filter, h = [1+√3, 3+√3, 3−√3, 1−√3]/(4√2)
// (Daubechies 1988). As decomposition filters they are used the way
// PyWavelets stores them: the low pass reversed, the high pass the
// alternating flip [-h0, h1, -h2, h3]. Only the high pass is needed.
var db2DecHi = func() [4]float64 {
	s3 := math.Sqrt(3)
	d := 4 * math.Sqrt2
	h := [4]float64{(1 + s3) / d, (3 + s3) / d, (3 - s3) / d, (1 - s3) / d}
	return [4]float64{-h[0], h[1], -h[2], h[3]}
}()

// normPPF75 is the 0.75 quantile of the standard normal, Φ⁻¹(0.75): the
// median of |N(0, 1)|.
const normPPF75 = 0.6744897501960817

// symIndex maps an index of the half-sample symmetric extension
// (… x1 x0 | x0 x1 … xN-1 | xN-1 xN-2 …) back into [0, n).
func symIndex(m, n int) int {
	p := 2 * n
	m %= p
	if m < 0 {
		m += p
	}
	if m >= n {
		m = p - 1 - m
	}
	return m
}

// dwtHi is one level of the decimated high-pass analysis of line x:
// out[o] = Σ_j f[j]·x̃[2o+1−j] over the symmetric extension x̃, for
// o < ⌊(len(x)+3)/2⌋: the size and phase PyWavelets' dwt gives in mode
// "symmetric".
func dwtHi(out, x []float64) {
	f := &db2DecHi
	n := len(x)
	for o := range out {
		i := 2*o + 1
		var s float64
		if i-3 >= 0 && i < n {
			for j := 0; j < 4; j++ {
				s += x[i-j] * f[j]
			}
		} else {
			for j := 0; j < 4; j++ {
				s += x[symIndex(i-j, n)] * f[j]
			}
		}
		out[o] = s
	}
}

// diagonalDetail returns the one-level db2 diagonal detail band (high pass
// along columns, then along rows) of plane p, w×h, and its size.
func diagonalDetail(p []float32, w, h int) ([]float64, int, int) {
	lw, lh := (w+3)/2, (h+3)/2
	f := &db2DecHi
	// High pass along columns, a whole output row at a time: output row o
	// combines input rows 2o+1−j, j = 0…3, through the symmetric extension.
	col := make([]float64, lh*w)
	for o := 0; o < lh; o++ {
		out := col[o*w : (o+1)*w]
		for j := 0; j < 4; j++ {
			src := p[symIndex(2*o+1-j, h)*w:]
			fj := f[j]
			for x := range out {
				out[x] += float64(src[x]) * fj
			}
		}
	}
	d := make([]float64, lh*lw)
	for y := 0; y < lh; y++ {
		dwtHi(d[y*lw:(y+1)*lw], col[y*w:(y+1)*w])
	}
	return d, lw, lh
}

// Wavelet estimates the standard deviation of white Gaussian noise in
// channel c by the robust median rule of Donoho & Johnstone (1994):
// median(|d|)/Φ⁻¹(0.75) over the nonzero coefficients d of the diagonal
// band of a one-level db2 transform with symmetric extension. The recipe
// (and its result) is that of scikit-image 0.19.3 estimate_sigma. It
// returns 0 when every coefficient is zero and panics if c is out of range.
func Wavelet(img *patches.Image, c int) float64 {
	checkChannel(img, c)
	d, _, _ := diagonalDetail(img.Plane(c), img.W, img.H)
	a := d[:0]
	for _, v := range d {
		if v != 0 {
			a = append(a, math.Abs(v))
		}
	}
	if len(a) == 0 {
		return 0
	}
	return median(a) / normPPF75
}

// median reorders a and returns its median (the mean of the two middle
// values for an even count, as numpy's median).
func median(a []float64) float64 {
	n := len(a)
	m := selectKth(a, n/2)
	if n%2 == 1 {
		return m
	}
	// After selection a[:n/2] holds the n/2 smallest values.
	return 0.5 * (slices.Max(a[:n/2]) + m)
}

// selectKth partly orders a so that a[k] is its k-th smallest value (from 0)
// with no larger value before it, and returns a[k] (Hoare's selection).
func selectKth(a []float64, k int) float64 {
	lo, hi := 0, len(a)-1
	for hi > lo {
		if hi-lo < 16 {
			slices.Sort(a[lo : hi+1])
			break
		}
		// Median of three as pivot.
		mid := lo + (hi-lo)/2
		if a[mid] < a[lo] {
			a[mid], a[lo] = a[lo], a[mid]
		}
		if a[hi] < a[lo] {
			a[hi], a[lo] = a[lo], a[hi]
		}
		if a[hi] < a[mid] {
			a[hi], a[mid] = a[mid], a[hi]
		}
		pivot := a[mid]
		i, j := lo, hi
		for i <= j {
			for a[i] < pivot {
				i++
			}
			for a[j] > pivot {
				j--
			}
			if i <= j {
				a[i], a[j] = a[j], a[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return a[k]
		}
	}
	return a[k]
}
