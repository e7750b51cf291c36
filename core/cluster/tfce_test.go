package cluster

import (
	"cmp"
	"encoding/json"
	"math"
	"math/bits"
	"math/rand/v2"
	"os"
	"slices"
	"sort"
	"testing"
)

type tfceFixture struct {
	Shape []int         `json:"shape"`
	Image [][][]float64 `json:"image"`
	E, H  float64
	Exact map[string]struct {
		Pos [][][]float64 `json:"tfce_positive"`
		Neg [][][]float64 `json:"tfce_negative_part"`
	} `json:"exact"`
	Stepped struct {
		Pos [][][]float64 `json:"tfce_positive"`
	} `json:"discretised_conn26_dh_0_1"`
}

// loadTFCE reads testdata/cluster/tfce.json (scipy.ndimage.label brute force, see its README)
// and flattens [i][j][k] into the linear index i + nx·(j + ny·k).
func loadTFCE(t *testing.T) (f tfceFixture, dims [3]int, flat func([][][]float64) []float64) {
	t.Helper()
	b, err := os.ReadFile("../../testdata/cluster/tfce.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	dims = [3]int{f.Shape[0], f.Shape[1], f.Shape[2]}
	flat = func(a [][][]float64) []float64 {
		out := make([]float64, dims[0]*dims[1]*dims[2])
		for i := range dims[0] {
			for j := range dims[1] {
				for k := range dims[2] {
					out[i+dims[0]*(j+dims[1]*k)] = a[i][j][k]
				}
			}
		}
		return out
	}
	return f, dims, flat
}

func maxAbsDiff(a, b []float64) float64 {
	m := 0.0
	for i := range a {
		m = max(m, math.Abs(a[i]-b[i]))
	}
	return m
}

func maxRelDiff(a, b []float64) float64 {
	m := 0.0
	for i := range a {
		m = max(m, math.Abs(a[i]-b[i])/max(math.Abs(b[i]), 1e-300))
	}
	return m
}

// Exact TFCE against the reference fixture (scipy.ndimage.label at every distinct level +
// exact piecewise integral, tfce.json; tolerance 1e-10 absolute per the reference README).
func TestTFCEFixture(t *testing.T) {
	f, dims, flat := loadTFCE(t)
	img := flat(f.Image)
	neg := make([]float64, len(img))
	for v, x := range img {
		neg[v] = -x
	}
	for _, conn := range []Connectivity{Faces, Edges, Corners} {
		ref := f.Exact["conn"+conn.String()]
		wantPos, wantNeg := flat(ref.Pos), flat(ref.Neg)
		if len(ref.Pos) == 0 {
			t.Fatalf("fixture has no conn%v", conn)
		}
		if d := maxAbsDiff(TFCE(img, dims, conn, f.E, f.H), wantPos); d > tolReference {
			t.Errorf("%v positive: max diff %g", conn, d)
		}
		if d := maxAbsDiff(TFCE(neg, dims, conn, f.E, f.H), wantNeg); d > tolReference {
			t.Errorf("%v TFCE(−image): max diff %g", conn, d)
		}
		ws := NewTFCEWorkspace(dims, conn)
		got := make([]float64, len(img))
		TFCETo(ws, got, img, f.E, f.H, TailNegative)
		if d := maxAbsDiff(got, wantNeg); d > tolReference {
			t.Errorf("%v TailNegative: max diff %g", conn, d)
		}
		signed := make([]float64, len(img))
		for v := range signed {
			signed[v] = wantPos[v] - wantNeg[v]
		}
		if d := maxAbsDiff(TFCESigned(img, dims, conn, f.E, f.H), signed); d > tolReference {
			t.Errorf("%v signed: max diff %g", conn, d)
		}
		pos, ng := TFCEMax(ws, img, f.E, f.H)
		if math.Abs(pos-slices.Max(wantPos)) > tolReference || math.Abs(ng-slices.Max(wantNeg)) > tolReference {
			t.Errorf("%v TFCEMax = %g, %g; want %g, %g", conn, pos, ng, slices.Max(wantPos), slices.Max(wantNeg))
		}
		// float32 voxels: the only change is the rounding of the image to float32.
		if d := maxRelDiff(TFCE(to32(img), dims, conn, f.E, f.H), wantPos); d > tolFloat32 {
			t.Errorf("%v float32 input: max relative diff %g", conn, d)
		}
	}
}

// The discretised form against the fixture's dh = 0.1 column (same source and tolerance).
func TestTFCESteppedFixture(t *testing.T) {
	f, dims, flat := loadTFCE(t)
	img := flat(f.Image)
	got := TFCEStepped(img, dims, Corners, f.E, f.H, 0.1)
	if d := maxAbsDiff(got, flat(f.Stepped.Pos)); d > tolReference {
		t.Errorf("dh = 0.1: max diff %g", d)
	}
}

// bruteTFCE evaluates the definition (Smith & Nichols 2009) on a map with few distinct
// values: extent is constant between consecutive distinct levels, taken from the flood fill.
func bruteTFCE(img []float64, dims [3]int, conn Connectivity, E, H float64) []float64 {
	levels := []float64{0}
	for _, x := range img {
		if x > 0 {
			levels = append(levels, x)
		}
	}
	sort.Float64s(levels)
	levels = slices.Compact(levels)
	out := make([]float64, len(img))
	in := make([]bool, len(img))
	for q := 1; q < len(levels); q++ {
		lo, hi := levels[q-1], levels[q]
		for v, x := range img {
			in[v] = x >= hi
		}
		lab, sizes := floodLabel(in, dims, conn)
		for v, l := range lab {
			if l != 0 {
				out[v] += math.Pow(float64(sizes[l-1]), E) * (math.Pow(hi, H+1) - math.Pow(lo, H+1)) / (H + 1)
			}
		}
	}
	return out
}

// Exact TFCE against the definition on random maps with many ties, several E and H, edge-on
// grids; and TFCE(stat) − TFCE(−stat) for the signed map.
func TestTFCEBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	for trial, dims := range [][3]int{{6, 5, 4}, {9, 1, 7}, {1, 1, 12}, {5, 6, 5}, {8, 7, 3}, {9, 9, 9}, {10, 8, 9}, {7, 11, 10}} {
		n := dims[0] * dims[1] * dims[2]
		img := make([]float64, n)
		for v := range img {
			img[v] = float64(rng.IntN(11)-4) * 0.5 // values −2 … 3 in steps of 0.5: many ties
			if trial%2 == 1 && rng.IntN(4) != 0 {
				img[v] = 0 // sparse: many small components that merge at one voxel
			}
		}
		neg := make([]float64, n)
		for v := range img {
			neg[v] = -img[v]
		}
		for _, eh := range [][2]float64{{0.5, 2}, {1, 1}, {2 / 3.0, 1.5}, {0, 0}} {
			for _, conn := range []Connectivity{Faces, Edges, Corners} {
				want := bruteTFCE(img, dims, conn, eh[0], eh[1])
				if d := maxAbsDiff(TFCE(img, dims, conn, eh[0], eh[1]), want); d > tolClosed {
					t.Errorf("trial %d E %g H %g %v: max diff %g", trial, eh[0], eh[1], conn, d)
				}
				wn := bruteTFCE(neg, dims, conn, eh[0], eh[1])
				s := TFCESigned(img, dims, conn, eh[0], eh[1])
				for v := range s {
					if math.Abs(s[v]-(want[v]-wn[v])) > tolClosed {
						t.Fatalf("trial %d E %g H %g %v: signed voxel %d = %g, want %g", trial, eh[0], eh[1], conn, v, s[v], want[v]-wn[v])
					}
				}
			}
		}
	}
}

