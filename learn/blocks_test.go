package learn

import (
	"sync/atomic"
	"testing"
)

// Every block runs once whatever the worker count, each worker with its
// own scratch, and the scratches made come back.
func TestBlocks(t *testing.T) {
	for _, workers := range []int{0, 1, 2, 7, 50} {
		for _, nb := range []int{0, 1, 5, 33} {
			runs := make([]int32, nb)
			var made atomic.Int32
			got := Blocks(nb, workers, func() *int { made.Add(1); return new(int) }, func(b int, s *int) {
				*s++
				atomic.AddInt32(&runs[b], 1)
			})
			total := 0
			for _, s := range got {
				total += *s
			}
			for b, r := range runs {
				if r != 1 {
					t.Errorf("workers %d, %d blocks: block %d ran %d times", workers, nb, b, r)
				}
			}
			if total != nb || int(made.Load()) != len(got) || len(got) < 1 {
				t.Errorf("workers %d, %d blocks: %d runs over %d scratches (%d made)", workers, nb, total, len(got), made.Load())
			}
		}
	}
}
