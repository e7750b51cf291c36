package phantom_test

import (
	"fmt"

	"winnow/core/phantom"
)

func ExampleNew() {
	s := phantom.New(1)
	fmt.Println(s.Name, s.Dims, s.VoxelMM, s.Volumes, s.TR)
	fmt.Println(s.Contrast)
	for _, b := range s.Blobs {
		fmt.Printf("%-25s ijk %v  r %4.1f mm  count %.1f %%  watch %.1f %%  truth %v\n",
			b.Name, b.IJK, b.RadiusMM, b.Percent[0], b.Percent[1], b.InTruth)
	}
	// Output:
	// lantern [64 64 36] [3 3 3.5] 160 2
	// count-watch=count - watch
	// left lateral frontal      ijk [18 39 23]  r  9.0 mm  count 2.0 %  watch 0.0 %  truth true
	// left medial frontal       ijk [29 35 29]  r  7.5 mm  count 1.5 %  watch 0.0 %  truth true
	// right parietal            ijk [42 19 24]  r  9.0 mm  count 2.5 %  watch 0.0 %  truth true
	// left occipital (shared)   ijk [27 8 16]  r 10.5 mm  count 2.0 %  watch 2.0 %  truth false
	// right occipital (shared)  ijk [37 8 16]  r 10.5 mm  count 2.0 %  watch 2.0 %  truth false
}