// Exact TFCE is the dh → 0 limit of the discretised definition: on smooth random maps the two
// agree within 0.5 % of the maximum at dh = 0.001, and the gap shrinks like O(dh) (methods §k).
func TestTFCEExactIsSteppedLimit(t *testing.T) {
	for _, tc := range []struct {
		dims [3]int
		seed uint64
		conn Connectivity
	}{{[3]int{20, 20, 20}, 1, Corners}, {[3]int{16, 14, 12}, 2, Faces}} {
		dims := tc.dims
		img := to32(smoothNoise(dims, 1.5, tc.seed))
		for v := range img {
			img[v] *= 1.5
		}
		exact := TFCE(img, dims, tc.conn, 0.5, 2)
		top := slices.Max(exact)
		fine := TFCEStepped(img, dims, tc.conn, 0.5, 2, 0.001)
		coarse := TFCEStepped(img, dims, tc.conn, 0.5, 2, 0.01)
		dFine, dCoarse := maxAbsDiff(fine, exact), maxAbsDiff(coarse, exact)
		if dFine > 0.005*top {
			t.Errorf("seed %d %v: dh 0.001 differs by %g, %.3g%% of max %g", tc.seed, tc.conn, dFine, 100*dFine/top, top)
		}
		// Per voxel, for values ≥ 1 (the missing partial step alone is ≤ (H+1)·dh/h = 0.3 %).
		worst := 0.0
		for v, x := range img {
			if x >= 1 {
				worst = max(worst, math.Abs(fine[v]-exact[v])/exact[v])
			}
		}
		if worst > 0.005 {
			t.Errorf("seed %d %v: worst voxel relative difference %g at dh 0.001", tc.seed, tc.conn, worst)
		}
		if r := dCoarse / dFine; r < 5 || r > 20 {
			t.Errorf("seed %d %v: gap ratio dh 0.01 / 0.001 = %g, want about 10 (O(dh))", tc.seed, tc.conn, r)
		}
		t.Logf("seed %d %v: max TFCE %.4g, gap %.3g%% (dh 0.001), %.3g%% (dh 0.01), voxel worst %.3g%%",
			tc.seed, tc.conn, top, 100*dFine/top, 100*dCoarse/top, 100*worst)
	}
}

