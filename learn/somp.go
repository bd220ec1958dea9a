package learn

import (
	"math"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/blas/blas64"
)

// SOMPRule is how simultaneous OMP scores an atom against a group.
type SOMPRule int

const (
	// SumAbs picks the atom with the largest Σᵢ |dₖᵀrᵢ| (Tropp, Gilbert &
	// Strauss 2006, the SOMP of their algorithm 3.1).
	SumAbs SOMPRule = iota
	// SumSquares picks the atom with the largest Σᵢ (dₖᵀrᵢ)², the ℓ2 norm of
	// the correlations over the group.
	SumSquares
)

// SOMPOptions control simultaneous coding.
type SOMPOptions struct {
	// Eps is the bound per signal: a group of g signals stops when its total
	// squared residual Σᵢ‖xᵢ − Dαᵢ‖² ≤ g·Eps.
	Eps float64
	// EpsGroup, when set, is the bound on the total residual of each group
	// (one per group), in place of g·Eps.
	EpsGroup []float64
	// MinGain, when positive, keeps an atom only if it lowers the group's
	// total squared residual by at least g·MinGain (an ℓ0 penalty of
	// MinGain per signal and atom); coding stops at the first atom that
	// does not.
	MinGain  float64
	MaxAtoms int // bound on the shared support; ≤ 0 means N
	Rule     SOMPRule
}

// sompBlockSignals is the most signals whose correlations one product
// computes; a larger group gets a block of its own. The partition depends
// on the groups alone, so results do not depend on the worker count.
const sompBlockSignals = 512

// SOMP codes the m signals of the row-major m×N block X in groups that
// share one support: group g is the signals groups[g] to groups[g+1]−1
// (groups[0] = 0, the last entry m, increasing). Atoms are chosen one at a
// time by opt.Rule over the residuals of the whole group; every signal gets
// its own least-squares coefficients on the common atoms (simultaneous OMP,
// Tropp, Gilbert & Strauss 2006). As in Batch-OMP (Rubinstein, Zibulevsky
// & Elad 2008) only the correlations Dᵀx are computed from the signals, one
// matrix product per block; the rest works on the Gram matrix. A group of
// one signal gets the atoms and coefficients (to rounding) that Code gives
// it. Every signal of a group has the same atoms in the same order in the
// returned codes.
//
// SOMP panics when groups is malformed or X is shorter than m×N.
func (c *Coder) SOMP(X []float64, groups []int32, opt SOMPOptions) *Codes {
	return c.somp(X, nil, groups, opt)
}

// SOMPShared is SOMP for groups that share signals: entry i of the groups
// is row members[i] of the row-major pool (a row may be in many groups),
// and the codes are returned per entry. Each pool row's correlations with
// the atoms are computed once, which is the point when groups overlap.
// It panics when a member is outside the pool.
func (c *Coder) SOMPShared(pool []float64, members []int32, groups []int32, opt SOMPOptions) *Codes {
	if len(groups) > 0 && int(groups[len(groups)-1]) != len(members) {
		panic("learn: SOMPShared: groups do not cover the members")
	}
	if members == nil {
		members = []int32{}
	}
	return c.somp(pool, members, groups, opt)
}

