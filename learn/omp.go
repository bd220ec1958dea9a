package learn

import (
	"math"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/blas/blas64"
)

// blockSize is the number of signals whose correlations are computed by one
// matrix product. A fixed partition (not one per worker) keeps every
// product, and so every bit of the result, independent of the worker count.
const blockSize = 512

// Codes is a compact sparse block: the code of signal i has the atoms
// Idx[Start[i]:Start[i+1]] with coefficients Val[Start[i]:Start[i+1]].
type Codes struct {
	Start []int32
	Idx   []int32
	Val   []float64
	// Err is the squared residual norm ‖x − Dα‖² of each signal.
	Err []float64
}

// Len is the number of signals.
func (c *Codes) Len() int { return len(c.Err) }

// Atoms returns the number of atoms in the code of signal i.
func (c *Codes) Atoms(i int) int { return int(c.Start[i+1] - c.Start[i]) }

// Reconstruct writes Dα of signal i into out (length d.N).
func (c *Codes) Reconstruct(d *Dict, i int, out []float64) {
	for j := range out {
		out[j] = 0
	}
	for t := c.Start[i]; t < c.Start[i+1]; t++ {
		axpy(c.Val[t], d.Atom(int(c.Idx[t])), out)
	}
}

// Coder codes signals over one dictionary with Batch-OMP. It holds the Gram
// matrix G = DᵀD, so build it once per dictionary and reuse it; it is safe
// for concurrent use. Coding is fast when codes are sparse (few atoms per
// signal); its cost per atom grows with K and with the number of atoms so
// far, so very dense codes are better served by a least-squares solver.
type Coder struct {
	D       *Dict
	G       []float64 // K×K row-major
	Workers int       // goroutines for Code; 0 means GOMAXPROCS
	pool    sync.Pool
	sqOnce  sync.Once
	sq      []float64 // squared atom entries, for masked norms
	sq32    []float32
	// Single computes the correlations Dᵀx in float32, at about twice the
	// rate of the float64 product; coefficients then carry relative errors
	// near 1e-7 instead of 1e-15. Set it before the first Code.
	Single bool
	// Lead makes atom 0 the first atom of every code (a constant atom,
	// say, so that a signal's level is fitted jointly with the rest).
	Lead    bool
	atoms32 []float32
	g32     []float32 // G in float32, for the Single path
	a32Once sync.Once
}

// NewCoder computes the Gram matrix of d.
func NewCoder(d *Dict) *Coder {
	c := &Coder{D: d, G: make([]float64, d.K*d.K)}
	blas64.Implementation().Dgemm(blas.NoTrans, blas.Trans, d.K, d.K, d.N,
		1, d.Atoms, d.N, d.Atoms, d.N, 0, c.G, d.K)
	return c
}

// scratch is one worker's memory; nothing is allocated per signal.
type scratch struct {
	corr  []float64 // blockSize×K correlations
	xs    []float64 // blockSize×N signals that need coding
	xs32  []float32
	cr32  []float32
	which []int     // their indices in the block
	alpha []float64 // K
	beta  []float64 // K
	l     []float64 // L×L lower-triangular Cholesky factor, row-major
	w     []float64 // L
	gamma []float64 // L
	sel   []int     // L selected atoms
	rows  [][]float64
	v64   vecs[float64]
	v32   vecs[float32]
	idx   []int32
	val   []float64
	// grow holds the Gram rows of the selected atoms (L×K) for masked
	// coding, where every signal has its own Gram matrix.
	grow   []float64
	rowOf  func(t, atom int) []float64
	mcol   []float64 // N: mask ⊙ atom
	norm   []float64 // K: restricted atom norms of the current signal
	mnorm  []float64 // blockSize×K squared restricted norms
	msk    []float64 // blockSize×N weights
	mcol32 []float32
	row32  []float32
}