// Rescaling h by c multiplies TFCE by c^(H+1) (methods §k; change of variables in the integral).
func TestTFCEHeightScaling(t *testing.T) {
	dims := [3]int{11, 9, 8}
	img := smoothNoise(dims, 1.2, 4)
	c := 1.7
	scaled := make([]float64, len(img))
	for v, x := range img {
		scaled[v] = c * x
	}
	a := TFCE(img, dims, Corners, 0.5, 2)
	b := TFCE(scaled, dims, Corners, 0.5, 2)
	f := math.Pow(c, 3)
	for v := range a {
		if math.Abs(b[v]-f*a[v]) > 1e-12*max(1, math.Abs(b[v])) {
			t.Fatalf("voxel %d: TFCE(c·x) = %g, c³·TFCE(x) = %g", v, b[v], f*a[v])
		}
	}
}

// NaN voxels (outside a mask) are never suprathreshold: the map equals the one with 0 there,
// and a NaN cannot bridge two blobs.
func TestTFCENaN(t *testing.T) {
	dims := [3]int{5, 1, 1}
	withNaN := []float32{2, 3, float32(math.NaN()), 3, 1}
	zero := []float32{2, 3, 0, 3, 1}
	a := TFCESigned(withNaN, dims, Corners, 0.5, 2)
	b := TFCESigned(zero, dims, Corners, 0.5, 2)
	if !slices.Equal(a, b) {
		t.Errorf("NaN map %v, zero map %v", a, b)
	}
	// Voxel 0 (value 2, blob {0,1}): ∫₀² 2^½ h² dh = √2·8/3 (by hand).
	if w := math.Sqrt2 * 8 / 3; math.Abs(a[0]-w) > tolClosed {
		t.Errorf("voxel 0 = %g, want %g", a[0], w)
	}
	if a[2] != 0 {
		t.Errorf("NaN voxel = %g, want 0", a[2])
	}
}

// A reused workspace gives the same maps as fresh calls, whatever came before (sizes, E, H,
// float32 and float64 input), and TFCEMax equals the maxima of the maps.
func TestTFCEWorkspaceReuse(t *testing.T) {
	dims := [3]int{12, 10, 9}
	ws := NewTFCEWorkspace(dims, Edges)
	dst := make([]float64, 12*10*9)
	for trial := range 6 {
		img := smoothNoise(dims, 0.8+0.3*float64(trial), uint64(20+trial))
		for v := range img {
			img[v] += float64(trial%3) - 1 // shift: from mostly negative to mostly positive
		}
		E, H := []float64{0.5, 1, 0.5}[trial%3], []float64{2, 2, 1.5}[trial%3]
		for _, tail := range []Tail{TailPositive, TailNegative, TailSigned} {
			TFCETo(ws, dst, img, E, H, tail)
			var want []float64
			switch tail {
			case TailPositive:
				want = TFCE(img, dims, Edges, E, H)
			case TailNegative:
				neg := make([]float64, len(img))
				for v := range img {
					neg[v] = -img[v]
				}
				want = TFCE(neg, dims, Edges, E, H)
			case TailSigned:
				want = TFCESigned(img, dims, Edges, E, H)
			}
			if !slices.Equal(dst, want) {
				t.Fatalf("trial %d tail %d: reused workspace differs by %g", trial, tail, maxAbsDiff(dst, want))
			}
		}
		p, n := TFCEMax(ws, to32(img), E, H)
		pm, nm := slices.Max(TFCE(to32(img), dims, Edges, E, H)), -slices.Min(TFCESigned(to32(img), dims, Edges, E, H))
		if p != pm || math.Abs(n-max(nm, 0)) > 1e-12*n {
			t.Errorf("trial %d: TFCEMax = %g, %g; maps give %g, %g", trial, p, n, pm, nm)
		}
	}
}