// somp codes the groups of X (members nil) or of the pool X (members set).
func (c *Coder) somp(X []float64, members []int32, groups []int32, opt SOMPOptions) *Codes {
	n, k := c.D.N, c.D.K
	if len(groups) == 0 || groups[0] != 0 {
		panic("learn: SOMP: groups must start at 0")
	}
	ng := len(groups) - 1
	if opt.EpsGroup != nil && len(opt.EpsGroup) < ng {
		panic("learn: SOMP: EpsGroup is shorter than the number of groups")
	}
	gmax := 0
	for g := 0; g < ng; g++ {
		sz := int(groups[g+1] - groups[g])
		if sz < 0 {
			panic("learn: SOMP: group offsets decrease")
		}
		gmax = max(gmax, sz)
	}
	m := int(groups[ng])
	if members == nil && len(X) < m*n {
		panic("learn: SOMP: X is shorter than m×N")
	}
	for _, q := range members {
		if q < 0 || int(q+1)*n > len(X) {
			panic("learn: SOMPShared: a member is outside the pool")
		}
	}
	maxAtoms := opt.MaxAtoms
	if maxAtoms <= 0 || maxAtoms > n {
		maxAtoms = n
	}
	maxAtoms = min(maxAtoms, k)
	if c.Single {
		c.a32Once.Do(func() {
			c.atoms32 = make([]float32, len(c.D.Atoms))
			for i, v := range c.D.Atoms {
				c.atoms32[i] = float32(v)
			}
		})
	}

	// Fixed blocks of whole groups: bstart[b]..bstart[b+1] are group indices.
	bstart := []int{0}
	for g, cnt := 0, 0; g < ng; g++ {
		sz := int(groups[g+1] - groups[g])
		if cnt > 0 && cnt+sz > sompBlockSignals {
			bstart = append(bstart, g)
			cnt = 0
		}
		cnt += sz
	}
	if bstart[len(bstart)-1] != ng {
		bstart = append(bstart, ng)
	}
	nb := len(bstart) - 1
	capSig := max(sompBlockSignals, gmax)

	workers := c.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	var pool *sompPool
	if members != nil {
		pool = c.poolCorrelations(X, len(X)/n, workers)
	}

	type part struct {
		start []int32
		idx   []int32
		val   []float64
	}
	parts := make([]part, nb)
	errs := make([]float64, m)
	Blocks(nb, workers, func() *sompScratch { return newSompScratch(n, k, capSig, gmax, maxAtoms, c.Single) }, func(b int, s *sompScratch) {
		g0, g1 := bstart[b], bstart[b+1]
		lo, hi := int(groups[g0]), int(groups[g1])
		p := &parts[b]
		p.start = make([]int32, hi-lo+1)
		c.sompBlock(s, X, members, pool, groups, g0, g1, opt, maxAtoms, p.start, errs)
		used := p.start[hi-lo]
		p.idx = append([]int32(nil), s.idx[:used]...)
		p.val = append([]float64(nil), s.val[:used]...)
	})
	if pool != nil {
		poolBuffers.Put(pool)
	}
	total := 0
	for _, p := range parts {
		total += len(p.idx)
	}
	out := &Codes{Start: make([]int32, m+1), Idx: make([]int32, 0, total), Val: make([]float64, 0, total), Err: errs}
	for b, p := range parts {
		lo := int(groups[bstart[b]])
		base := int32(len(out.Idx))
		for i := 1; i < len(p.start); i++ {
			out.Start[lo+i] = base + p.start[i]
		}
		out.Idx = append(out.Idx, p.idx...)
		out.Val = append(out.Val, p.val...)
	}
	return out
}

// sompScratch is one worker's memory; nothing is allocated per group.
type sompScratch struct {
	xs    []float64 // signals that need coding, capSig×N
	corr  []float64 // their correlations Dᵀx, capSig×K
	xs32  []float32
	cr32  []float32
	which []int     // group index of each copied signal's group, per signal
	xx    []float64 // ‖xᵢ‖², capSig
	a     []float64 // working correlations of one group, gmax×K
	score []float64 // K
	l     []float64 // L×L Cholesky factor of G_SS, row-major
	w     []float64 // L
	gs    []float64 // selected Gram rows, L×K
	a0s   []float64 // a0ᵢ restricted to the support, gmax×L
	v     []float64 // L
	q     []float64 // K
	gam   []float64 // coefficients, gmax×L
	sel   []int
	idx   []int32
	val   []float64
}

func newSompScratch(n, k, capSig, gmax, L int, single bool) *sompScratch {
	s := &sompScratch{
		xs:    make([]float64, capSig*n),
		corr:  make([]float64, capSig*k),
		which: make([]int, capSig),
		xx:    make([]float64, capSig),
		a:     make([]float64, gmax*k),
		score: make([]float64, k),
		l:     make([]float64, L*L),
		w:     make([]float64, L),
		gs:    make([]float64, L*k),
		a0s:   make([]float64, gmax*L),
		v:     make([]float64, L),
		q:     make([]float64, k),
		gam:   make([]float64, gmax*L),
		sel:   make([]int, L),
		idx:   make([]int32, capSig*L),
		val:   make([]float64, capSig*L),
	}
	if single {
		s.xs32 = make([]float32, capSig*n)
		s.cr32 = make([]float32, capSig*k)
	}
	return s
}