func (c *Coder) getScratch(maxAtoms int) *scratch {
	s, _ := c.pool.Get().(*scratch)
	n, k := c.D.N, c.D.K
	if s == nil || len(s.sel) < maxAtoms {
		s = &scratch{
			corr:  make([]float64, blockSize*k),
			xs:    make([]float64, blockSize*n),
			which: make([]int, blockSize),
			rows:  make([][]float64, maxAtoms),
			alpha: make([]float64, k),
			beta:  make([]float64, k),
			l:     make([]float64, maxAtoms*maxAtoms),
			w:     make([]float64, maxAtoms),
			gamma: make([]float64, maxAtoms),
			sel:   make([]int, maxAtoms),
			idx:   make([]int32, blockSize*maxAtoms),
			val:   make([]float64, blockSize*maxAtoms),
		}
	}
	s.rowOf = func(_, atom int) []float64 { return c.G[atom*k : (atom+1)*k] }
	s.v64.rows = s.rows
	s.v64.axpy = func(a float64, x, y []float64) { blas64.Implementation().Daxpy(len(x), a, x, 1, y, 1) }
	if c.Single && s.v32.alpha == nil {
		s.v32 = vecs[float32]{
			alpha: make([]float32, k),
			rows:  make([][]float32, len(s.sel)),
			rowOf: func(_, atom int) []float32 { return c.g32[atom*k : (atom+1)*k] },
			axpy: func(a float64, x, y []float32) {
				blas32.Implementation().Saxpy(len(x), float32(a), x, 1, y, 1)
			},
		}
	}
	return s
}

// Code codes the m signals of the row-major m×N block X. Each code stops at
// maxAtoms atoms or as soon as ‖x − Dα‖² ≤ eps (per signal when epsEach is
// not nil, else eps for all). maxAtoms ≤ 0 means N. A signal already within
// its bound gets the empty code and costs no matrix product.
func (c *Coder) Code(X []float64, m int, eps float64, epsEach []float64, maxAtoms int) *Codes {
	if len(X) < m*c.D.N {
		panic("learn: Code: X is shorter than m×N")
	}
	return c.run(m, maxAtoms, func(s *scratch, lo, hi, maxAtoms int, start []int32, errs []float64) {
		c.codeBlock(s, X, lo, hi, eps, epsEach, maxAtoms, start, errs)
	})
}

type blockFunc func(s *scratch, lo, hi, maxAtoms int, start []int32, errs []float64)

// run codes m signals in fixed blocks spread over the workers and joins the
// blocks' codes in block order.
func (c *Coder) run(m, maxAtoms int, code blockFunc) *Codes {
	n, k := c.D.N, c.D.K
	if c.Single {
		c.a32Once.Do(func() {
			c.atoms32 = make([]float32, len(c.D.Atoms))
			for i, v := range c.D.Atoms {
				c.atoms32[i] = float32(v)
			}
			c.g32 = make([]float32, len(c.G))
			for i, v := range c.G {
				c.g32[i] = float32(v)
			}
		})
	}
	if maxAtoms <= 0 || maxAtoms > n {
		maxAtoms = n
	}
	if maxAtoms > k {
		maxAtoms = k
	}
	nb := (m + blockSize - 1) / blockSize
	type part struct {
		start []int32
		idx   []int32
		val   []float64
	}
	parts := make([]part, nb)
	errs := make([]float64, m)
	made := Blocks(nb, c.Workers, func() *scratch { return c.getScratch(maxAtoms) }, func(b int, s *scratch) {
		lo := b * blockSize
		hi := min(lo+blockSize, m)
		p := &parts[b]
		p.start = make([]int32, hi-lo+1)
		code(s, lo, hi, maxAtoms, p.start, errs)
		used := p.start[hi-lo]
		p.idx = append([]int32(nil), s.idx[:used]...)
		p.val = append([]float64(nil), s.val[:used]...)
	})
	for _, s := range made {
		c.pool.Put(s)
	}
	total := 0
	for _, p := range parts {
		total += len(p.idx)
	}
	out := &Codes{Start: make([]int32, m+1), Idx: make([]int32, 0, total), Val: make([]float64, 0, total), Err: errs}
	for b, p := range parts {
		base := int32(len(out.Idx))
		for i := 1; i < len(p.start); i++ {
			out.Start[b*blockSize+i] = base + p.start[i]
		}
		out.Idx = append(out.Idx, p.idx...)
		out.Val = append(out.Val, p.val...)
	}
	return out
}

