package learn

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/blas/blas64"
)

// minRestrictedNorm2 is the squared norm below which an atom restricted to
// a signal's known entries is treated as absent for that signal.
const minRestrictedNorm2 = 1e-8

// CodeMasked codes signals with missing entries: entry j of signal i counts
// only when known[i*N+j]. Following Mairal, Elad & Sapiro (2008), each atom
// is restricted to the known entries and renormalised there; OMP then runs
// on the known entries alone, with the bound ‖m⊙(x − Dα)‖² ≤ eps (or
// epsEach[i]). The returned coefficients refer to the full, unrestricted
// atoms, so Reconstruct fills the missing entries.
func (c *Coder) CodeMasked(X []float64, known []bool, m int, eps float64, epsEach []float64, maxAtoms int) *Codes {
	n := c.D.N
	if len(X) < m*n || len(known) < m*n {
		panic("learn: CodeMasked: X or known is shorter than m×N")
	}
	w := make([]float64, m*n)
	for i, k := range known[:m*n] {
		if k {
			w[i] = 1
		}
	}
	return c.CodeWeighted(X, w, m, eps, epsEach, maxAtoms, nil)
}

// CodeWeighted is CodeMasked with a weight w ≥ 0 per entry: OMP minimises
// Σⱼ wⱼ·(x − Dα)ⱼ², each atom renormalised in that weighted norm. Weight 0
// is a missing entry, 1 a known one; values between let an entry filled
// earlier count for less than one observed. maxEach, when set, caps the
// atoms of each signal below maxAtoms (fewer known entries support fewer
// atoms).
func (c *Coder) CodeWeighted(X, W []float64, m int, eps float64, epsEach []float64, maxAtoms int, maxEach []int) *Codes {
	n := c.D.N
	if len(X) < m*n || len(W) < m*n {
		panic("learn: CodeWeighted: X or W is shorter than m×N")
	}
	c.sqOnce.Do(func() {
		c.sq = make([]float64, len(c.D.Atoms))
		c.sq32 = make([]float32, len(c.D.Atoms))
		for i, v := range c.D.Atoms {
			c.sq[i] = v * v
			c.sq32[i] = float32(v * v)
		}
	})
	return c.run(m, maxAtoms, func(s *scratch, lo, hi, maxAtoms int, start []int32, errs []float64) {
		c.codeBlockMasked(s, X, W, lo, hi, eps, epsEach, maxAtoms, maxEach, start, errs)
	})
}

func (c *Coder) codeBlockMasked(s *scratch, X, W []float64, lo, hi int, eps float64, epsEach []float64, maxAtoms int, maxEach []int, start []int32, errs []float64) {
	n, k := c.D.N, c.D.K
	if s.msk == nil {
		s.msk = make([]float64, blockSize*n)
		s.mnorm = make([]float64, blockSize*k)
		s.norm = make([]float64, k)
		s.mcol = make([]float64, n)
	}
	if len(s.grow) < maxAtoms*k {
		s.grow = make([]float64, maxAtoms*k)
	}
	nr := 0
	for i := lo; i < hi; i++ {
		x := X[i*n : (i+1)*n]
		wt := W[i*n : (i+1)*n]
		xs := s.xs[nr*n : (nr+1)*n]
		ms := s.msk[nr*n : (nr+1)*n]
		xx := 0.0
		for j, v := range x {
			xs[j], ms[j] = wt[j]*v, wt[j]
			xx += wt[j] * v * v
		}
		e := eps
		if epsEach != nil {
			e = epsEach[i]
		}
		errs[i] = xx
		if xx > e {
			s.which[nr] = i
			nr++
		}
	}
	impl := blas64.Implementation()
	if nr > 0 && !c.Single {
		impl.Dgemm(blas.NoTrans, blas.Trans, nr, k, n, 1, s.xs[:nr*n], n, c.D.Atoms, n, 0, s.corr[:nr*k], k)
		impl.Dgemm(blas.NoTrans, blas.Trans, nr, k, n, 1, s.msk[:nr*n], n, c.sq, n, 0, s.mnorm[:nr*k], k)
	} else if nr > 0 {
		c.correlate(s, nr, true)
		gemm32(s, s.msk[:nr*n], c.sq32, s.mnorm[:nr*k], nr, n, k)
	}
	var ms []float64
	if c.Single && s.mcol32 == nil {
		s.mcol32 = make([]float32, n)
		s.row32 = make([]float32, k)
	}
	s.rowOf = func(t, atom int) []float64 {
		// Row of the restricted, renormalised Gram matrix for this signal.
		inv := 1 / s.norm[atom]
		a := c.D.Atom(atom)
		row := s.grow[t*k : (t+1)*k]
		if c.Single {
			for j := range s.mcol32 {
				s.mcol32[j] = float32(ms[j] * a[j] * inv)
			}
			blas32.Implementation().Sgemv(blas.NoTrans, k, n, 1, c.atoms32, n, s.mcol32, 1, 0, s.row32, 1)
			for q, v := range s.row32 {
				row[q] = float64(v)
			}
		} else {
			for j := range s.mcol {
				s.mcol[j] = ms[j] * a[j] * inv
			}
			impl.Dgemv(blas.NoTrans, k, n, 1, c.D.Atoms, n, s.mcol, 1, 0, row, 1)
		}
		for q := range row {
			if s.norm[q] > 0 {
				row[q] /= s.norm[q]
			} else {
				row[q] = 0
			}
		}
		return row
	}
	used := int32(0)
	r := 0
	for i := lo; i < hi; i++ {
		start[i-lo] = used
		if r < nr && s.which[r] == i {
			e := eps
			if epsEach != nil {
				e = epsEach[i]
			}
			ms = s.msk[r*n : (r+1)*n]
			a0 := s.corr[r*k : (r+1)*k]
			mn := s.mnorm[r*k : (r+1)*k]
			for q := range a0 {
				if mn[q] > minRestrictedNorm2 {
					s.norm[q] = math.Sqrt(mn[q])
					a0[q] /= s.norm[q]
				} else {
					s.norm[q], a0[q] = 0, 0
				}
			}
			L := maxAtoms
			if maxEach != nil {
				L = max(0, min(L, maxEach[i]))
			}
			na, res := c.codeOne(s, a0, errs[i], e, L, used)
			for t := used; t < used+int32(na); t++ {
				s.val[t] /= s.norm[s.idx[t]]
			}
			errs[i] = res
			used += int32(na)
			r++
		}
	}
	start[hi-lo] = used
	s.rowOf = func(_, atom int) []float64 { return c.G[atom*k : (atom+1)*k] }
}

// gemm32 is out = A·Bᵀ (A rows×n, B k×n) through float32.
func gemm32(s *scratch, a []float64, b []float32, out []float64, rows, n, k int) {
	for i, v := range a {
		s.xs32[i] = float32(v)
	}
	blas32.Implementation().Sgemm(blas.NoTrans, blas.Trans, rows, k, n, 1, s.xs32[:rows*n], n, b, n, 0, s.cr32[:rows*k], k)
	for i, v := range s.cr32[:rows*k] {
		out[i] = float64(v)
	}
}
