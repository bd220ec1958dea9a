package learn

import "math"

// DCTBasis returns the orthonormal n-point DCT-II basis, one basis vector
// per row (row k, sample i): c_k·cos(π(2i+1)k/(2n)).
func DCTBasis(n int) [][]float64 {
	rows := make([][]float64, n)
	for k := range rows {
		c := math.Sqrt(2 / float64(n))
		if k == 0 {
			c = math.Sqrt(1 / float64(n))
		}
		rows[k] = make([]float64, n)
		for i := range rows[k] {
			rows[k][i] = c * math.Cos(math.Pi*float64((2*i+1)*k)/float64(2*n))
		}
	}
	return rows
}

// OvercompleteDCT returns the separable overcomplete DCT dictionary of
// Elad & Aharon (2006) for p×p patches: m one-dimensional cosines
// cos(π·i·k/m), i < p, k < m, all but the constant one made zero-mean and
// normalised, and their Kronecker products (m² atoms). For c channels each
// atom is repeated in every channel and renormalised (a gray start that the
// training then colours).
func OvercompleteDCT(p, m, c int) *Dict {
	one := make([][]float64, m)
	for k := range one {
		v := make([]float64, p)
		mean := 0.0
		for i := range v {
			v[i] = math.Cos(math.Pi * float64(i*k) / float64(m))
			mean += v[i]
		}
		mean /= float64(p)
		if k > 0 {
			for i := range v {
				v[i] -= mean
			}
		}
		norm := 0.0
		for _, x := range v {
			norm += x * x
		}
		norm = math.Sqrt(norm)
		for i := range v {
			v[i] /= norm
		}
		one[k] = v
	}
	n := c * p * p
	d := NewDict(n, m*m)
	d.Patch, d.Channels = p, c
	for ky := 0; ky < m; ky++ {
		for kx := 0; kx < m; kx++ {
			a := d.Atom(ky*m + kx)
			for ch := 0; ch < c; ch++ {
				for y := 0; y < p; y++ {
					for x := 0; x < p; x++ {
						a[ch*p*p+y*p+x] = one[ky][y] * one[kx][x]
					}
				}
			}
		}
	}
	d.Normalize()
	return d
}

// RandomDict picks k distinct signals of the m×n row-major block X, seeded,
// as unit-norm atoms. Zero signals are passed over; it needs at least k
// non-zero signals and panics otherwise.
func RandomDict(X []float64, m, n, k int, seed uint64) *Dict {
	r := NewRand(seed)
	d := NewDict(n, k)
	perm := r.Perm(m)
	j := 0
	for _, i := range perm {
		if j == k {
			break
		}
		x := X[i*n : (i+1)*n]
		s := 0.0
		for _, v := range x {
			s += v * v
		}
		if s == 0 {
			continue
		}
		copy(d.Atom(j), x)
		j++
	}
	if j < k {
		panic("learn: RandomDict needs at least k non-zero signals")
	}
	d.Normalize()
	return d
}

// DCTAtoms returns the first atoms atoms of the overcomplete DCT for p×p
// patches of c channels: OvercompleteDCT(p, √atoms, c) when atoms is a
// square of at least p², else the first atoms of the next larger square
// one. It is the starting dictionary of the pipelines.
func DCTAtoms(p, atoms, c int) *Dict {
	m := int(math.Round(math.Sqrt(float64(atoms))))
	if m*m != atoms || m < p {
		m = max(int(math.Ceil(math.Sqrt(float64(atoms)))), p)
		full := OvercompleteDCT(p, m, c)
		d := NewDict(full.N, atoms)
		d.Patch, d.Channels = p, c
		copy(d.Atoms, full.Atoms[:atoms*full.N])
		return d
	}
	return OvercompleteDCT(p, m, c)
}
