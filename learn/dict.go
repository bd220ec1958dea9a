package learn

import (
	"fmt"
	"math"
)

// Dict is a dictionary of K unit-norm atoms of length N. Atoms are stored
// one after another (atom k is Atoms[k*N:(k+1)*N]) so that an atom update
// and the correlation product X·Dᵀ both read contiguous memory.
type Dict struct {
	N, K  int
	Atoms []float64
	// Patch and Channels describe the signals when they are image patches
	// (N = Channels·Patch²); zero when the dictionary is not for patches.
	Patch, Channels int
}

// NewDict returns a zero dictionary of k atoms of length n.
func NewDict(n, k int) *Dict {
	if n <= 0 || k <= 0 {
		panic(fmt.Sprintf("learn: bad dictionary size %d×%d", n, k))
	}
	return &Dict{N: n, K: k, Atoms: make([]float64, n*k)}
}

// Atom returns atom k as a slice into the dictionary.
func (d *Dict) Atom(k int) []float64 { return d.Atoms[k*d.N : (k+1)*d.N] }

// Clone returns a deep copy.
func (d *Dict) Clone() *Dict {
	out := *d
	out.Atoms = append([]float64(nil), d.Atoms...)
	return &out
}

// Normalize scales every atom to unit norm; a zero atom is left as it is
// and reported as false.
func (d *Dict) Normalize() bool {
	ok := true
	for k := 0; k < d.K; k++ {
		a := d.Atom(k)
		s := 0.0
		for _, v := range a {
			s += v * v
		}
		if s == 0 {
			ok = false
			continue
		}
		inv := 1 / math.Sqrt(s)
		for i := range a {
			a[i] *= inv
		}
	}
	return ok
}