// sompBlock codes groups g0..g1−1; start receives offsets into s.idx/s.val
// per signal of the block.
func (c *Coder) sompBlock(s *sompScratch, X []float64, members []int32, pool *sompPool, groups []int32, g0, g1 int, opt SOMPOptions, maxAtoms int, start []int32, errs []float64) {
	n, k := c.D.N, c.D.K
	lo := int(groups[g0])
	// Gather the signals (or their pooled correlations) of the groups not
	// already within their bound.
	nr := 0
	for g := g0; g < g1; g++ {
		a, b := int(groups[g]), int(groups[g+1])
		tot := 0.0
		for i := a; i < b; i++ {
			if pool != nil {
				errs[i] = pool.xx[members[i]]
			} else {
				x := X[i*n : (i+1)*n]
				errs[i] = dot(x, x)
			}
			tot += errs[i]
		}
		if tot <= groupBound(opt, g, b-a) {
			continue
		}
		for i := a; i < b; i++ {
			if pool != nil {
				q := int(members[i])
				copy(s.corr[nr*k:(nr+1)*k], pool.corr[q*k:(q+1)*k])
			} else {
				copy(s.xs[nr*n:(nr+1)*n], X[i*n:(i+1)*n])
			}
			s.xx[nr] = errs[i]
			s.which[nr] = g
			nr++
		}
	}
	if pool == nil {
		c.sompCorrelate(s, s.xs, nr, s.corr)
	}
	used := int32(0)
	r := 0
	for g := g0; g < g1; g++ {
		a, b := int(groups[g]), int(groups[g+1])
		if r < nr && s.which[r] == g {
			sz := b - a
			na := c.sompOne(s, r, sz, groupBound(opt, g, sz), float64(sz)*opt.MinGain, maxAtoms, opt.Rule, errs[a:b])
			for i := 0; i < sz; i++ {
				start[a+i-lo] = used
				for t := 0; t < na; t++ {
					s.idx[int(used)+t] = int32(s.sel[t])
					s.val[int(used)+t] = s.gam[i*maxAtoms+t]
				}
				used += int32(na)
			}
			r += sz
			continue
		}
		for i := a; i < b; i++ {
			start[i-lo] = used
		}
	}
	start[int(groups[g1])-lo] = used
}

func groupBound(opt SOMPOptions, g, size int) float64 {
	if opt.EpsGroup != nil {
		return opt.EpsGroup[g]
	}
	return float64(size) * opt.Eps
}

// sompCorrelate fills out[:nr×K] with the products of the nr rows of xs
// and the atoms.
func (c *Coder) sompCorrelate(s *sompScratch, xs []float64, nr int, out []float64) {
	if nr == 0 {
		return
	}
	n, k := c.D.N, c.D.K
	if !c.Single {
		blas64.Implementation().Dgemm(blas.NoTrans, blas.Trans, nr, k, n,
			1, xs[:nr*n], n, c.D.Atoms, n, 0, out[:nr*k], k)
		return
	}
	for i, v := range xs[:nr*n] {
		s.xs32[i] = float32(v)
	}
	blas32.Implementation().Sgemm(blas.NoTrans, blas.Trans, nr, k, n,
		1, s.xs32[:nr*n], n, c.atoms32, n, 0, s.cr32[:nr*k], k)
	for i, v := range s.cr32[:nr*k] {
		out[i] = float64(v)
	}
}

// sompPool holds the correlations and energies of a shared pool of signals.
type sompPool struct {
	corr []float64 // mp×K
	xx   []float64
}

// poolBuffers keeps correlation buffers between SOMPShared calls: a band
// of an image is tens of megabytes, which clearing anew would cost.
var poolBuffers sync.Pool

// poolCorrelations computes the pool's correlations in fixed blocks.
func (c *Coder) poolCorrelations(P []float64, mp, workers int) *sompPool {
	n, k := c.D.N, c.D.K
	pl, _ := poolBuffers.Get().(*sompPool)
	if pl == nil {
		pl = &sompPool{}
	}
	if cap(pl.corr) < mp*k {
		pl.corr = make([]float64, mp*k)
	}
	if cap(pl.xx) < mp {
		pl.xx = make([]float64, mp)
	}
	pl.corr, pl.xx = pl.corr[:mp*k], pl.xx[:mp]
	nb := (mp + sompBlockSignals - 1) / sompBlockSignals
	Blocks(nb, workers, func() *sompScratch {
		s := &sompScratch{}
		if c.Single {
			s.xs32 = make([]float32, sompBlockSignals*n)
			s.cr32 = make([]float32, sompBlockSignals*k)
		}
		return s
	}, func(b int, s *sompScratch) {
		lo, hi := b*sompBlockSignals, min((b+1)*sompBlockSignals, mp)
		c.sompCorrelate(s, P[lo*n:hi*n], hi-lo, pl.corr[lo*k:hi*k])
		for i := lo; i < hi; i++ {
			x := P[i*n : (i+1)*n]
			pl.xx[i] = dot(x, x)
		}
	})
	return pl
}