// correlate fills s.corr[:nr×K] with the products of s.xs and the atoms.
func (c *Coder) correlate(s *scratch, nr int, to64 bool) {
	if nr == 0 {
		return
	}
	n, k := c.D.N, c.D.K
	if !c.Single {
		blas64.Implementation().Dgemm(blas.NoTrans, blas.Trans, nr, k, n,
			1, s.xs[:nr*n], n, c.D.Atoms, n, 0, s.corr[:nr*k], k)
		return
	}
	if s.xs32 == nil {
		s.xs32 = make([]float32, blockSize*n)
		s.cr32 = make([]float32, blockSize*k)
	}
	for i, v := range s.xs[:nr*n] {
		s.xs32[i] = float32(v)
	}
	blas32.Implementation().Sgemm(blas.NoTrans, blas.Trans, nr, k, n,
		1, s.xs32[:nr*n], n, c.atoms32, n, 0, s.cr32[:nr*k], k)
	if to64 {
		for i, v := range s.cr32[:nr*k] {
			s.corr[i] = float64(v)
		}
	}
}

// codeBlock codes signals lo..hi-1; start receives offsets into s.idx/s.val.
func (c *Coder) codeBlock(s *scratch, X []float64, lo, hi int, eps float64, epsEach []float64, maxAtoms int, start []int32, errs []float64) {
	n, k := c.D.N, c.D.K
	// Signals already within their bound need no correlations.
	nr := 0
	for i := lo; i < hi; i++ {
		x := X[i*n : (i+1)*n]
		xx := dot(x, x)
		e := eps
		if epsEach != nil {
			e = epsEach[i]
		}
		errs[i] = xx
		if xx > e {
			copy(s.xs[nr*n:(nr+1)*n], x)
			s.which[nr] = i
			nr++
		}
	}
	c.correlate(s, nr, false)
	used := int32(0)
	r := 0
	for i := lo; i < hi; i++ {
		start[i-lo] = used
		if r < nr && s.which[r] == i {
			e := eps
			if epsEach != nil {
				e = epsEach[i]
			}
			var na int
			var res float64
			if c.Single {
				na, res = batchOMP(&s.v32, s, c.Lead, s.cr32[r*k:(r+1)*k], errs[i], e, maxAtoms, used)
			} else {
				na, res = c.codeOne(s, s.corr[r*k:(r+1)*k], errs[i], e, maxAtoms, used)
			}
			errs[i] = res
			used += int32(na)
			r++
		}
	}
	start[hi-lo] = used
}

// codeOne is Batch-OMP (Rubinstein, Zibulevsky & Elad 2008, algorithm 3)
// for one signal with correlations a0 = Dᵀx and energy xx = ‖x‖². It
// writes the code at s.idx/s.val[off:] and returns its length and the
// squared residual norm.
func (c *Coder) codeOne(s *scratch, a0 []float64, xx, eps float64, maxAtoms int, off int32) (int, float64) {
	s.v64.alpha = s.alpha
	s.v64.rowOf = s.rowOf
	return batchOMP(&s.v64, s, c.Lead, a0, xx, eps, maxAtoms, off)
}

// real is the element type of the correlation side of Batch-OMP; the
// Cholesky factor and the coefficients are always float64.
type real interface{ ~float32 | ~float64 }

// vecs holds one element type's per-signal vectors.
type vecs[T real] struct {
	alpha []T
	rows  [][]T
	rowOf func(t, atom int) []T
	axpy  func(a float64, x, y []T)
}

