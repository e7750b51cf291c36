package cluster

import (
	"fmt"
	"math"
)

// TFCEStepped returns the discretised TFCE of the positive part of stat:
//
//	Σ_{k=1}^{K} e(v, k·dh)^E · (k·dh)^H · dh  over k·dh ≤ stat(v),  K = ⌊max/dh + 1e−9⌋
//
// labelling {stat ≥ k·dh} afresh at every level. It is biased by O(dh) against the exact
// [TFCE] and is kept for checks and benchmarks.
func TFCEStepped[T Float](stat []T, dims [3]int, conn Connectivity, E, H, dh float64) []float64 {
	n := gridSize(dims)
	if len(stat) != n {
		panic(fmt.Sprintf("cluster: stat has %d voxels, dims %v hold %d", len(stat), dims, n))
	}
	if err := CheckTFCEParams(E, H); err != nil {
		panic(err.Error())
	}
	if !(dh > 0) || math.IsInf(dh, 1) {
		panic(fmt.Sprintf("cluster: TFCE step dh = %g, want a finite number > 0", dh))
	}
	top := 0.0
	for _, x := range stat {
		if h := float64(x); h > top && !math.IsInf(h, 1) {
			top = h
		}
	}
	levels := int(math.Floor(top/dh + 1e-9))
	out := make([]float64, n)
	in := make([]bool, n)
	lab := make([]int32, n)
	var sizes []int
	var factor []float64
	for k := 1; k <= levels; k++ {
		h := float64(k) * dh
		some := false
		for v, x := range stat {
			in[v] = float64(x) >= h
			some = some || in[v]
		}
		if !some {
			continue
		}
		sizes = labelInto(lab, in, dims, conn, sizes)
		c := math.Pow(h, H) * dh
		factor = factor[:0]
		for _, s := range sizes {
			factor = append(factor, math.Pow(float64(s), E)*c)
		}
		for v, l := range lab {
			if l != 0 {
				out[v] += factor[l-1]
			}
		}
	}
	return out
}
