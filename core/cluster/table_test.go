package cluster

import (
	"math"
	"reflect"
	"testing"
)

// tableCase is a 12×7×3 map with five 26-connected clusters whose table was worked out by hand
// from the rules of methods §l (order: size, then peak value, then peak index; peak plateau →
// lowest index; local maxima ≥ in-cluster neighbours, kept ≥ 8 mm apart, at most 3).
//
// Affine: x = 2i − 10, y = 2j − 4, z = 3k + 6; linear index i + 12·(j + 7·k).
//
//	E: (11,0,0) = 9                                     index 11      size 1
//	A: j=1, k=1, i=0..8 = 1 5 4 3.5 4.5 2 2.5 1.5 3     index 96+i    size 9
//	B: j=3, k=1, i=2..10 = 2 2 2 6 6 2 2 2 2            index 120+i   size 9
//	C: j=5, k=1, i=0..3 = 2 4 7 1                       index 144+i   size 4
//	D: j=5, k=1, i=6..9 = 1 7 3 2                       index 144+i   size 4
func tableCase() (stat []float32, in []bool, dims [3]int, affine [4][4]float64) {
	dims = [3]int{12, 7, 3}
	n := 12 * 7 * 3
	stat = make([]float32, n)
	in = make([]bool, n)
	set := func(i, j, k int, vals ...float32) {
		for d, x := range vals {
			v := i + d + 12*(j+7*k)
			stat[v], in[v] = x, true
		}
	}
	set(11, 0, 0, 9)
	set(0, 1, 1, 1, 5, 4, 3.5, 4.5, 2, 2.5, 1.5, 3)
	set(2, 3, 1, 2, 2, 2, 6, 6, 2, 2, 2, 2)
	set(0, 5, 1, 2, 4, 7, 1)
	set(6, 5, 1, 1, 7, 3, 2)
	// Sub-threshold values outside the mask must not matter.
	stat[0] = 100
	stat[12*7*3-1] = -100
	affine = [4][4]float64{{2, 0, 0, -10}, {0, 2, 0, -4}, {0, 0, 3, 6}, {0, 0, 0, 1}}
	return
}

func TestTableHandWorked(t *testing.T) {
	stat, in, dims, affine := tableCase()
	got := Clusters(stat, in, dims, Corners, affine, TableOptions{})
	mx := func(idx, i, j, k int, val float64) Maximum {
		return Maximum{Index: idx, IJK: [3]int{i, j, k}, MM: [3]float64{float64(2*i - 10), float64(2*j - 4), float64(3*k + 6)}, Value: val}
	}
	cl := func(label int32, voxels int, m ...Maximum) Cluster {
		return Cluster{Label: label, Voxels: voxels, Peak: m[0].Index, PeakIJK: m[0].IJK, PeakMM: m[0].MM, PeakValue: m[0].Value, Maxima: m}
	}
	want := []Cluster{
		// B: size 9, peak 6 (plateau at i=5,6 → i=5). Maxima ≥ neighbours: 5,6 (6) and the
		// 2-plateau voxels 2,3,8,9,10. From i=5: i=6 2 mm, i=2 6 mm, i=3 4 mm, i=8 6 mm (drop);
		// i=9 8 mm (keep, boundary ≥ 8); i=10 2 mm from i=9 (drop).
		cl(3, 9, mx(125, 5, 3, 1, 6), mx(129, 9, 3, 1, 2)),
		// A: size 9, peak 5 at i=1. Maxima 1 (5), 4 (4.5), 8 (3), 6 (2.5); i=4 is 6 mm from
		// i=1 (drop), i=8 14 mm (keep), i=6 4 mm from i=8 (drop).
		cl(2, 9, mx(97, 1, 1, 1, 5), mx(104, 8, 1, 1, 3)),
		// C and D: size 4, peak 7 each; C's peak index 146 < D's 151.
		cl(4, 4, mx(146, 2, 5, 1, 7)),
		cl(5, 4, mx(151, 7, 5, 1, 7)),
		// E: size 1.
		cl(1, 1, mx(11, 11, 0, 0, 9)),
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("table:\n got %+v\nwant %+v", got, want)
	}

	// Separation 5 mm: A keeps 1, 4 (6 mm), 8 (8 mm from 4), then the cap of 3 stops.
	got5 := Clusters(stat, in, dims, Corners, affine, TableOptions{MinSeparationMM: 5})
	if w := []Maximum{mx(97, 1, 1, 1, 5), mx(100, 4, 1, 1, 4.5), mx(104, 8, 1, 1, 3)}; !reflect.DeepEqual(got5[1].Maxima, w) {
		t.Errorf("A at 5 mm: %+v, want %+v", got5[1].Maxima, w)
	}
	// MaxMaxima 1: the peak only.
	got1 := Clusters(stat, in, dims, Corners, affine, TableOptions{MaxMaxima: 1})
	for _, c := range got1 {
		if len(c.Maxima) != 1 || c.Maxima[0].Index != c.Peak {
			t.Errorf("MaxMaxima 1: cluster %d maxima %+v", c.Label, c.Maxima)
		}
	}
	// No separation, no cap: every local maximum of A, in decreasing value.
	gotAll := Clusters(stat, in, dims, Corners, affine, TableOptions{MinSeparationMM: -1, MaxMaxima: -1})
	var idx []int
	for _, m := range gotAll[1].Maxima {
		idx = append(idx, m.Index)
	}
	if w := []int{97, 100, 104, 102}; !reflect.DeepEqual(idx, w) {
		t.Errorf("A, all maxima: %v, want %v", idx, w)
	}
}