// The radix sort orders by value descending, ties by index ascending, like a comparison sort.
func TestSweepOrder(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	dims := [3]int{31, 17, 13}
	n := dims[0] * dims[1] * dims[2]
	ws := NewTFCEWorkspace(dims, Faces)
	for trial := range 4 {
		a64 := make([]float64, n)
		for v := range a64 {
			switch trial {
			case 0:
				a64[v] = rng.NormFloat64()
			case 1:
				a64[v] = float64(rng.IntN(7)) - 2 // ties
			case 2:
				a64[v] = math.Exp(20 * rng.NormFloat64()) // wide exponent range
			case 3:
				a64[v] = 1 + float64(rng.IntN(1000))*1e-15 // differ in the low mantissa bits
			}
		}
		for _, in := range []any{a64, to32(a64)} {
			var cnt int
			var packed bool
			var vals []float64
			switch s := in.(type) {
			case []float64:
				cnt, packed = gather(ws, s, false)
				vals = s
			case []float32:
				cnt, packed = gather(ws, s, false)
				vals = make([]float64, n)
				for v := range s {
					vals[v] = float64(s[v])
				}
			}
			if _, f32 := in.([]float32); packed != f32 {
				t.Fatalf("%T: packed = %v", in, packed)
			}
			ws.sortNodes(packed)
			type item struct {
				v int
				x float64
			}
			var want []item
			for v, x := range vals {
				if x > 0 {
					want = append(want, item{v, x})
				}
			}
			slices.SortFunc(want, func(a, b item) int {
				if c := cmp.Compare(b.x, a.x); c != 0 {
					return c
				}
				return cmp.Compare(a.v, b.v)
			})
			if cnt != len(want) {
				t.Fatalf("trial %d: %d keys, want %d", trial, cnt, len(want))
			}
			for p, it := range want {
				g, x := int(ws.order[p]), math.Float64frombits(^ws.keys[p])
				if packed {
					g, x = int(uint32(ws.keys[p])), float64(math.Float32frombits(^uint32(ws.keys[p]>>32)))
				}
				i, j, k := g%ws.px-1, (g/ws.px)%ws.py-1, g/(ws.px*ws.py)-1
				if v := i + dims[0]*(j+dims[1]*k); v != it.v || x != it.x {
					t.Fatalf("trial %d %T: position %d has voxel %d, want %d", trial, in, p, v, it.v)
				}
			}
		}
	}
}

func TestCheckTFCEParams(t *testing.T) {
	if err := CheckTFCEParams(0.5, 2); err != nil {
		t.Error(err)
	}
	for _, eh := range [][2]float64{{-1, 2}, {0.5, -0.5}, {math.NaN(), 2}, {0.5, math.Inf(1)}} {
		if CheckTFCEParams(eh[0], eh[1]) == nil {
			t.Errorf("E %g H %g accepted", eh[0], eh[1])
		}
	}
}

// The cube dilation used to group swept neighbours adds exactly the neighbours of each cell
// under the connectivity (definition, methods §l).
func TestCubeDilate(t *testing.T) {
	for _, conn := range []Connectivity{Faces, Edges, Corners} {
		for c := range 27 {
			ci, cj, ck := c%3, (c/3)%3, c/9
			want := uint32(1) << c
			for d := range 27 {
				if isNeighbour(d%3-ci, (d/3)%3-cj, d/9-ck, conn) {
					want |= 1 << d
				}
			}
			if got := dilate(conn, 1<<c); got != want {
				t.Errorf("%v cell %d: dilate = %027b, want %027b", conn, c, got, want)
			}
		}
	}
}