func batchOMP[T real](v *vecs[T], s *scratch, lead bool, a0 []T, xx, eps float64, maxAtoms int, off int32) (int, float64) {
	alpha := v.alpha
	copy(alpha, a0)
	L := s.l
	ld := maxAtoms
	res := xx
	na := 0
	for na < maxAtoms && res > eps {
		bi, best := argmaxAbs(alpha)
		if na == 0 && lead {
			bi, best = 0, math.Abs(float64(alpha[0]))
		}
		if bi < 0 || best < 1e-12*math.Sqrt(xx) {
			break // residual orthogonal to every atom
		}
		for t := 0; t < na; t++ {
			if s.sel[t] == bi {
				bi = -1
				break
			}
		}
		if bi < 0 {
			break // numerical stall: the best atom is already selected
		}
		if na > 0 {
			// w = L⁻¹·G[I, k]; new row [wᵀ, √(1 − wᵀw)].
			w := s.w[:na]
			for t := 0; t < na; t++ {
				g := float64(v.rows[t][bi])
				row := L[t*ld : t*ld+t]
				for u, lv := range row {
					g -= lv * w[u]
				}
				w[t] = g / L[t*ld+t]
			}
			d := 1 - dot(w, w)
			if d <= 1e-10 {
				break // the atom is (nearly) a combination of the chosen ones
			}
			copy(L[na*ld:na*ld+na], w)
			L[na*ld+na] = math.Sqrt(d)
		} else {
			L[0] = 1
		}
		s.sel[na] = bi
		v.rows[na] = v.rowOf(na, bi)
		na++
		// γ = (L·Lᵀ)⁻¹·a0_I by two triangular solves.
		g := s.gamma[:na]
		for t := 0; t < na; t++ {
			x := float64(a0[s.sel[t]])
			row := L[t*ld : t*ld+t]
			for u, lv := range row {
				x -= lv * g[u]
			}
			g[t] = x / L[t*ld+t]
		}
		for t := na - 1; t >= 0; t-- {
			x := g[t]
			for u := t + 1; u < na; u++ {
				x -= L[u*ld+t] * g[u]
			}
			g[t] = x / L[t*ld+t]
		}
		// α = a0 − G_I·γ; ‖r‖² = ‖x‖² − γᵀ·a0_I.
		copy(alpha, a0)
		for t := 0; t < na; t++ {
			v.axpy(-g[t], v.rows[t], alpha)
		}
		delta := 0.0
		for t := 0; t < na; t++ {
			delta += g[t] * float64(a0[s.sel[t]])
		}
		res = xx - delta
		if res < 0 {
			res = 0
		}
	}
	for t := 0; t < na; t++ {
		s.idx[int(off)+t] = int32(s.sel[t])
		s.val[int(off)+t] = s.gamma[t]
	}
	return na, res
}

// argmaxAbs finds the largest |a[j]|; four running maxima keep the
// comparisons independent of each other.
func argmaxAbs[T real](a []T) (int, float64) {
	var b0, b1, b2, b3 float64
	i0, i1, i2, i3 := -1, -1, -1, -1
	j := 0
	for ; j+4 <= len(a); j += 4 {
		if v := math.Abs(float64(a[j])); v > b0 {
			b0, i0 = v, j
		}
		if v := math.Abs(float64(a[j+1])); v > b1 {
			b1, i1 = v, j+1
		}
		if v := math.Abs(float64(a[j+2])); v > b2 {
			b2, i2 = v, j+2
		}
		if v := math.Abs(float64(a[j+3])); v > b3 {
			b3, i3 = v, j+3
		}
	}
	for ; j < len(a); j++ {
		if v := math.Abs(float64(a[j])); v > b0 {
			b0, i0 = v, j
		}
	}
	// Ties go to the lowest index, as a plain scan would choose.
	best, bi := b0, i0
	for _, c := range [...]struct {
		v float64
		i int
	}{{b1, i1}, {b2, i2}, {b3, i3}} {
		if c.i >= 0 && (c.v > best || (c.v == best && (bi < 0 || c.i < bi))) {
			best, bi = c.v, c.i
		}
	}
	return bi, best
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

func axpy(alpha float64, x, y []float64) {
	for i, v := range x {
		y[i] += alpha * v
	}
}