// Neighbours outside the cluster count as −∞ (methods §l): two voxels sharing a corner, 3 and
// 5, are two clusters under 6-connectivity, each its own maximum; under 26 they are one cluster
// whose only maximum is the 5.
func TestTableOutsideNeighbours(t *testing.T) {
	dims := [3]int{2, 2, 2}
	stat := []float32{3, 0, 0, 0, 0, 0, 0, 5}
	in := []bool{true, false, false, false, false, false, false, true}
	id := [4][4]float64{{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}, {0, 0, 0, 1}}
	six := Clusters(stat, in, dims, Faces, id, TableOptions{MinSeparationMM: -1})
	if len(six) != 2 || six[0].Peak != 7 || six[1].Peak != 0 || len(six[1].Maxima) != 1 {
		t.Errorf("6-connectivity: %+v", six)
	}
	all := Clusters(stat, in, dims, Corners, id, TableOptions{MinSeparationMM: -1})
	if len(all) != 1 || all[0].Voxels != 2 || len(all[0].Maxima) != 1 || all[0].Maxima[0].Index != 7 {
		t.Errorf("26-connectivity: %+v", all)
	}
	// A NaN inside a cluster ranks below every number and is never the peak.
	stat64 := []float64{math.NaN(), 0, 0, 0, 0, 0, 0, -2}
	nan := Clusters(stat64, in, dims, Corners, id, TableOptions{})
	if len(nan) != 1 || nan[0].Peak != 7 || nan[0].PeakValue != -2 {
		t.Errorf("NaN voxel: %+v", nan)
	}
	if Clusters(stat, make([]bool, 8), dims, Corners, id, TableOptions{}) != nil {
		t.Error("empty mask gave clusters")
	}
}

// Volume is voxels × |det| of the 3×3 part (change of variables; common practice).
func TestVolume(t *testing.T) {
	a := [4][4]float64{{-3, 0, 0, 90}, {0, 3, 0, -126}, {0, 0, 3.5, -72}, {0, 0, 0, 1}}
	if got := VolumeMM3(10, a); got != 315 {
		t.Errorf("VolumeMM3 = %g, want 315", got)
	}
	// A rotation about z by 30° keeps the volume: 2·2·2 = 8 per voxel.
	c, s := math.Cos(math.Pi/6), math.Sin(math.Pi/6)
	r := [4][4]float64{{2 * c, -2 * s, 0, 0}, {2 * s, 2 * c, 0, 0}, {0, 0, 2, 0}, {0, 0, 0, 1}}
	if got := VoxelVolumeMM3(r); math.Abs(got-8) > 1e-12 {
		t.Errorf("rotated VoxelVolumeMM3 = %g, want 8", got)
	}
	// A shear does not change the determinant.
	sh := [4][4]float64{{1, 0.5, 0.25, 0}, {0, 2, 0.75, 0}, {0, 0, 3, 0}, {0, 0, 0, 1}}
	if got := VoxelVolumeMM3(sh); math.Abs(got-6) > 1e-12 {
		t.Errorf("sheared VoxelVolumeMM3 = %g, want 6", got)
	}
}
