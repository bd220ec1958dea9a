package group

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"tessera/learn"
)

// prepare's diagonal of G_SS⁻¹ is gonum's inverse's.
func TestWienerInverseDiagonal(t *testing.T) {
	d := learn.OvercompleteDCT(8, 16, 1)
	c := learn.NewCoder(d)
	idx := []int32{0, 3, 17, 40, 41, 200}
	w := newWiener(len(idx))
	if !w.prepare(c.G, d.K, idx) {
		t.Fatal("G_SS reported singular")
	}
	g := mat.NewDense(len(idx), len(idx), nil)
	for i, a := range idx {
		for j, b := range idx {
			g.Set(i, j, c.G[int(a)*d.K+int(b)])
		}
	}
	var inv mat.Dense
	if err := inv.Inverse(g); err != nil {
		t.Fatal(err)
	}
	for t0 := range idx {
		if math.Abs(w.inv[t0]-inv.At(t0, t0)) > 1e-9*inv.At(t0, t0) {
			t.Errorf("diagonal %d: %g, gonum %g", t0, w.inv[t0], inv.At(t0, t0))
		}
	}
}

// Without noise the Wiener factors are 1, so the filter gives back the
// least-squares coefficients of the noisy patches on the pilot's support:
// with the noisy patches equal to the pilot's, SOMP's own coefficients and
// the patch means.
func TestWienerWithoutNoiseKeepsLeastSquares(t *testing.T) {
	d := learn.OvercompleteDCT(8, 16, 1)
	c := learn.NewCoder(d)
	r := learn.NewRand(3)
	const m = 9
	pool := make([]float64, m*64)
	for i := range pool {
		pool[i] = 10*math.Sin(float64(i%64)/3) + r.NormFloat64()
	}
	members := []int32{0, 1, 2, 3, 4, 5, 6, 7, 8, 2, 5}
	groups := []int32{0, 5, 11}
	codes := c.SOMPShared(pool, members, groups, learn.SOMPOptions{Eps: 64 * 0.5, MaxAtoms: 12})
	want := append([]float64(nil), codes.Val...)
	pmean := make([]float64, m)
	means := make([]float64, len(members))
	for i := range pmean {
		pmean[i] = float64(i) + 1
	}
	for i, q := range members {
		means[i] = pmean[q]
	}
	w := newWiener(32)
	for g := 0; g+1 < len(groups); g++ {
		w.filter(codes, d, c.G, int(groups[g]), int(groups[g+1]), members, pool, 0, means, pmean)
	}
	for i, v := range codes.Val {
		if math.Abs(v-want[i]) > 1e-9 {
			t.Errorf("coefficient %d: %.12g, least squares %.12g", i, v, want[i])
		}
	}
	for i, q := range members {
		if math.Abs(means[i]-pmean[q]) > 1e-9 {
			t.Errorf("mean %d: %g, want %g", i, means[i], pmean[q])
		}
	}
}
