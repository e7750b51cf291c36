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

// The cube masks of links compared one cell at a time (the path for float64 maps and for maps
// with laneMax or more swept voxels) give bit-identical float32 maps and maxima to the packed
// comparison over the swept voxels (linksLanes), and both match the definition (brute force)
// on maps with ties.
func TestLinksUnpacked(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for trial, dims := range [][3]int{{7, 6, 5}, {10, 8, 9}, {1, 9, 8}, {12, 11, 10}} {
		n := dims[0] * dims[1] * dims[2]
		img := make([]float64, n)
		for v := range img {
			img[v] = float64(rng.IntN(9)-3) * 0.5
		}
		if trial == 3 {
			img = smoothNoise(dims, 1.2, 23)
		}
		img32 := to32(img)
		for v, x := range img32 {
			img[v] = float64(x) // the values the float32 map holds, for the brute force
		}
		for _, conn := range []Connectivity{Faces, Edges, Corners} {
			a := NewTFCEWorkspace(dims, conn)
			b := NewTFCEWorkspace(dims, conn)
			b.laneLimit = 0
			da, db := make([]float64, n), make([]float64, n)
			TFCETo(a, da, img32, 0.5, 2, TailSigned)
			TFCETo(b, db, img32, 0.5, 2, TailSigned)
			if !slices.Equal(da, db) {
				t.Errorf("trial %d %v: packed and one-cell masks differ by %g", trial, conn, maxAbsDiff(da, db))
			}
			for _, tail := range []Tail{TailPositive, TailNegative} {
				ma := TFCEMaxTail(a, img32, 0.5, 2, tail)
				if mb := TFCEMaxTail(b, img32, 0.5, 2, tail); ma != mb {
					t.Errorf("trial %d %v tail %d: maximum %.17g packed, %.17g one cell at a time", trial, conn, tail, ma, mb)
				}
			}
			want := bruteTFCE(img, dims, conn, 0.5, 2)
			TFCETo(b, db, img32, 0.5, 2, TailPositive)
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

// TFCEMaxSparse, given the voxels > 0 of a float32 map, returns exactly TFCEMaxTail of the map
// (same sweep), which matches the definition (brute force) on maps with ties; for the packed
// and the one-cell masks, through one reused workspace; and it rejects malformed input.
func TestTFCEMaxSparse(t *testing.T) {
	rng := rand.New(rand.NewPCG(71, 72))
	for trial, dims := range [][3]int{{7, 6, 5}, {1, 9, 8}, {9, 1, 7}, {20, 18, 14}} {
		n := dims[0] * dims[1] * dims[2]
		for _, limit := range []int{laneMax, 0} {
			ws := NewTFCEWorkspace(dims, Corners)
			ws.laneLimit = limit
			for rep := range 4 {
				img := make([]float64, n)
				switch rep {
				case 0:
					for v := range img {
						img[v] = float64(rng.IntN(9)-4) * 0.5 // ties
					}
				case 1:
					img = smoothNoise(dims, 1.2, uint64(80+trial))
				case 2:
					img = smoothNoise(dims, 1.2, uint64(90+trial))
					for v := range img {
						img[v] += 1.5 // most voxels > 0
					}
				case 3:
					for v := range img {
						img[v] = -1 // none
					}
				}
				img32 := to32(img)
				var idx []int32
				var val []float32
				for v, x := range img32 {
					if x > 0 {
						idx = append(idx, int32(v))
						val = append(val, x)
					}
				}
				want := TFCEMaxTail(ws, img32, 0.5, 2, TailPositive)
				if got := TFCEMaxSparse(ws, idx, val, 0.5, 2); got != want {
					t.Errorf("dims %v limit %d map %d: sparse maximum %.17g, map %.17g", dims, limit, rep, got, want)
				}
				if rep == 0 {
					for v, x := range img32 {
						img[v] = float64(x)
					}
					if b := slices.Max(bruteTFCE(img, dims, Corners, 0.5, 2)); math.Abs(want-b) > tolClosed {
						t.Errorf("dims %v: maximum %g, brute force %g", dims, want, b)
					}
				}
			}
		}
	}
	ws := NewTFCEWorkspace([3]int{4, 3, 2}, Corners)
	for name, c := range map[string]struct {
		idx []int32
		val []float32
	}{
		"decreasing": {[]int32{3, 2}, []float32{1, 1}},
		"repeated":   {[]int32{2, 2}, []float32{1, 1}},
		"outside":    {[]int32{1, 24}, []float32{1, 1}},
		"negative":   {[]int32{-1}, []float32{1}},
		"not > 0":    {[]int32{1, 5}, []float32{1, 0}},
		"NaN":        {[]int32{1}, []float32{float32(math.NaN())}},
		"lengths":    {[]int32{1, 2}, []float32{1}},
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: accepted", name)
				}
			}()
			TFCEMaxSparse(ws, c.idx, c.val, 0.5, 2)
		}()
	}
}
