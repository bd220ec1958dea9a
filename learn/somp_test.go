package learn

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// sompRandomDict is a Gaussian dictionary with unit-norm atoms.
func sompRandomDict(n, k int, seed uint64) *Dict {
	r := NewRand(seed)
	d := NewDict(n, k)
	for i := range d.Atoms {
		d.Atoms[i] = r.NormFloat64()
	}
	d.Normalize()
	return d
}

func singletons(m int) []int32 {
	g := make([]int32, m+1)
	for i := range g {
		g[i] = int32(i)
	}
	return g
}

// checkSameCodes asserts equal supports (same atoms, same order) and
// coefficients and residuals within tol.
func checkSameCodes(t *testing.T, what string, got, want *Codes, tol float64) {
	t.Helper()
	if got.Len() != want.Len() {
		t.Fatalf("%s: %d codes, want %d", what, got.Len(), want.Len())
	}
	for i := 0; i < want.Len(); i++ {
		if got.Atoms(i) != want.Atoms(i) {
			t.Errorf("%s: signal %d has %d atoms, want %d", what, i, got.Atoms(i), want.Atoms(i))
			continue
		}
		for q := 0; q < want.Atoms(i); q++ {
			pg, pw := got.Start[i]+int32(q), want.Start[i]+int32(q)
			if got.Idx[pg] != want.Idx[pw] {
				t.Errorf("%s: signal %d atom %d is %d, want %d", what, i, q, got.Idx[pg], want.Idx[pw])
			}
			if math.Abs(got.Val[pg]-want.Val[pw]) > tol {
				t.Errorf("%s: signal %d coefficient %d is %.15g, want %.15g", what, i, q, got.Val[pg], want.Val[pw])
			}
		}
		if math.Abs(got.Err[i]-want.Err[i]) > tol*math.Max(1, want.Err[i]) {
			t.Errorf("%s: signal %d residual %g, want %g", what, i, got.Err[i], want.Err[i])
		}
	}
}

// With one signal per group, simultaneous OMP is OMP (Tropp, Gilbert &
// Strauss 2006, section 3: SOMP reduces to OMP for a single signal): the
// same support and coefficients to 1e-9, for both scoring rules, by error
// bound and by atom count, over several coding blocks.
func TestSOMPOneSignalEqualsOMP(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	c := NewCoder(d)
	rng := NewRand(11)
	m := 2*sompBlockSignals + 37
	X := make([]float64, m*64)
	for i := range X {
		X[i] = 20 * rng.NormFloat64()
	}
	// A smooth signal, a constant one and a zero one as well.
	for j := 0; j < 64; j++ {
		X[j] = 50 * math.Sin(float64(j)/9)
		X[64+j] = 7
		X[128+j] = 0
	}
	for _, rule := range []SOMPRule{SumAbs, SumSquares} {
		for _, cs := range []struct {
			eps float64
			L   int
		}{{64 * 20 * 20 * 0.6, 32}, {0, 6}, {64 * 20 * 20 * 0.9, 0}} {
			want := c.Code(X, m, cs.eps, nil, cs.L)
			got := c.SOMP(X, singletons(m), SOMPOptions{Eps: cs.eps, MaxAtoms: cs.L, Rule: rule})
			checkSameCodes(t, "DCT", got, want, 1e-9)
		}
	}
}

// The same against the scikit-learn 1.2.1 reference dictionary and signals
// of ../shared/reference/omp.json, whose OMP codes omp_test checks.
func TestSOMPOneSignalEqualsOMPOnReference(t *testing.T) {
	r, d, X := loadOMPRef(t)
	c := NewCoder(d)
	want := c.Code(X, r.M, r.ByError.Tol, nil, 0)
	got := c.SOMP(X, singletons(r.M), SOMPOptions{Eps: r.ByError.Tol})
	checkSameCodes(t, "by error", got, want, 1e-9)
	checkCodes(t, r, got, r.ByError.Codes, 1e-9)
	got = c.SOMP(X, singletons(r.M), SOMPOptions{MaxAtoms: r.ByCount.L, Rule: SumSquares})
	checkCodes(t, r, got, r.ByCount.Codes, 1e-9)
}

