package learn

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

type ompRef struct {
	N, K, M    int
	Dictionary []float64 `json:"dictionary_row_major"`
	Signals    []float64 `json:"signals_row_major"`
	ByCount    struct {
		L     int       `json:"n_nonzero_coefs"`
		Codes []float64 `json:"codes_row_major"`
	} `json:"by_count"`
	ByError struct {
		Tol   float64   `json:"tol_squared"`
		Codes []float64 `json:"codes_row_major"`
	} `json:"by_error"`
}

func loadOMPRef(t *testing.T) (*ompRef, *Dict, []float64) {
	b, err := os.ReadFile(sharedPath(t, "reference", "omp.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r ompRef
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	// Stored row-major with atoms and signals as columns; transpose to ours.
	d := NewDict(r.N, r.K)
	for i := 0; i < r.N; i++ {
		for k := 0; k < r.K; k++ {
			d.Atom(k)[i] = r.Dictionary[i*r.K+k]
		}
	}
	X := make([]float64, r.M*r.N)
	for i := 0; i < r.N; i++ {
		for j := 0; j < r.M; j++ {
			X[j*r.N+i] = r.Signals[i*r.M+j]
		}
	}
	return &r, d, X
}

func checkCodes(t *testing.T, r *ompRef, c *Codes, want []float64, tol float64) {
	t.Helper()
	for j := 0; j < r.M; j++ {
		got := make([]float64, r.K)
		for p := c.Start[j]; p < c.Start[j+1]; p++ {
			got[c.Idx[p]] = c.Val[p]
		}
		for k := 0; k < r.K; k++ {
			w := want[k*r.M+j]
			if math.Abs(got[k]-w) > tol {
				t.Errorf("signal %d atom %d: coefficient %.12g, reference %.12g", j, k, got[k], w)
			}
		}
	}
}

// Reference: scikit-learn 1.2.1 orthogonal_mp, ../shared/reference/omp.json.
func TestOMPMatchesReferenceByCount(t *testing.T) {
	r, d, X := loadOMPRef(t)
	c := NewCoder(d)
	codes := c.Code(X, r.M, 0, nil, r.ByCount.L)
	for j := 0; j < r.M; j++ {
		if codes.Atoms(j) != r.ByCount.L {
			t.Errorf("signal %d: %d atoms, want %d", j, codes.Atoms(j), r.ByCount.L)
		}
	}
	checkCodes(t, r, codes, r.ByCount.Codes, 1e-9)
}

// Reference: scikit-learn 1.2.1 orthogonal_mp with tol, ../shared/reference/omp.json.
func TestOMPMatchesReferenceByError(t *testing.T) {
	r, d, X := loadOMPRef(t)
	c := NewCoder(d)
	codes := c.Code(X, r.M, r.ByError.Tol, nil, 0)
	checkCodes(t, r, codes, r.ByError.Codes, 1e-9)
	// The residual the coder reports is the true one, and within the bound.
	res := make([]float64, r.N)
	for j := 0; j < r.M; j++ {
		codes.Reconstruct(d, j, res)
		e := 0.0
		for i, v := range X[j*r.N : (j+1)*r.N] {
			e += (v - res[i]) * (v - res[i])
		}
		if e > r.ByError.Tol*(1+1e-9) || math.Abs(e-codes.Err[j]) > 1e-9 {
			t.Errorf("signal %d: residual %g, reported %g, bound %g", j, e, codes.Err[j], r.ByError.Tol)
		}
	}
}

func TestOMPWorkerCountDoesNotChangeBits(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	rng := NewRand(7)
	m := 3*blockSize + 17
	X := make([]float64, m*64)
	for i := range X {
		X[i] = rng.NormFloat64() * 20
	}
	base := (&Coder{D: d, G: NewCoder(d).G, Workers: 1}).Code(X, m, 64*20*20*0.5, nil, 32)
	for _, w := range []int{2, 3, 8} {
		c := NewCoder(d)
		c.Workers = w
		got := c.Code(X, m, 64*20*20*0.5, nil, 32)
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

func TestOMPSkipsSignalsInsideBound(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	X := make([]float64, 2*64)
	X[0] = 0.5 // ‖x‖² = 0.25 ≤ 1
	for i := 64; i < 128; i++ {
		X[i] = 3
	}
	codes := NewCoder(d).Code(X, 2, 1, nil, 0)
	if codes.Atoms(0) != 0 || codes.Err[0] != 0.25 {
		t.Errorf("signal inside the bound got %d atoms, residual %g", codes.Atoms(0), codes.Err[0])
	}
	// A constant signal is one atom of the DCT (the constant one).
	if codes.Atoms(1) != 1 || codes.Idx[codes.Start[1]] != 0 {
		t.Errorf("constant signal: %d atoms, first %d", codes.Atoms(1), codes.Idx[codes.Start[1]])
	}
}

// The float32 correlation path must code like the float64 one: the same
// atoms for nearly every signal and coefficients within float32 rounding.
func TestOMPSingleMatchesDouble(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	r := NewRand(9)
	m := 2000
	X := make([]float64, m*64)
	for i := 0; i < m; i++ {
		a, b := r.NormFloat64()*30, r.NormFloat64()*30
		for j := 0; j < 64; j++ {
			X[i*64+j] = a*float64(j%8) + b*float64(j/8) + 10*r.NormFloat64()
		}
	}
	eps := 64 * 11.5 * 11.5
	ref := NewCoder(d).Code(X, m, eps, nil, 32)
	c := NewCoder(d)
	c.Single = true
	got := c.Code(X, m, eps, nil, 32)
	same := 0
	for i := 0; i < m; i++ {
		if equalInts(support(ref, i), support(got, i)) {
			same++
			for p := ref.Start[i]; p < ref.Start[i+1]; p++ {
				q := got.Start[i] + (p - ref.Start[i])
				if math.Abs(ref.Val[p]-got.Val[q]) > 1e-4*(1+math.Abs(ref.Val[p])) {
					t.Fatalf("signal %d: coefficient %g vs %g", i, got.Val[q], ref.Val[p])
				}
			}
		}
	}
	if same < m*99/100 {
		t.Errorf("only %d of %d signals got the same atoms", same, m)
	}
}
