package learn

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// Reference: scipy 1.10.1 scipy.fft.dct(norm="ortho") basis,
// ../shared/reference/reference.json dct8_ortho_rows.
func TestDCTBasisMatchesScipy(t *testing.T) {
	b, err := os.ReadFile(sharedPath(t, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Rows [][]float64 `json:"dct8_ortho_rows"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	got := DCTBasis(8)
	if len(ref.Rows) != 8 {
		t.Fatalf("reference has %d rows", len(ref.Rows))
	}
	for k := range got {
		for i := range got[k] {
			if math.Abs(got[k][i]-ref.Rows[k][i]) > 1e-12 {
				t.Errorf("row %d sample %d: %.15g, scipy %.15g", k, i, got[k][i], ref.Rows[k][i])
			}
		}
	}
}

// The construction of Elad & Aharon (2006): 256 unit-norm atoms for 8×8
// patches, the first constant, every other one zero-mean.
func TestOvercompleteDCTShape(t *testing.T) {
	d := OvercompleteDCT(8, 16, 1)
	if d.N != 64 || d.K != 256 {
		t.Fatalf("size %d×%d, want 64×256", d.N, d.K)
	}
	for k := 0; k < d.K; k++ {
		a := d.Atom(k)
		s, m := 0.0, 0.0
		for _, v := range a {
			s += v * v
			m += v
		}
		if math.Abs(s-1) > 1e-12 {
			t.Errorf("atom %d has norm² %g", k, s)
		}
		if k == 0 && math.Abs(a[0]-0.125) > 1e-12 {
			t.Errorf("atom 0 is not constant 1/8: %g", a[0])
		}
		// Zero-mean in x or in y makes the separable product zero-mean.
		if k > 0 && math.Abs(m) > 1e-12 {
			t.Errorf("atom %d has mean %g", k, m/64)
		}
	}
}
