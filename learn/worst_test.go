package learn

import (
	"math/rand/v2"
	"sort"
	"testing"
)

// worstFirst must give the head of a stable sort by decreasing error, for
// every length asked and with many ties.
func TestWorstFirstIsStableSortHead(t *testing.T) {
	r := rand.New(rand.NewPCG(4, 5))
	for trial := 0; trial < 200; trial++ {
		m := 1 + r.IntN(300)
		errs := make([]float64, m)
		for i := range errs {
			errs[i] = float64(r.IntN(1 + trial%20)) // few distinct values: ties
		}
		full := make([]int, m)
		for i := range full {
			full[i] = i
		}
		sort.SliceStable(full, func(a, b int) bool { return errs[full[a]] > errs[full[b]] })
		c := 1 + r.IntN(m)
		got := worstFirst(errs, c)
		if len(got) != c {
			t.Fatalf("m=%d c=%d: %d indices", m, c, len(got))
		}
		for i := range got {
			if got[i] != full[i] {
				t.Fatalf("m=%d c=%d: position %d is %d, stable sort has %d", m, c, i, got[i], full[i])
			}
		}
	}
}