// sompOne codes the sz signals whose correlations start at row r0 of
// s.corr, with total bound bound. It leaves the support in s.sel and the
// coefficients in s.gam (row i, stride maxAtoms), overwrites errs with the
// squared residuals and returns the support size.
//
// The correlations of the residuals are updated by one rank-1 step per
// atom: with S the support so far and u the new atom made orthogonal to
// span(D_S) (u = (d_j − D_S·v)/ℓ, v = G_SS⁻¹G[S,j], ℓ² = 1 − G[j,S]·v),
// every residual loses (uᵀrᵢ)·u, so Dᵀrᵢ loses (Dᵀrᵢ)_j/ℓ² · (G[j,:] −
// vᵀG[S,:]) and ‖rᵢ‖² loses (Dᵀrᵢ)_j²/ℓ². The shared row costs |S|·K per
// atom and each signal K, against sz·|S|·K for recomputing Dᵀrᵢ from the
// coefficients as Batch-OMP does. The coefficients are solved once, at
// the end.
func (c *Coder) sompOne(s *sompScratch, r0, sz int, bound, minGain float64, maxAtoms int, rule SOMPRule, errs []float64) int {
	k := c.D.K
	ld := maxAtoms
	a0 := s.corr[r0*k : (r0+sz)*k]
	xx := s.xx[r0 : r0+sz]
	A := s.a[:sz*k]
	copy(A, a0)
	tot := 0.0
	for _, v := range xx {
		tot += v
	}
	// The stall guard of Code, scaled to the group: for one signal it is
	// Code's own test.
	var floor float64
	if rule == SumSquares {
		floor = 1e-24 * tot
	} else {
		floor = 1e-12 * math.Sqrt(float64(sz)*tot)
	}
	L := s.l
	res := tot
	na := 0
	scored := false // s.score already holds the scores of A
	for na < maxAtoms && res > bound {
		score := s.score
		if sz == 1 && rule == SumAbs {
			score = A[:k]
		} else if !scored {
			groupScore(A, sz, k, rule, score)
		}
		bi, best := argmaxAbs(score)
		if bi < 0 || best < floor {
			break
		}
		for t := 0; t < na; t++ {
			if s.sel[t] == bi {
				bi = -1
				break
			}
		}
		if bi < 0 {
			break
		}
		l2 := 1.0
		w := s.w[:na]
		if na > 0 {
			// w = L⁻¹·G[S, j]; the new Cholesky row is [wᵀ, ℓ].
			for t := 0; t < na; t++ {
				v := s.gs[t*k+bi]
				row := L[t*ld : t*ld+t]
				for u, lv := range row {
					v -= lv * w[u]
				}
				w[t] = v / L[t*ld+t]
			}
			l2 = 1 - dot(w, w)
			if l2 <= 1e-10 {
				break // the atom is (nearly) a combination of the chosen ones
			}
		}
		gain := 0.0
		for i := 0; i < sz; i++ {
			v := A[i*k+bi]
			gain += v * v
		}
		gain /= l2
		if minGain > 0 && gain < minGain {
			break
		}
		copy(L[na*ld:na*ld+na], w)
		L[na*ld+na] = math.Sqrt(l2)
		s.sel[na] = bi
		copy(s.gs[na*k:(na+1)*k], c.G[bi*k:(bi+1)*k])
		na++
		res -= gain
		if na == maxAtoms || res <= bound {
			break
		}
		// q = G[j,:] − vᵀG[S,:] with v = L⁻ᵀw (S without j).
		v := s.v[:na-1]
		for t := na - 2; t >= 0; t-- {
			x := w[t]
			for u := t + 1; u < na-1; u++ {
				x -= L[u*ld+t] * v[u]
			}
			v[t] = x / L[t*ld+t]
		}
		q := s.q
		copy(q, s.gs[(na-1)*k:na*k])
		for t, vt := range v {
			axpy(-vt, s.gs[t*k:(t+1)*k], q)
		}
		if sz == 1 {
			blas64.Implementation().Daxpy(k, -A[bi]/l2, q, 1, A[:k], 1)
			continue
		}
		updateScore(A, q, sz, k, bi, l2, rule, s.score)
		scored = true
	}
	for i := 0; i < sz; i++ {
		as := s.a0s[i*ld : i*ld+na]
		for t := 0; t < na; t++ {
			as[t] = a0[i*k+s.sel[t]]
		}
	}
	s.solveAll(sz, na, ld, xx, errs)
	return na
}

