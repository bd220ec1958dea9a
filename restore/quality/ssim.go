package quality

import (
	"math"

	"tessera/patches"
)

// SSIM window (Wang et al. 2004): Gaussian, σ = 1.5, radius 5 (11 taps), the
// radius that scipy's truncate = 3.5 gives: int(3.5·1.5 + 0.5) = 5.
const (
	ssimSigma  = 1.5
	ssimRadius = 5
	ssimWin    = 2*ssimRadius + 1
	ssimK1     = 0.01
	ssimK2     = 0.03
)

var ssimKernel = func() [ssimWin]float64 {
	var g [ssimWin]float64
	var s float64
	for i := range g {
		x := float64(i - ssimRadius)
		g[i] = math.Exp(-0.5 * x * x / (ssimSigma * ssimSigma))
		s += g[i]
	}
	for i := range g {
		g[i] /= s
	}
	return g
}()

// SSIM is the mean structural similarity of test to ref (Wang et al. 2004),
// with L = ref.Peak(). One-channel images are compared as they are; for
// three-channel images SSIM is computed on the BT.601 luma of both, in float
// (not rounded). Only window positions wholly inside the image count, so both
// sides must be at least 11 pixels; other channel counts are an error too.
func SSIM(ref, test *patches.Image) (float64, error) {
	if err := sameSize(ref, test); err != nil {
		return 0, err
	}
	if ref.W < ssimWin || ref.H < ssimWin {
		return 0, sizeError(ref, test, "SSIM needs at least 11×11 pixels")
	}
	var x, y []float32
	switch ref.C {
	case 1:
		x, y = ref.Pix, test.Pix
	case 3:
		x, y = Luma(ref, false).Pix, Luma(test, false).Pix
	default:
		return 0, sizeError(ref, test, "SSIM takes 1 or 3 channels")
	}
	return ssimPlane(x, y, ref.W, ref.H, ref.Peak()), nil
}

// ssimPlane filters x, y, x², y², xy separably, only over the valid region:
// rows first (all h rows, w-10 output columns), then columns. The kernel is
// symmetric, so each tap pair shares one multiplication.
func ssimPlane(x, y []float32, w, h int, peak float64) float64 {
	g := ssimKernel
	ow, oh := w-2*ssimRadius, h-2*ssimRadius
	n := h * ow
	buf := make([]float64, 5*n)
	planes := [5][]float64{buf[:n], buf[n : 2*n], buf[2*n : 3*n], buf[3*n : 4*n], buf[4*n:]}
	row := make([]float64, 5*w)
	src := [5][]float64{row[:w], row[w : 2*w], row[2*w : 3*w], row[3*w : 4*w], row[4*w:]}
	for r := 0; r < h; r++ {
		xs, ys := x[r*w:(r+1)*w], y[r*w:(r+1)*w]
		rx, ry, rxx, ryy, rxy := src[0], src[1], src[2], src[3], src[4]
		for i := range rx {
			a, b := float64(xs[i]), float64(ys[i])
			rx[i], ry[i], rxx[i], ryy[i], rxy[i] = a, b, a*a, b*b, a*b
		}
		for p := range src {
			filterRow(planes[p][r*ow:(r+1)*ow], src[p], &g)
		}
	}
	c1 := (ssimK1 * peak) * (ssimK1 * peak)
	c2 := (ssimK2 * peak) * (ssimK2 * peak)
	cols := make([]float64, 5*ow)
	m := [5][]float64{cols[:ow], cols[ow : 2*ow], cols[2*ow : 3*ow], cols[3*ow : 4*ow], cols[4*ow:]}
	var total float64
	for r := 0; r < oh; r++ {
		for p := range m {
			filterCol(m[p], planes[p], r, ow, &g)
		}
		mx, my, mxx, myy, mxy := m[0], m[1], m[2], m[3], m[4]
		var sum float64
		for c := range mx {
			ux, uy := mx[c], my[c]
			vx := mxx[c] - ux*ux
			vy := myy[c] - uy*uy
			vxy := mxy[c] - ux*uy
			num := (2*ux*uy + c1) * (2*vxy + c2)
			den := (ux*ux + uy*uy + c1) * (vx + vy + c2)
			sum += num / den
		}
		total += sum
	}
	return total / float64(ow*oh)
}

// filterRow writes the valid part of the correlation of a with g into out.
func filterRow(out, a []float64, g *[ssimWin]float64) {
	g0, g1, g2, g3, g4, g5 := g[0], g[1], g[2], g[3], g[4], g[5]
	for c := range out {
		p := a[c : c+ssimWin : c+ssimWin]
		out[c] = g5*p[5] + g4*(p[4]+p[6]) + g3*(p[3]+p[7]) + g2*(p[2]+p[8]) +
			g1*(p[1]+p[9]) + g0*(p[0]+p[10])
	}
}

// filterCol filters rows r..r+10 of the row-filtered plane pl (ow wide)
// down into out.
func filterCol(out, pl []float64, r, ow int, g *[ssimWin]float64) {
	row := func(k int) []float64 { return pl[(r+k)*ow : (r+k+1)*ow] }
	a0, a1, a2, a3, a4, a5 := row(0), row(1), row(2), row(3), row(4), row(5)
	a6, a7, a8, a9, a10 := row(6), row(7), row(8), row(9), row(10)
	g0, g1, g2, g3, g4, g5 := g[0], g[1], g[2], g[3], g[4], g[5]
	for c := range out {
		out[c] = g5*a5[c] + g4*(a4[c]+a6[c]) + g3*(a3[c]+a7[c]) + g2*(a2[c]+a8[c]) +
			g1*(a1[c]+a9[c]) + g0*(a0[c]+a10[c])
	}
}
