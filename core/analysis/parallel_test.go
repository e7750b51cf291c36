package analysis

import (
	"fmt"
	"runtime"
	"testing"
)

// parallelRange covers every item exactly once for any size and core count;
// parallelEach returns the error of the lowest failing index (identities).
func TestParallelHelpers(t *testing.T) {
	old := runtime.GOMAXPROCS(4)
	defer runtime.GOMAXPROCS(old)
	for _, n := range []int{0, 1, parallelMin - 1, parallelMin, 3*parallelMin + 7} {
		seen := make([]int32, n)
		parallelRange(n, func(lo, hi int) {
			for i := lo; i < hi; i++ {
				seen[i]++
			}
		})
		for i, c := range seen {
			if c != 1 {
				t.Fatalf("n=%d: item %d visited %d times", n, i, c)
			}
		}
	}
	err := parallelEach(20, func(i int) error {
		if i == 7 || i == 13 {
			return fmt.Errorf("item %d", i)
		}
		return nil
	})
	if err == nil || err.Error() != "item 7" {
		t.Errorf("parallelEach error %v, want item 7 (the lowest failing index)", err)
	}
	if err := parallelEach(5, func(int) error { return nil }); err != nil {
		t.Error(err)
	}
}
