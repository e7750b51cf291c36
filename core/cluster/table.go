package cluster

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// Float is the element type of a statistic map.
type Float interface{ ~float32 | ~float64 }

// TableOptions sets how local maxima are reported. The zero value is the default.
type TableOptions struct {
	MinSeparationMM float64 // world distance between reported maxima; 0: 8 mm; negative: none
	MaxMaxima       int     // maxima per cluster, the peak included; 0: 3; negative: all
}

// Maximum is one local maximum of a cluster.
type Maximum struct {
	Index int        // linear index i + nx*(j + ny*k)
	IJK   [3]int     // 0-based voxel indices
	MM    [3]float64 // world coordinates, mm
	Value float64    // statistic value
}

// Cluster is one row of a cluster table.
type Cluster struct {
	Label     int32      // this cluster's label in the labelling the table was built from
	Voxels    int        // extent in voxels
	Peak      int        // linear index of the maximum voxel (lowest index on a plateau)
	PeakIJK   [3]int     // 0-based voxel indices of the peak
	PeakMM    [3]float64 // world coordinates of the peak, mm
	PeakValue float64    // statistic at the peak
	Maxima    []Maximum  // local maxima, the peak first, decreasing, spaced by MinSeparationMM
}

// Clusters labels in under conn and returns the cluster table of stat over it: see [Table].
func Clusters[T Float](stat []T, in []bool, dims [3]int, conn Connectivity, affine [4][4]float64, opt TableOptions) []Cluster {
	labels, sizes := Label(in, dims, conn)
	return Table(stat, labels, sizes, dims, affine, opt)
}

// Table builds the cluster table of stat over a labelling from [Label]. Clusters come largest
// first, then by peak value (descending), then by the lowest linear index of the peak. The peak
// is the maximum voxel; a plateau resolves to the lowest linear index. Local maxima are voxels
// whose value is ≥ that of every one of their 26 neighbours in the same cluster (neighbours
// outside it count as −∞); sorted in decreasing value (ties by index), a maximum is kept when
// its world distance to every kept one of the cluster is at least opt.MinSeparationMM, up to
// opt.MaxMaxima (common practice, no source). The peak is always the first maximum. NaN values
// inside a cluster rank below every number.
func Table[T Float](stat []T, labels []int32, sizes []int, dims [3]int, affine [4][4]float64, opt TableOptions) []Cluster {
	n := gridSize(dims)
	if len(stat) != n || len(labels) != n {
		panic(fmt.Sprintf("cluster: stat has %d voxels, labels %d, dims %v hold %d", len(stat), len(labels), dims, n))
	}
	minSep := opt.MinSeparationMM
	if minSep == 0 {
		minSep = 8
	}
	maxMax := opt.MaxMaxima
	if maxMax == 0 {
		maxMax = 3
	}
	nl := len(sizes)
	if nl == 0 {
		return nil
	}

	// Peaks: one pass in index order, strict > keeps the lowest index of a plateau.
	peak := make([]int, nl)
	peakVal := make([]float64, nl)
	for l := range peak {
		peak[l] = -1
	}
	for v, l := range labels {
		if l == 0 {
			continue
		}
		if int(l) > nl || l < 0 {
			panic(fmt.Sprintf("cluster: label %d at voxel %d, sizes has %d labels", l, v, nl))
		}
		x := rank(stat[v])
		if peak[l-1] < 0 || x > peakVal[l-1] {
			peak[l-1], peakVal[l-1] = v, x
		}
	}

	cands := localMaxima(stat, labels, dims)
	slices.SortFunc(cands, func(a, b candidate) int {
		if c := cmp.Compare(a.label, b.label); c != 0 {
			return c
		}
		if c := cmp.Compare(b.value, a.value); c != 0 {
			return c
		}
		return cmp.Compare(a.index, b.index)
	})

	order := make([]int32, nl)
	for l := range order {
		order[l] = int32(l)
	}
	slices.SortFunc(order, func(a, b int32) int {
		if c := cmp.Compare(sizes[b], sizes[a]); c != 0 {
			return c
		}
		if c := cmp.Compare(peakVal[b], peakVal[a]); c != 0 {
			return c
		}
		return cmp.Compare(peak[a], peak[b])
	})

	// Start of each label's run of candidates.
	start := make([]int, nl+1)
	for _, c := range cands {
		start[c.label+1]++
	}
	for l := 1; l <= nl; l++ {
		start[l] += start[l-1]
	}

	out := make([]Cluster, nl)
	for r, l := range order {
		p := peak[l]
		ijk := unravel(p, dims)
		c := Cluster{
			Label:     l + 1,
			Voxels:    sizes[l],
			Peak:      p,
			PeakIJK:   ijk,
			PeakMM:    voxelToMM(affine, ijk),
			PeakValue: float64(stat[p]),
		}
		for _, m := range cands[start[l]:start[l+1]] {
			if maxMax > 0 && len(c.Maxima) >= maxMax {
				break
			}
			mi := unravel(m.index, dims)
			mm := voxelToMM(affine, mi)
			keep := true
			for _, k := range c.Maxima {
				if dist(mm, k.MM) < minSep {
					keep = false
					break
				}
			}
			if keep {
				c.Maxima = append(c.Maxima, Maximum{Index: m.index, IJK: mi, MM: mm, Value: float64(stat[m.index])})
			}
		}
		out[r] = c
	}
	return out
}