// groupScore sets score[j] to Σᵢ |A_ij| (or Σᵢ A_ij²).
func groupScore(A []float64, sz, k int, rule SOMPRule, score []float64) {
	for j := range score {
		score[j] = 0
	}
	for i := 0; i < sz; i++ {
		row := A[i*k : (i+1)*k]
		if rule == SumSquares {
			for j, v := range row {
				score[j] += v * v
			}
		} else {
			for j, v := range row {
				score[j] += math.Abs(v)
			}
		}
	}
}

// updateScore applies Aᵢ −= (A_ij/ℓ²)·q to every row and sums the new
// scores in the same sweep.
func updateScore(A, q []float64, sz, k, bi int, l2 float64, rule SOMPRule, score []float64) {
	for j := range score {
		score[j] = 0
	}
	q = q[:k]
	score = score[:k]
	for i := 0; i < sz; i++ {
		row := A[i*k : (i+1)*k]
		f := -row[bi] / l2
		if rule == SumSquares {
			for j, qv := range q {
				v := row[j] + f*qv
				row[j] = v
				score[j] += v * v
			}
		} else {
			for j, qv := range q {
				v := row[j] + f*qv
				row[j] = v
				score[j] += math.Abs(v)
			}
		}
	}
}

// solveAll computes γᵢ = (L·Lᵀ)⁻¹·a0ᵢ[S] on the first na atoms for every
// signal, writes ‖rᵢ‖² = ‖xᵢ‖² − γᵢᵀa0ᵢ[S] into errs and returns their sum.
func (s *sompScratch) solveAll(sz, na, ld int, xx, errs []float64) float64 {
	L := s.l
	res := 0.0
	for i := 0; i < sz; i++ {
		as := s.a0s[i*ld : i*ld+na]
		g := s.gam[i*ld : i*ld+na]
		for t := 0; t < na; t++ {
			v := as[t]
			row := L[t*ld : t*ld+t]
			for u, lv := range row {
				v -= lv * g[u]
			}
			g[t] = v / L[t*ld+t]
		}
		for t := na - 1; t >= 0; t-- {
			v := g[t]
			for u := t + 1; u < na; u++ {
				v -= L[u*ld+t] * g[u]
			}
			g[t] = v / L[t*ld+t]
		}
		e := xx[i] - dot(g, as)
		if e < 0 {
			e = 0
		}
		errs[i] = e
		res += e
	}
	return res
}

// KSVDGroups trains a copy of d0 like KSVD, but codes the signals of X in
// the groups given as for SOMP, each group on one shared support with the
// options code (the simultaneous coding step of Mairal, Bach, Ponce, Sapiro
// & Zisserman 2009, with SOMP in place of their convex group penalty). The
// atom update is K-SVD's. Of opt it uses Rounds, Exact, Workers, Single and
// Progress; it panics when opt.Known or opt.EpsEach is set.
func KSVDGroups(d0 *Dict, X []float64, groups []int32, code SOMPOptions, opt KSVDOptions) (*Dict, *Codes) {
	if opt.Known != nil || opt.EpsEach != nil {
		panic("learn: KSVDGroups does not take Known or EpsEach")
	}
	d := d0.Clone()
	n, k := d.N, d.K
	m := int(groups[len(groups)-1])
	R := make([]float64, m*n)
	var codes *Codes
	for round := 1; round <= opt.Rounds; round++ {
		c := NewCoder(d)
		c.Workers = opt.Workers
		c.Single = opt.Single
		codes = c.SOMP(X, groups, code)
		residuals(d, X, nil, codes, R, n)
		users := atomUsers(codes, k)
		unused := make([]bool, k)
		for j := 0; j < k; j++ {
			if len(users[j]) == 0 {
				unused[j] = true
				continue
			}
			updateAtom(d, j, users[j], codes, R, nil, opt.Exact)
		}
		replaced := replaceAtoms(d, unused, X, R, m)
		if opt.Progress != nil {
			ss := 0.0
			for _, v := range R {
				ss += v * v
			}
			opt.Progress(RoundStats{Round: round, Rounds: opt.Rounds,
				MeanAtoms: float64(len(codes.Idx)) / float64(m),
				RMSE:      math.Sqrt(ss / float64(m*n)), Replaced: replaced})
		}
	}
	return d, codes
}