// textbookSOMP is algorithm 3.1 of Tropp, Gilbert & Strauss (2006) written
// out with explicit residuals and a least-squares solve per signal.
//
// With minGain > 0 an atom is kept only if it lowers the total residual by
// at least minGain (the penalised form of the same greedy search).
func textbookSOMP(D *mat.Dense, X [][]float64, bound, minGain float64, L int, rule SOMPRule) ([]int, [][]float64) {
	n, k := D.Dims()
	R := make([]*mat.VecDense, len(X))
	for i, x := range X {
		R[i] = mat.NewVecDense(n, append([]float64(nil), x...))
	}
	total := func() float64 {
		s := 0.0
		for _, r := range R {
			s += mat.Dot(r, r)
		}
		return s
	}
	var sel []int
	var coef [][]float64
	for len(sel) < L && total() > bound {
		best, bi := -1.0, -1
		for j := 0; j < k; j++ {
			v := 0.0
			for _, r := range R {
				c := mat.Dot(D.ColView(j), r)
				if rule == SumSquares {
					v += c * c
				} else {
					v += math.Abs(c)
				}
			}
			if v > best {
				best, bi = v, j
			}
		}
		before := total()
		sel = append(sel, bi)
		A := mat.NewDense(n, len(sel), nil)
		for c, j := range sel {
			A.SetCol(c, mat.Col(nil, j, D))
		}
		saved := make([]*mat.VecDense, len(R))
		for i, r := range R {
			saved[i] = mat.VecDenseCopyOf(r)
		}
		prev := append([][]float64(nil), coef...)
		coef = coef[:0]
		for i, x := range X {
			var g mat.VecDense
			if err := g.SolveVec(A, mat.NewVecDense(n, x)); err != nil {
				panic(err)
			}
			var fit mat.VecDense
			fit.MulVec(A, &g)
			R[i].SubVec(mat.NewVecDense(n, x), &fit)
			coef = append(coef, mat.Col(nil, 0, &g))
		}
		if minGain > 0 && before-total() < minGain {
			sel, coef, R = sel[:len(sel)-1], prev, saved
			break
		}
	}
	return sel, coef
}

// Groups of 1 to 9 signals near a common sparse support, plus noise: the
// coder picks the textbook algorithm's atoms in its order, with its
// coefficients to 1e-9, under both rules and all stopping rules.
func TestSOMPEqualsTextbookSOMP(t *testing.T) {
	const n, k = 32, 96
	d := sompRandomDict(n, k, 3)
	D := mat.NewDense(n, k, nil)
	for j := 0; j < k; j++ {
		for i := 0; i < n; i++ {
			D.Set(i, j, d.Atom(j)[i])
		}
	}
	c := NewCoder(d)
	rng := NewRand(5)
	var X []float64
	groups := []int32{0}
	var sigs [][][]float64
	for g := 0; g < 40; g++ {
		sz := 1 + g%9
		atoms := rng.Perm(k)[:4]
		var grp [][]float64
		for i := 0; i < sz; i++ {
			x := make([]float64, n)
			for _, a := range atoms {
				axpy(1+rng.Float64(), d.Atom(a), x)
			}
			for j := range x {
				x[j] += 0.05 * rng.NormFloat64()
			}
			grp = append(grp, x)
			X = append(X, x...)
		}
		sigs = append(sigs, grp)
		groups = append(groups, groups[len(groups)-1]+int32(sz))
	}
	const eps = 32 * 0.05 * 0.05
	for _, rule := range []SOMPRule{SumAbs, SumSquares} {
		for _, cs := range []struct{ L, gain int }{{6, 0}, {0, 0}, {0, 1}} {
			L := cs.L
			e := eps
			if L > 0 || cs.gain > 0 {
				e = 0 // the count or the gain alone stops
			}
			gain := float64(cs.gain) * 0.3 // per signal, about 0.3 of an atom's energy here
			codes := c.SOMP(X, groups, SOMPOptions{Eps: e, MaxAtoms: L, Rule: rule, MinGain: gain})
			for g, grp := range sigs {
				lim := L
				if lim == 0 {
					lim = n
				}
				sel, coef := textbookSOMP(D, grp, e*float64(len(grp)), gain*float64(len(grp)), lim, rule)
				if cs.gain > 0 && len(sel) >= 8 {
					t.Errorf("rule %d group %d: the gain rule kept %d atoms, want about the 4 true ones", rule, g, len(sel))
				}
				for i := range grp {
					s := int(groups[g]) + i
					if codes.Atoms(s) != len(sel) {
						t.Errorf("rule %d L %d group %d signal %d: %d atoms, textbook %d", rule, L, g, i, codes.Atoms(s), len(sel))
						continue
					}
					for q, a := range sel {
						p := codes.Start[s] + int32(q)
						if int(codes.Idx[p]) != a || math.Abs(codes.Val[p]-coef[i][q]) > 1e-9 {
							t.Errorf("rule %d L %d group %d signal %d atom %d: (%d, %.12g), textbook (%d, %.12g)",
								rule, L, g, i, q, codes.Idx[p], codes.Val[p], a, coef[i][q])
						}
					}
				}
			}
		}
	}
}