// cubeGroups returns one cell of each group of swept neighbours joined through swept cube
// cells, compared with a breadth-first search over the cells of the mask (definition of
// connected components; neighbours per isNeighbour); and the 26-connectivity shortcut
// oneGroup only accepts masks that hold one group, for which cubeGroups picks the face centre
// of lowest bit (so both give the sweep the same neighbour).
func TestCubeGroups(t *testing.T) {
	rng := rand.New(rand.NewPCG(61, 62))
	conns := []Connectivity{Faces, Edges, Corners}
	var nbrs [3][27][]int
	var wss [3]*TFCEWorkspace
	for ci, conn := range conns {
		wss[ci] = NewTFCEWorkspace([3]int{3, 3, 3}, conn)
		for a := range 27 {
			for d := range 27 {
				if isNeighbour(d%3-a%3, (d/3)%3-(a/3)%3, d/9-a/9, conn) {
					nbrs[ci][a] = append(nbrs[ci][a], d)
				}
			}
		}
	}
	shortcuts := 0
	queue := make([]int, 0, 27)
	for trial := range 20000 {
		// Densities from sparse to nearly full; the centre (cell 13) is never swept before
		// itself.
		p := float64(trial%12+1) / 13
		var m uint32
		for c := range 27 {
			if c != 13 && rng.Float64() < p {
				m |= 1 << c
			}
		}
		for ci, conn := range conns {
			ws := wss[ci]
			seeds := m & ws.nbrBits
			if seeds == 0 {
				continue
			}
			// Components of the cells of m, by breadth-first search; −1 outside m.
			var lab [27]int
			for c := range lab {
				lab[c] = -1
			}
			ncomp := 0
			for c := range 27 {
				if m&(1<<c) == 0 || lab[c] >= 0 {
					continue
				}
				lab[c] = ncomp
				queue = append(queue[:0], c)
				for len(queue) > 0 {
					a := queue[0]
					queue = queue[1:]
					for _, d := range nbrs[ci][a] {
						if m&(1<<d) != 0 && lab[d] < 0 {
							lab[d] = ncomp
							queue = append(queue, d)
						}
					}
				}
				ncomp++
			}
			var want, got uint32 // components holding a seed, and holding a picked cell
			for c := range 27 {
				if seeds&(1<<c) != 0 {
					want |= 1 << lab[c]
				}
			}
			first, others := ws.cubeGroups(m, seeds)
			picked := others | 1<<first
			for c := range 27 {
				if picked&(1<<c) == 0 {
					continue
				}
				if seeds&(1<<c) == 0 {
					t.Fatalf("%v mask %027b: cell %d is not a swept neighbour", conn, m, c)
				}
				if got&(1<<lab[c]) != 0 {
					t.Fatalf("%v mask %027b: two cells of one group", conn, m)
				}
				got |= 1 << lab[c]
			}
			if got != want {
				t.Fatalf("%v mask %027b: groups %b, want %b", conn, m, got, want)
			}
			if fb := seeds & faceBits; conn == Corners && oneGroup(seeds) {
				shortcuts++
				if bits.OnesCount32(want) != 1 || first != bits.TrailingZeros32(fb) || others != 0 {
					t.Fatalf("mask %027b: shortcut taken with %d groups, first %d (face centre %d)", m, bits.OnesCount32(want), first, bits.TrailingZeros32(fb))
				}
			}
		}
	}
	if shortcuts == 0 {
		t.Error("the 26-connectivity shortcut was never taken")
	}
	// The table behind oneGroup, for every set of face centres: the cells they reach under
	// 26-connectivity (dilate, checked against the definition in TestCubeDilate) when they
	// are joined, nothing when there are none or only an opposite pair.
	faces := []int{4, 10, 12, 14, 16, 22}
	for s := range 64 {
		var fb uint32
		for i, c := range faces {
			if s>>i&1 != 0 {
				fb |= 1 << c
			}
		}
		want := dilate(Corners, fb)
		if n := bits.OnesCount32(fb); n == 0 || n == 2 && (fb == 1<<4|1<<22 || fb == 1<<10|1<<16 || fb == 1<<12|1<<14) {
			want = 0
		}
		if got := faceCover[faceHash(fb)]; got != want {
			t.Errorf("face centres %027b: cover %027b, want %027b", fb, got, want)
		}
	}
}
