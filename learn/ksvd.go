package learn

import (
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// KSVDOptions control dictionary training.
type KSVDOptions struct {
	Rounds   int     // number of coding + update rounds
	Eps      float64 // coding bound on ‖x − Dα‖² (per signal: EpsEach)
	EpsEach  []float64
	MaxAtoms int // atoms per signal at most; 0 means N
	// Exact updates each atom by the SVD of its restricted residual; false
	// uses one power iteration (the approximate K-SVD of Rubinstein et al.
	// 2008), much cheaper and, in their measurements, as good.
	Exact bool
	// Known, when set, marks the known entries of every signal (m×N): the
	// coding is masked and atom updates fit the known entries only.
	Known   []bool
	Workers int
	Single  bool // float32 correlations in the coding step (see Coder.Single)
	// Progress, when set, is called after every round.
	Progress func(RoundStats)
}

// RoundStats summarises one K-SVD round.
type RoundStats struct {
	Round, Rounds int
	MeanAtoms     float64 // atoms per signal in this round's coding
	RMSE          float64 // root mean squared residual entry after the update
	Replaced      int     // atoms replaced by badly represented signals
}

// duplicateCos is the |dᵢᵀdⱼ| above which two atoms count as repeats (common
// practice in K-SVD implementations).
const duplicateCos = 0.99

// KSVD trains a copy of d0 on the m signals of X (row-major m×N) with the
// K-SVD algorithm of Aharon, Elad & Bruckstein (2006) and returns it with
// the codes of the last round. It is deterministic: it draws nothing at
// random, and coding does not depend on the worker count.
func KSVD(d0 *Dict, X []float64, m int, opt KSVDOptions) (*Dict, *Codes) {
	d := d0.Clone()
	n, k := d.N, d.K
	R := make([]float64, m*n) // residuals X − DA (zero at unknown entries)
	var codes *Codes
	for round := 1; round <= opt.Rounds; round++ {
		c := NewCoder(d)
		c.Workers = opt.Workers
		c.Single = opt.Single
		if opt.Known != nil {
			codes = c.CodeMasked(X, opt.Known, m, opt.Eps, opt.EpsEach, opt.MaxAtoms)
		} else {
			codes = c.Code(X, m, opt.Eps, opt.EpsEach, opt.MaxAtoms)
		}
		residuals(d, X, opt.Known, codes, R, n)
		users := atomUsers(codes, k)
		unused := make([]bool, k)
		for j := 0; j < k; j++ {
			if len(users[j]) == 0 {
				unused[j] = true
				continue
			}
			updateAtom(d, j, users[j], codes, R, opt.Known, opt.Exact)
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

// residuals fills R with X − DA, zero where an entry is unknown.
func residuals(d *Dict, X []float64, known []bool, codes *Codes, R []float64, n int) {
	copy(R, X)
	for i := 0; i < codes.Len(); i++ {
		r := R[i*n : (i+1)*n]
		for p := codes.Start[i]; p < codes.Start[i+1]; p++ {
			axpy(-codes.Val[p], d.Atom(int(codes.Idx[p])), r)
		}
		if known != nil {
			kn := known[i*n : (i+1)*n]
			for j := range r {
				if !kn[j] {
					r[j] = 0
				}
			}
		}
	}
}

// atomUsers lists, per atom, the positions in codes.Val of its coefficients.
func atomUsers(codes *Codes, k int) [][]int32 {
	count := make([]int, k)
	for _, a := range codes.Idx {
		count[a]++
	}
	users := make([][]int32, k)
	for j := range users {
		users[j] = make([]int32, 0, count[j])
	}
	for p, a := range codes.Idx {
		users[a] = append(users[a], int32(p))
	}
	return users
}

// updateAtom replaces atom j and its coefficients by the best rank-1 fit of
// the residual of the signals that use it, computed without the atom, and
// keeps R equal to X − DA.
func updateAtom(d *Dict, j int, pos []int32, codes *Codes, R []float64, known []bool, exact bool) {
	n := d.N
	sig := signalOf(codes, pos)
	dj := d.Atom(j)
	w := len(pos)
	// E = R_ω + d_j·a_jᵀ, one row per signal.
	E := make([]float64, w*n)
	for q, p := range pos {
		e := E[q*n : (q+1)*n]
		copy(e, R[sig[q]*n:(sig[q]+1)*n])
		axpy(codes.Val[p], dj, e)
		if known != nil {
			kn := known[sig[q]*n : (sig[q]+1)*n]
			for t := range e {
				if !kn[t] {
					e[t] = 0
				}
			}
		}
	}
	newD := make([]float64, n)
	newA := make([]float64, w)
	switch {
	case known != nil:
		maskedRank1(E, known, sig, dj, codes, pos, newD, newA, n)
	case exact:
		var svd mat.SVD
		if !svd.Factorize(mat.NewDense(w, n, E), mat.SVDThinV) {
			return
		}
		var v mat.Dense
		svd.VTo(&v)
		for t := 0; t < n; t++ {
			newD[t] = v.At(t, 0)
		}
		for q := 0; q < w; q++ {
			newA[q] = dot(E[q*n:(q+1)*n], newD)
		}
	default:
		// One power iteration from the current coefficients.
		for q, p := range pos {
			axpy(codes.Val[p], E[q*n:(q+1)*n], newD)
		}
		nd := math.Sqrt(dot(newD, newD))
		if nd == 0 {
			return
		}
		for t := range newD {
			newD[t] /= nd
		}
		for q := 0; q < w; q++ {
			newA[q] = dot(E[q*n:(q+1)*n], newD)
		}
	}
	copy(dj, newD)
	for q, p := range pos {
		codes.Val[p] = newA[q]
		r := R[sig[q]*n : (sig[q]+1)*n]
		e := E[q*n : (q+1)*n]
		for t := range r {
			r[t] = e[t] - newA[q]*newD[t]
		}
		if known != nil {
			kn := known[sig[q]*n : (sig[q]+1)*n]
			for t := range r {
				if !kn[t] {
					r[t] = 0
				}
			}
		}
	}
}

// maskedRank1 fits E ≈ a·dᵀ on the known entries only, by a few rounds of
// alternating weighted least squares from the current atom (the weighted
// rank-1 step of K-SVD with missing data, Mairal, Elad & Sapiro 2008).
func maskedRank1(E []float64, known []bool, sig []int, dj []float64, codes *Codes, pos []int32, newD, newA []float64, n int) {
	copy(newD, dj)
	for q, p := range pos {
		newA[q] = codes.Val[p]
	}
	num := make([]float64, n)
	den := make([]float64, n)
	for it := 0; it < 3; it++ {
		for t := range num {
			num[t], den[t] = 0, 0
		}
		for q := range pos {
			e := E[q*n : (q+1)*n]
			kn := known[sig[q]*n : (sig[q]+1)*n]
			a := newA[q]
			for t := range e {
				if kn[t] {
					num[t] += a * e[t]
					den[t] += a * a
				}
			}
		}
		for t := range newD {
			if den[t] > 0 {
				newD[t] = num[t] / den[t]
			}
		}
		nd := math.Sqrt(dot(newD, newD))
		if nd == 0 {
			copy(newD, dj)
			return
		}
		for t := range newD {
			newD[t] /= nd
		}
		for q := range pos {
			e := E[q*n : (q+1)*n]
			kn := known[sig[q]*n : (sig[q]+1)*n]
			s, ss := 0.0, 0.0
			for t := range e {
				if kn[t] {
					s += newD[t] * e[t]
					ss += newD[t] * newD[t]
				}
			}
			if ss > 0 {
				newA[q] = s / ss
			} else {
				newA[q] = 0
			}
		}
	}
}

// signalOf maps coefficient positions to signal indices.
func signalOf(codes *Codes, pos []int32) []int {
	sig := make([]int, len(pos))
	for q, p := range pos {
		// Start is sorted: the signal is the last start ≤ p.
		sig[q] = sort.Search(len(codes.Start), func(i int) bool { return codes.Start[i] > p }) - 1
	}
	return sig
}

// worstFirst returns the indices of the c largest errs, largest first,
// ties by index: the first c of a stable sort by decreasing error, found
// from a sort of the values alone (no index shuffling) and a stable sort
// of those c.
func worstFirst(errs []float64, c int) []int {
	m := len(errs)
	if c >= m {
		order := make([]int, m)
		for i := range order {
			order[i] = i
		}
		sort.SliceStable(order, func(a, b int) bool { return errs[order[a]] > errs[order[b]] })
		return order
	}
	v := slices.Clone(errs)
	slices.Sort(v)
	t := v[m-c] // the c-th largest value
	order := make([]int, 0, c)
	for i, e := range errs {
		if e > t {
			order = append(order, i)
		}
	}
	for i, e := range errs {
		if len(order) == c {
			break
		}
		if e == t {
			order = append(order, i)
		}
	}
	sort.SliceStable(order, func(a, b int) bool { return errs[order[a]] > errs[order[b]] })
	return order
}

// replaceAtoms swaps unused atoms, and atoms that nearly repeat an earlier
// one, for the worst-represented signals (largest residual), normalised.
func replaceAtoms(d *Dict, unused []bool, X, R []float64, m int) int {
	n, k := d.N, d.K
	errs := make([]float64, m)
	for i := range errs {
		r := R[i*n : (i+1)*n]
		errs[i] = dot(r, r)
	}
	// The worst signals in order of error (ties by index), sorted only
	// when an atom needs replacing, and then only as far as needed: most
	// rounds replace none or a few of the k atoms.
	var order []int
	worst := func(next int) int {
		if order == nil || (next == len(order) && len(order) < m) {
			order = worstFirst(errs, min(m, max(2*len(order), k)))
		}
		if next >= len(order) {
			return -1
		}
		return order[next]
	}
	next := 0
	replaced := 0
	for j := 0; j < k; j++ {
		bad := unused[j]
		if !bad {
			aj := d.Atom(j)
			for i := 0; i < j; i++ {
				if math.Abs(dot(aj, d.Atom(i))) > duplicateCos {
					bad = true
					break
				}
			}
		}
		if !bad {
			continue
		}
		for next < m {
			w := worst(next)
			if w < 0 {
				break
			}
			x := X[w*n : (w+1)*n]
			next++
			s := dot(x, x)
			if s > 0 {
				aj := d.Atom(j)
				inv := 1 / math.Sqrt(s)
				for t := range aj {
					aj[t] = x[t] * inv
				}
				replaced++
				break
			}
		}
	}
	return replaced
}
