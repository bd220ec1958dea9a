package learn

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// Blocks runs fn(b, s) for every block b in [0, nb) on up to workers
// goroutines (all cores when workers ≤ 0), each taking the next block in
// turn with its own scratch s from scratch (nil: the zero S). Work is cut
// into blocks that do not depend on the worker count, and fn writes each
// block's results to that block's place, so the count changes time, not
// bytes. The scratches made are returned, for a pool to take back.
func Blocks[S any](nb, workers int, scratch func() S, fn func(b int, s S)) []S {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = max(1, min(workers, nb))
	made := make([]S, workers)
	var next int64 = -1
	var wg sync.WaitGroup
	for w := range made {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var s S
			if scratch != nil {
				s = scratch()
			}
			made[w] = s
			for {
				b := int(atomic.AddInt64(&next, 1))
				if b >= nb {
					return
				}
				fn(b, s)
			}
		}()
	}
	wg.Wait()
	return made
}