// Every group meets its bound, or has the most atoms allowed, and one atom
// fewer would not have met it; a group already within the bound gets no
// atoms and its energy as residual.
func TestSOMPStopsAtGroupBound(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	c := NewCoder(d)
	rng := NewRand(21)
	const m, size = 400, 8
	X := make([]float64, m*64)
	for i := range X {
		X[i] = 15 * rng.NormFloat64()
	}
	for j := 0; j < size*64; j++ {
		X[j] = 0.1 * rng.NormFloat64() // a group within any sensible bound
	}
	groups := make([]int32, m/size+1)
	for g := range groups {
		groups[g] = int32(g * size)
	}
	const eps, L = 64 * 15 * 15 * 0.7, 32
	codes := c.SOMP(X, groups, SOMPOptions{Eps: eps, MaxAtoms: L})
	for g := 0; g+1 < len(groups); g++ {
		a, b := int(groups[g]), int(groups[g+1])
		tot, na := 0.0, codes.Atoms(a)
		for i := a; i < b; i++ {
			if codes.Atoms(i) != na {
				t.Fatalf("group %d: signals have %d and %d atoms", g, na, codes.Atoms(i))
			}
			tot += codes.Err[i]
		}
		if g == 0 {
			if na != 0 {
				t.Errorf("group within its bound got %d atoms", na)
			}
			continue
		}
		if tot > size*eps && na < L {
			t.Errorf("group %d: residual %g above bound %g with %d < %d atoms", g, tot, size*eps, na, L)
		}
		fewer := c.SOMP(X[a*64:b*64], []int32{0, size}, SOMPOptions{Eps: eps, MaxAtoms: na - 1})
		t1 := 0.0
		for i := 0; i < size; i++ {
			t1 += fewer.Err[i]
		}
		if t1 <= size*eps {
			t.Errorf("group %d: %d atoms already met the bound", g, na-1)
		}
	}
}

// Tropp, Gilbert & Strauss (2006, section 7) report that the chance of
// recovering the common support rises with the number of signals: here a
// support of 5 in a 32×128 Gaussian dictionary under noise is found in most
// trials from 8 signals, clearly more often than OMP finds it from each
// signal alone (the thresholds are this test's own).
func TestSOMPRecoversCommonSupportBetterThanOMP(t *testing.T) {
	const n, k, s, size, trials = 32, 128, 5, 8, 200
	d := sompRandomDict(n, k, 8)
	c := NewCoder(d)
	rng := NewRand(13)
	X := make([]float64, trials*size*n)
	truth := make([][]int, trials)
	for tr := 0; tr < trials; tr++ {
		truth[tr] = rng.Perm(k)[:s]
		for i := 0; i < size; i++ {
			x := X[(tr*size+i)*n : (tr*size+i+1)*n]
			for _, a := range truth[tr] {
				v := 0.5 + rng.Float64()
				if rng.IntN(2) == 0 {
					v = -v
				}
				axpy(v, d.Atom(a), x)
			}
			for j := range x {
				x[j] += 0.25 * rng.NormFloat64()
			}
		}
	}
	groups := make([]int32, trials+1)
	for g := range groups {
		groups[g] = int32(g * size)
	}
	joint := c.SOMP(X, groups, SOMPOptions{MaxAtoms: s})
	alone := c.Code(X, trials*size, 0, nil, s)
	okJoint, okAlone := 0, 0
	for tr := 0; tr < trials; tr++ {
		want := map[int32]bool{}
		for _, a := range truth[tr] {
			want[int32(a)] = true
		}
		hit := func(cd *Codes, i int) bool {
			for p := cd.Start[i]; p < cd.Start[i+1]; p++ {
				if !want[cd.Idx[p]] {
					return false
				}
			}
			return cd.Atoms(i) == s
		}
		if hit(joint, tr*size) {
			okJoint++
		}
		for i := 0; i < size; i++ {
			if hit(alone, tr*size+i) {
				okAlone++
			}
		}
	}
	rj, ra := float64(okJoint)/trials, float64(okAlone)/(trials*size)
	t.Logf("support recovered: SOMP %.3f, OMP alone %.3f", rj, ra)
	if rj < 0.9 || rj < ra+0.1 {
		t.Errorf("SOMP recovery %.3f, OMP %.3f: want ≥ 0.9 and 0.1 above OMP", rj, ra)
	}
}

