package learn

import (
	"math"
	"sort"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// naiveOMP is textbook OMP (Pati, Rezaiifar & Krishnaprasad 1993): pick the
// atom most correlated with the residual, refit by least squares.
func naiveOMP(D *mat.Dense, x []float64, L int) []int {
	n, k := D.Dims()
	r := mat.NewVecDense(n, append([]float64(nil), x...))
	var sel []int
	for len(sel) < L {
		best, bi := -1.0, -1
		for j := 0; j < k; j++ {
			v := mat.Dot(D.ColView(j), r)
			if v < 0 {
				v = -v
			}
			if v > best {
				best, bi = v, j
			}
		}
		sel = append(sel, bi)
		A := mat.NewDense(n, len(sel), nil)
		for c, j := range sel {
			A.SetCol(c, mat.Col(nil, j, D))
		}
		var g mat.VecDense
		if err := g.SolveVec(A, mat.NewVecDense(n, x)); err != nil {
			panic(err)
		}
		var fit mat.VecDense
		fit.MulVec(A, &g)
		r.SubVec(mat.NewVecDense(n, x), &fit)
	}
	return sel
}

// Masked Batch-OMP must pick exactly the atoms that textbook OMP picks on
// the explicitly restricted, renormalised dictionary (Mairal, Elad & Sapiro
// 2008, the rule for missing pixels).
func TestMaskedOMPEqualsTextbookOMP(t *testing.T) {
	const n, k, sparsity = 64, 128, 3
	d := randomDict(n, k, 1)
	c := NewCoder(d)
	fails := 0
	for seed := uint64(0); seed < 1000; seed++ {
		r := NewRand(SubSeed(seed, "masked"))
		x := make([]float64, n)
		atoms := r.Perm(k)[:sparsity]
		for _, a := range atoms {
			v := 1 + r.Float64()
			if r.IntN(2) == 0 {
				v = -v
			}
			axpy(v, d.Atom(a), x)
		}
		known := make([]bool, n)
		for _, j := range r.Perm(n)[:n/2] {
			known[j] = true
		}
		var rows []int
		for j := range known {
			if known[j] {
				rows = append(rows, j)
			}
		}
		D := mat.NewDense(len(rows), k, nil)
		xm := make([]float64, len(rows))
		for ri, j := range rows {
			xm[ri] = x[j]
			for a := 0; a < k; a++ {
				D.Set(ri, a, d.Atom(a)[j])
			}
		}
		for a := 0; a < k; a++ {
			col := mat.Col(nil, a, D)
			s := 0.0
			for _, v := range col {
				s += v * v
			}
			for ri := range col {
				D.Set(ri, a, col[ri]/sqrt(s))
			}
		}
		ns := naiveOMP(D, xm, sparsity)
		half := c.CodeMasked(x, known, 1, 1e-20, nil, sparsity)
		hs := support(half, 0)
		sortInts(ns)
		if !equalInts(ns, hs) {
			t.Errorf("seed %d: naive %v, ours %v", seed, ns, hs)
		}
		want := append([]int(nil), atoms...)
		sortInts(want)
		if !equalInts(ns, want) {
			fails++
		}
	}
	t.Logf("textbook OMP missed the true support for %d of 1000 seeds", fails)
}

func sqrt(v float64) float64 { return math.Sqrt(v) }

func sortInts(a []int) { sort.Ints(a) }
