package cluster

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TFCEMaxTail is the largest value of the corresponding map: of TFCE(stat) (positive), of
// TFCE(−stat) (negative) and the larger of the two (signed, the two-sided statistic, methods
// §k), on the brute-force maps with many ties (definition of TFCE, Smith & Nichols 2009) and on
// float32 smooth noise, through one reused workspace.
func TestTFCEMaxTail(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for trial, dims := range [][3]int{{6, 5, 4}, {9, 1, 7}, {8, 7, 3}, {9, 9, 9}} {
		n := dims[0] * dims[1] * dims[2]
		img := make([]float64, n)
		for v := range img {
			img[v] = float64(rng.IntN(11)-4) * 0.5 // ties
		}
		neg := make([]float64, n)
		for v := range img {
			neg[v] = -img[v]
		}
		for _, eh := range [][2]float64{{0.5, 2}, {1, 1}, {0, 0}} {
			for _, conn := range []Connectivity{Faces, Edges, Corners} {
				ws := NewTFCEWorkspace(dims, conn)
				pos := slices.Max(bruteTFCE(img, dims, conn, eh[0], eh[1]))
				ng := slices.Max(bruteTFCE(neg, dims, conn, eh[0], eh[1]))
				for _, c := range []struct {
					tail Tail
					want float64
				}{{TailPositive, pos}, {TailNegative, ng}, {TailSigned, max(pos, ng)}} {
					if got := TFCEMaxTail(ws, img, eh[0], eh[1], c.tail); math.Abs(got-c.want) > tolClosed {
						t.Errorf("trial %d E %g H %g %v tail %d: max %g, want %g", trial, eh[0], eh[1], conn, c.tail, got, c.want)
					}
				}
			}
		}
	}
	dims := [3]int{20, 18, 14}
	ws := NewTFCEWorkspace(dims, Corners)
	for trial := range 3 {
		img := to32(smoothNoise(dims, 1.2, uint64(40+trial)))
		m := slices.Max(TFCE(img, dims, Corners, 0.5, 2))
		if got := TFCEMaxTail(ws, img, 0.5, 2, TailPositive); got != m {
			t.Errorf("smooth trial %d: TFCEMaxTail = %.17g, map maximum %.17g", trial, got, m)
		}
	}
}

// The cube masks of links compared one cell at a time (the path for maps with laneMax or more
// swept voxels) give bit-identical maps to the packed comparison, and both match the
// definition (brute force) on maps with ties.
func TestLinksUnpacked(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for trial, dims := range [][3]int{{7, 6, 5}, {10, 8, 9}, {1, 9, 8}} {
		n := dims[0] * dims[1] * dims[2]
		img := make([]float64, n)
		for v := range img {
			img[v] = float64(rng.IntN(9)-3) * 0.5
		}
		for _, conn := range []Connectivity{Faces, Edges, Corners} {
			a := NewTFCEWorkspace(dims, conn)
			b := NewTFCEWorkspace(dims, conn)
			b.laneLimit = 0
			da, db := make([]float64, n), make([]float64, n)
			TFCETo(a, da, img, 0.5, 2, TailSigned)
			TFCETo(b, db, img, 0.5, 2, TailSigned)
			if !slices.Equal(da, db) {
				t.Errorf("trial %d %v: packed and one-cell masks differ by %g", trial, conn, maxAbsDiff(da, db))
			}
			want := bruteTFCE(img, dims, conn, 0.5, 2)
			TFCETo(b, db, img, 0.5, 2, TailPositive)
			if d := maxAbsDiff(db, want); d > tolClosed {
				t.Errorf("trial %d %v: one-cell masks differ from brute force by %g", trial, conn, d)
			}
		}
	}
}

// A float32 map with more voxels > 0 than the workspace holds (the gather overflows and
// retries) gives the same map as a fresh workspace.
func TestGatherOverflow(t *testing.T) {
	dims := [3]int{16, 12, 10}
	ws := NewTFCEWorkspace(dims, Corners)
	base := smoothNoise(dims, 1, 77)
	for _, shift := range []float64{-1.5, 0, 1.5, -1} { // few, half, most, few voxels > 0
		img := make([]float64, len(base))
		for v := range img {
			img[v] = base[v] + shift
		}
		img32 := to32(img)
		got := make([]float64, len(img))
		TFCETo(ws, got, img32, 0.5, 2, TailPositive)
		if want := TFCE(img32, dims, Corners, 0.5, 2); !slices.Equal(got, want) {
			t.Errorf("shift %g: reused workspace differs by %g", shift, maxAbsDiff(got, want))
		}
		if m := TFCEMaxTail(ws, img32, 0.5, 2, TailPositive); m != slices.Max(got) {
			t.Errorf("shift %g: TFCEMaxTail %g, map maximum %g", shift, m, slices.Max(got))
		}
	}
}