func TestSOMPWorkerCountDoesNotChangeBits(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	rng := NewRand(17)
	groups := []int32{0}
	for g := 0; groups[len(groups)-1] < 3000; g++ {
		sz := int32(1 + (g*7)%40)
		if g == 5 {
			sz = sompBlockSignals + 100 // a group larger than a block
		}
		groups = append(groups, groups[len(groups)-1]+sz)
	}
	m := int(groups[len(groups)-1])
	X := make([]float64, m*64)
	for i := range X {
		X[i] = 20 * rng.NormFloat64()
	}
	opt := SOMPOptions{Eps: 64 * 400 * 0.6, MaxAtoms: 32}
	c1 := NewCoder(d)
	c1.Workers = 1
	base := c1.SOMP(X, groups, opt)
	for _, w := range []int{2, 5} {
		c := NewCoder(d)
		c.Workers = w
		c.Single = false
		got := c.SOMP(X, groups, opt)
		if len(got.Idx) != len(base.Idx) {
			t.Fatalf("workers %d: %d coefficients, want %d", w, len(got.Idx), len(base.Idx))
		}
		for i := range got.Val {
			if got.Val[i] != base.Val[i] || got.Idx[i] != base.Idx[i] {
				t.Fatalf("workers %d: coefficient %d differs", w, i)
			}
		}
	}
}

// Training on groups of one signal is K-SVD (the coding step is then OMP).
func TestKSVDGroupsOfOneEqualsKSVD(t *testing.T) {
	d0 := OvercompleteDCT(8, 12, 1)
	rng := NewRand(23)
	const m = 1500
	X := make([]float64, m*64)
	for i := 0; i < m; i++ {
		x := X[i*64 : (i+1)*64]
		f := 1 + rng.Float64()*3
		for j := range x {
			x[j] = 30*math.Sin(f*float64(j%8)+float64(j/8)) + 5*rng.NormFloat64()
		}
	}
	opt := KSVDOptions{Rounds: 3, Eps: 64 * 25 * 1.3, MaxAtoms: 16}
	want, _ := KSVD(d0, X, m, opt)
	got, codes := KSVDGroups(d0, X, singletons(m), SOMPOptions{Eps: opt.Eps, MaxAtoms: opt.MaxAtoms}, opt)
	if codes.Len() != m {
		t.Fatalf("%d codes, want %d", codes.Len(), m)
	}
	worst := 0.0
	for i, v := range want.Atoms {
		worst = math.Max(worst, math.Abs(v-got.Atoms[i]))
	}
	if worst > 1e-8 {
		t.Errorf("atoms differ from K-SVD's by up to %g", worst)
	}
}

// Coding groups that share pool rows gives the codes of SOMP on the
// gathered signals, whatever the worker count.
func TestSOMPSharedEqualsSOMPOnGatheredSignals(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	rng := NewRand(29)
	const mp = 700
	pool := make([]float64, mp*64)
	for i := range pool {
		pool[i] = 20 * rng.NormFloat64()
	}
	groups := []int32{0}
	var members []int32
	for g := 0; g < 150; g++ {
		sz := 1 + rng.IntN(12)
		for i := 0; i < sz; i++ {
			members = append(members, int32(rng.IntN(mp)))
		}
		groups = append(groups, int32(len(members)))
	}
	X := make([]float64, 0, len(members)*64)
	for _, q := range members {
		X = append(X, pool[int(q)*64:(int(q)+1)*64]...)
	}
	opt := SOMPOptions{Eps: 64 * 400 * 0.7, MaxAtoms: 20, MinGain: 400}
	for _, single := range []bool{false, true} {
		c := NewCoder(d)
		c.Single = single
		want := c.SOMP(X, groups, opt)
		for _, w := range []int{1, 3} {
			c.Workers = w
			got := c.SOMPShared(pool, members, groups, opt)
			checkSameCodes(t, "shared", got, want, 1e-9)
		}
	}
}
