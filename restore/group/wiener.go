package group

import (
	"math"

	"tessera/learn"
)

// wiener is the scratch of the collaborative Wiener step for one group.
type wiener struct {
	l    []float64 // Cholesky factor of G_SS
	inv  []float64 // diagonal of G_SS⁻¹
	z    []float64
	gn   []float64 // noisy coefficients, members × support
	col  []float64
	dcts map[int][]float64
}

func newWiener(maxAtoms int) *wiener {
	return &wiener{l: make([]float64, maxAtoms*maxAtoms), inv: make([]float64, maxAtoms), z: make([]float64, maxAtoms)}
}

// dct returns the orthonormal DCT-II of length k, row f = frequency f.
func (w *wiener) dct(k int) []float64 {
	if t, ok := w.dcts[k]; ok {
		return t
	}
	if w.dcts == nil {
		w.dcts = map[int][]float64{}
	}
	t := make([]float64, 0, k*k)
	for _, row := range learn.DCTBasis(k) {
		t = append(t, row...)
	}
	w.dcts[k] = t
	return t
}

// prepare factors G_SS = L·Lᵀ for the support idx and fills w.inv with the
// diagonal of G_SS⁻¹; false when G_SS is singular.
func (w *wiener) prepare(G []float64, K int, idx []int32) bool {
	na := len(idx)
	L := w.l
	for i := 0; i < na; i++ {
		for j := 0; j <= i; j++ {
			v := G[int(idx[i])*K+int(idx[j])]
			for t := 0; t < j; t++ {
				v -= L[i*na+t] * L[j*na+t]
			}
			if i == j {
				if v <= 1e-12 {
					return false
				}
				L[i*na+i] = math.Sqrt(v)
			} else {
				L[i*na+j] = v / L[j*na+j]
			}
		}
	}
	// (G_SS⁻¹)_tt = ‖L⁻¹e_t‖², by solving L·z = e_t.
	for t := 0; t < na; t++ {
		z := w.z[:na]
		s := 0.0
		for i := t; i < na; i++ {
			v := 0.0
			if i == t {
				v = 1
			}
			for u := t; u < i; u++ {
				v -= L[i*na+u] * z[u]
			}
			z[i] = v / L[i*na+i]
			s += z[i] * z[i]
		}
		w.inv[t] = s
	}
	return true
}

// filter replaces the codes of entries a..b−1 (one group coded on the
// pilot, one shared support) by the collaborative Wiener estimate from the
// noisy patches (rows members[i] of noisy): the least-squares coefficients
// of each noisy patch on the support are transformed across the members by
// a DCT and scaled by p²/(p² + σ_t²), p being the pilot's coefficient
// likewise transformed and σ_t² = σ²·(G_SS⁻¹)_tt the noise variance of a
// least-squares coefficient; the patch means, as the coefficients of the
// constant atom, are filtered alike (the second step of Dabov et al. 2007,
// with the learned atoms as the patch transform). means holds the noisy
// means per entry and receives the filtered ones; pmean holds the pilot's
// per pool row. It returns the sum of the squared factors.
func (w *wiener) filter(codes *learn.Codes, d *learn.Dict, G []float64, a, b int, members []int32, noisy []float64, s2 float64, means, pmean []float64) float64 {
	k := b - a
	n := d.N
	if cap(w.col) < 2*k {
		w.col = make([]float64, 2*k)
	}
	T := w.dct(k)
	ph, gh := w.col[:k], w.col[k:2*k]
	sum := 0.0
	// The means: coefficient √n·mean, noise variance σ².
	rn := math.Sqrt(float64(n))
	for i := 0; i < k; i++ {
		ph[i] = pmean[members[a+i]] * rn
	}
	sum += w.shrink(T, k, ph, gh, s2, func(i int) float64 { return means[a+i] * rn },
		func(i int, v float64) { means[a+i] = v / rn })

	na := codes.Atoms(a)
	if na == 0 {
		return sum
	}
	idx := codes.Idx[codes.Start[a] : codes.Start[a]+int32(na)]
	if !w.prepare(G, d.K, idx) {
		return sum
	}
	L := w.l
	if cap(w.gn) < k*na {
		w.gn = make([]float64, k*na)
	}
	gn := w.gn[:k*na]
	for i := 0; i < k; i++ {
		r := int(members[a+i])
		y := noisy[r*n : (r+1)*n]
		g := gn[i*na : (i+1)*na]
		for t, at := range idx {
			s := 0.0
			for j, v := range d.Atom(int(at)) {
				s += v * y[j]
			}
			g[t] = s
		}
		for t := 0; t < na; t++ {
			v := g[t]
			for u := 0; u < t; u++ {
				v -= L[t*na+u] * g[u]
			}
			g[t] = v / L[t*na+t]
		}
		for t := na - 1; t >= 0; t-- {
			v := g[t]
			for u := t + 1; u < na; u++ {
				v -= L[u*na+t] * g[u]
			}
			g[t] = v / L[t*na+t]
		}
	}
	for t := 0; t < na; t++ {
		for i := 0; i < k; i++ {
			ph[i] = codes.Val[codes.Start[a+i]+int32(t)]
		}
		sum += w.shrink(T, k, ph, gh, s2*w.inv[t], func(i int) float64 { return gn[i*na+t] },
			func(i int, v float64) { codes.Val[codes.Start[a+i]+int32(t)] = v })
	}
	return sum
}

// shrink transforms the pilot column ph and the noisy column get(i) across
// the k members, applies the Wiener factors for noise variance nv and puts
// the result back through set. gh is scratch of length k.
func (w *wiener) shrink(T []float64, k int, ph, gh []float64, nv float64, get func(int) float64, set func(int, float64)) float64 {
	sum := 0.0
	for f := 0; f < k; f++ {
		row := T[f*k : (f+1)*k]
		sp, sg := 0.0, 0.0
		for i := 0; i < k; i++ {
			sp += row[i] * ph[i]
			sg += row[i] * get(i)
		}
		fac := sp * sp / (sp*sp + nv)
		sum += fac * fac
		gh[f] = fac * sg
	}
	for i := 0; i < k; i++ {
		v := 0.0
		for f := 0; f < k; f++ {
			v += T[f*k+i] * gh[f]
		}
		set(i, v)
	}
	return sum
}
