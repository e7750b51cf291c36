package analysis

import (
	"fmt"
	"runtime"
	"testing"

	"winnow/core/glm"
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

// The read-ahead keeps a fold's worth of volumes ready (a smaller pool made
// the reader and the accumulator wait for each other in turn), within its
// byte cap, and never fewer than 3 buffers.
func TestReadAheadPool(t *testing.T) {
	for _, c := range []struct{ volumeBytes, min, max int }{
		{96 * 96 * 60 * 2, glm.FoldVolumes + 1, readAheadBytes / (96 * 96 * 60 * 2)},
		{64 * 64 * 36 * 4, glm.FoldVolumes + 1, glm.FoldVolumes + 3},
		{256 * 256 * 256 * 4, 3, 3},
		{0, glm.FoldVolumes + 1, glm.FoldVolumes + 3},
	} {
		got := readAheadPool(c.volumeBytes)
		if got < c.min || got > c.max {
			t.Errorf("readAheadPool(%d) = %d, want %d to %d", c.volumeBytes, got, c.min, c.max)
		}
	}
}
