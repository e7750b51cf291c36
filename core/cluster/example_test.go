package cluster_test

import (
	"fmt"

	"winnow/core/cluster"
)

// Two voxels that share only a corner are one cluster under 26-connectivity and two under 6.
func ExampleLabel() {
	dims := [3]int{2, 2, 2}
	in := []bool{true, false, false, false, false, false, false, true} // (0,0,0) and (1,1,1)
	_, corners := cluster.Label(in, dims, cluster.Corners)
	_, faces := cluster.Label(in, dims, cluster.Faces)
	fmt.Println(len(corners), len(faces))
	// Output: 1 2
}
