package cluster

import (
	"math/rand/v2"
	"slices"
	"testing"
)

func TestConnectivityParse(t *testing.T) {
	for _, c := range []Connectivity{Faces, Edges, Corners} {
		got, err := ParseConnectivity(c.String())
		if err != nil || got != c {
			t.Errorf("ParseConnectivity(%q) = %v, %v; want %v", c.String(), got, err, c)
		}
	}
	for _, s := range []string{"", "8", "27", "x"} {
		if _, err := ParseConnectivity(s); err == nil {
			t.Errorf("ParseConnectivity(%q) gave no error", s)
		}
	}
	if Connectivity(4).Valid() {
		t.Error("Connectivity(4).Valid() = true")
	}
}

// The stencil sizes 6/18/26 and the half stencils 3/9/13 follow from the definition
// (methods §l, common practice).
func TestStencilSizes(t *testing.T) {
	for _, tc := range []struct {
		c          Connectivity
		full, half int
	}{{Faces, 6, 3}, {Edges, 18, 9}, {Corners, 26, 13}} {
		if f, h := len(tc.c.offsets(false)), len(tc.c.offsets(true)); f != tc.full || h != tc.half {
			t.Errorf("%v: %d offsets, %d half; want %d, %d", tc.c, f, h, tc.full, tc.half)
		}
		for _, o := range tc.c.offsets(false) {
			if !isNeighbour(o[0], o[1], o[2], tc.c) {
				t.Errorf("%v: offset %v is not a neighbour by definition", tc.c, o)
			}
		}
	}
}

// Two voxels sharing only a corner: 1 cluster with 26, 2 with 6 and 18; sharing only an edge:
// 1 with 18 and 26, 2 with 6 (definition, methods §l; style reference table).
func TestLabelCornerEdge(t *testing.T) {
	dims := [3]int{3, 3, 3}
	idx := func(i, j, k int) int { return i + 3*(j+3*k) }
	cases := []struct {
		name string
		a, b int
		want map[Connectivity]int
	}{
		{"corner", idx(0, 0, 0), idx(1, 1, 1), map[Connectivity]int{Faces: 2, Edges: 2, Corners: 1}},
		{"edge", idx(0, 0, 0), idx(1, 1, 0), map[Connectivity]int{Faces: 2, Edges: 1, Corners: 1}},
		{"face", idx(1, 1, 1), idx(1, 1, 2), map[Connectivity]int{Faces: 1, Edges: 1, Corners: 1}},
		{"apart", idx(0, 0, 0), idx(2, 0, 0), map[Connectivity]int{Faces: 2, Edges: 2, Corners: 2}},
	}
	for _, tc := range cases {
		for conn, want := range tc.want {
			in := make([]bool, 27)
			in[tc.a], in[tc.b] = true, true
			lab, sizes := Label(in, dims, conn)
			if len(sizes) != want {
				t.Errorf("%s, %v: %d clusters, want %d", tc.name, conn, len(sizes), want)
			}
			if want == 1 && (lab[tc.a] != 1 || lab[tc.b] != 1 || sizes[0] != 2) {
				t.Errorf("%s, %v: labels %d %d sizes %v", tc.name, conn, lab[tc.a], lab[tc.b], sizes)
			}
		}
	}
}

// Label against a breadth-first flood fill written from the definition: both number
// components by their lowest linear index, so the labellings must be identical.
func TestLabelMatchesFloodFill(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 3))
	dimsList := [][3]int{{1, 1, 1}, {7, 1, 1}, {1, 9, 1}, {1, 1, 8}, {5, 4, 1}, {9, 8, 7}, {13, 3, 11}, {4, 17, 6}}
	for _, dims := range dimsList {
		n := dims[0] * dims[1] * dims[2]
		for _, p := range []float64{0.05, 0.2, 0.35, 0.5, 0.7, 0.95} {
			in := make([]bool, n)
			for v := range in {
				in[v] = rng.Float64() < p
			}
			for _, conn := range []Connectivity{Faces, Edges, Corners} {
				lab, sizes := Label(in, dims, conn)
				wl, ws := floodLabel(in, dims, conn)
				if !slices.Equal(lab, wl) || !slices.Equal(sizes, ws) {
					t.Fatalf("dims %v p %.2f %v: labelling differs from flood fill (%d vs %d clusters)",
						dims, p, conn, len(sizes), len(ws))
				}
			}
		}
	}
}

// A smooth map's suprathreshold set has long, branching components, where union order matters.
func TestLabelSmoothMatchesFloodFill(t *testing.T) {
	dims := [3]int{23, 19, 17}
	a := smoothNoise(dims, 1.5, 5)
	for _, thr := range []float64{-0.5, 0, 0.8, 1.6} {
		in := make([]bool, len(a))
		for v, x := range a {
			in[v] = x > thr
		}
		for _, conn := range []Connectivity{Faces, Edges, Corners} {
			lab, sizes := Label(in, dims, conn)
			wl, ws := floodLabel(in, dims, conn)
			if !slices.Equal(lab, wl) || !slices.Equal(sizes, ws) {
				t.Fatalf("threshold %g %v: labelling differs from flood fill", thr, conn)
			}
		}
	}
}
