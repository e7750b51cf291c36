package analysis

import (
	"runtime"
	"sync"
)

// parallelMin is the number of items below which parallelRange stays on one
// goroutine.
const parallelMin = 1 << 14

// parallelRange runs body over 0..n−1 split into contiguous ranges, one per
// goroutine (up to GOMAXPROCS). Callers write each item's result in its own
// slot, so the output is the same for any split.
func parallelRange(n int, body func(lo, hi int)) {
	k := min(runtime.GOMAXPROCS(0), max(1, n/parallelMin))
	if k <= 1 {
		body(0, n)
		return
	}
	var wg sync.WaitGroup
	for w := range k {
		lo, hi := n*w/k, n*(w+1)/k
		wg.Go(func() { body(lo, hi) })
	}
	wg.Wait()
}

// parallelEach runs f(i) for i in 0..n−1 on up to GOMAXPROCS goroutines and
// returns the error of the lowest i that failed.
func parallelEach(n int, f func(i int) error) error {
	errs := make([]error, n)
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	var wg sync.WaitGroup
	for i := range n {
		sem <- struct{}{}
		wg.Go(func() {
			defer func() { <-sem }()
			errs[i] = f(i)
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}