type candidate struct {
	label int32
	index int
	value float64
}

// rank is the value used for ordering: NaN sorts below every number.
func rank[T Float](x T) float64 {
	if x != x {
		return math.Inf(-1)
	}
	return float64(x)
}

// localMaxima returns the voxels of every cluster that are ≥ all their 26 neighbours in the
// same cluster. Each row is one loop; a voxel stops at its first larger neighbour.
func localMaxima[T Float](stat []T, labels []int32, dims [3]int) []candidate {
	nx, ny, nz := dims[0], dims[1], dims[2]
	var cands []candidate
	var rows [9]int
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			base := nx * (j + ny*k)
			m := 0
			for dk := -1; dk <= 1; dk++ {
				for dj := -1; dj <= 1; dj++ {
					if j+dj >= 0 && j+dj < ny && k+dk >= 0 && k+dk < nz {
						rows[m] = nx * (dj + ny*dk)
						m++
					}
				}
			}
			for i := 0; i < nx; i++ {
				v := base + i
				l := labels[v]
				if l == 0 {
					continue
				}
				x := rank(stat[v])
				ok := true
			scan:
				for _, ro := range rows[:m] {
					o := v + ro
					lo, hi := o-1, o+1
					if i == 0 {
						lo = o
					}
					if i == nx-1 {
						hi = o
					}
					for u := lo; u <= hi; u++ {
						if labels[u] == l && rank(stat[u]) > x {
							ok = false
							break scan
						}
					}
				}
				if ok {
					cands = append(cands, candidate{label: l - 1, index: v, value: x})
				}
			}
		}
	}
	return cands
}

func unravel(v int, dims [3]int) [3]int {
	return [3]int{v % dims[0], (v / dims[0]) % dims[1], v / (dims[0] * dims[1])}
}

// voxelToMM maps 0-based (i, j, k) to world mm: [x y z 1]' = A·[i j k 1]'.
func voxelToMM(a [4][4]float64, ijk [3]int) [3]float64 {
	var mm [3]float64
	for r := range 3 {
		mm[r] = a[r][0]*float64(ijk[0]) + a[r][1]*float64(ijk[1]) + a[r][2]*float64(ijk[2]) + a[r][3]
	}
	return mm
}

func dist(a, b [3]float64) float64 {
	dx, dy, dz := a[0]-b[0], a[1]-b[1], a[2]-b[2]
	return math.Sqrt(dx*dx + dy*dy + dz*dz)
}

// VoxelVolumeMM3 is the volume of one voxel in mm³: |det| of the affine's 3×3 part.
func VoxelVolumeMM3(affine [4][4]float64) float64 {
	a := affine
	det := a[0][0]*(a[1][1]*a[2][2]-a[1][2]*a[2][1]) -
		a[0][1]*(a[1][0]*a[2][2]-a[1][2]*a[2][0]) +
		a[0][2]*(a[1][0]*a[2][1]-a[1][1]*a[2][0])
	return math.Abs(det)
}

// VolumeMM3 is the volume in mm³ of voxels voxels: voxels × [VoxelVolumeMM3].
func VolumeMM3(voxels int, affine [4][4]float64) float64 {
	return float64(voxels) * VoxelVolumeMM3(affine)
}
