package cluster

import (
	"fmt"
	"strconv"
	"strings"
)

// Connectivity is the neighbourhood used to join voxels into clusters. Its value is the number
// of neighbours of an interior voxel.
type Connectivity int

const (
	Faces   Connectivity = 6  // share a face: |Δ|₁ = 1
	Edges   Connectivity = 18 // share a face or an edge: |Δ|₁ ≤ 2, |Δ|∞ = 1
	Corners Connectivity = 26 // share a face, an edge or a corner: |Δ|∞ = 1
)

// String returns "6", "18" or "26", the spelling [ParseConnectivity] accepts.
func (c Connectivity) String() string {
	switch c {
	case Faces, Edges, Corners:
		return strconv.Itoa(int(c))
	}
	return fmt.Sprintf("Connectivity(%d)", int(c))
}

// Valid reports whether c is one of Faces, Edges or Corners.
func (c Connectivity) Valid() bool { return c == Faces || c == Edges || c == Corners }

// ParseConnectivity reads "6", "18" or "26" (also "faces", "edges", "corners").
func ParseConnectivity(s string) (Connectivity, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "6", "faces":
		return Faces, nil
	case "18", "edges":
		return Edges, nil
	case "26", "corners":
		return Corners, nil
	}
	return 0, fmt.Errorf("cluster: connectivity %q, want 6, 18 or 26", s)
}

// offsets returns the neighbour displacements (di, dj, dk) of c, in lexicographic order of
// (dk, dj, di). With half set, only those preceding the centre in linear index order.
func (c Connectivity) offsets(half bool) [][3]int {
	if !c.Valid() {
		panic(fmt.Sprintf("cluster: connectivity %d, want 6, 18 or 26", int(c)))
	}
	var out [][3]int
	for dk := -1; dk <= 1; dk++ {
		for dj := -1; dj <= 1; dj++ {
			for di := -1; di <= 1; di++ {
				l1 := abs(di) + abs(dj) + abs(dk)
				if l1 == 0 || (c == Faces && l1 > 1) || (c == Edges && l1 > 2) {
					continue
				}
				if half && (dk > 0 || (dk == 0 && (dj > 0 || (dj == 0 && di > 0)))) {
					continue
				}
				out = append(out, [3]int{di, dj, dk})
			}
		}
	}
	return out
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// gridSize checks dims and returns nx*ny*nz. Dims come from a validated header, so a bad value
// is a caller bug.
func gridSize(dims [3]int) int {
	n := 1
	for a, d := range dims {
		if d < 1 {
			panic(fmt.Sprintf("cluster: dims[%d] = %d, want >= 1", a, d))
		}
		if n > maxVoxels/d {
			panic(fmt.Sprintf("cluster: dims %v hold more than %d voxels", dims, maxVoxels))
		}
		n *= d
	}
	return n
}

// maxVoxels keeps linear indices (and padded ones) inside int32.
const maxVoxels = 1 << 30
