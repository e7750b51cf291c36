package cluster

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
)

// Tail selects which part of a map [TFCETo] enhances.
type Tail int

const (
	TailPositive Tail = iota // TFCE(stat): voxels ≤ 0 get 0
	TailNegative             // TFCE(−stat), as positive numbers
	TailSigned               // TFCE(stat) − TFCE(−stat)
)

// CheckTFCEParams reports whether E and H are usable: both finite and ≥ 0.
func CheckTFCEParams(E, H float64) error {
	if !(E >= 0) || math.IsInf(E, 1) {
		return fmt.Errorf("cluster: TFCE extent exponent E = %g, want a finite number >= 0", E)
	}
	if !(H >= 0) || math.IsInf(H, 1) {
		return fmt.Errorf("cluster: TFCE height exponent H = %g, want a finite number >= 0", H)
	}
	return nil
}

// TFCE returns the exact threshold-free cluster enhancement of the positive part of stat,
// extent in voxels: voxels ≤ 0 (and NaN) get 0. See the package documentation.
func TFCE[T Float](stat []T, dims [3]int, conn Connectivity, E, H float64) []float64 {
	ws := NewTFCEWorkspace(dims, conn)
	dst := make([]float64, len(stat))
	TFCETo(ws, dst, stat, E, H, TailPositive)
	return dst
}

// TFCESigned returns TFCE(stat) − TFCE(−stat).
func TFCESigned[T Float](stat []T, dims [3]int, conn Connectivity, E, H float64) []float64 {
	ws := NewTFCEWorkspace(dims, conn)
	dst := make([]float64, len(stat))
	TFCETo(ws, dst, stat, E, H, TailSigned)
	return dst
}

// TFCEWorkspace holds the buffers of the exact TFCE sweep for one grid and connectivity, so
// that repeated calls (permutations) do not allocate. It is not safe for concurrent use; give
// each worker its own.
type TFCEWorkspace struct {
	dims   [3]int
	conn   Connectivity
	px, py int // padded grid (one empty voxel on every side): no bounds checks

	cellOff [27]int32  // padded offset of each cell of the 3×3×3 cube, bit c = (di+1) + 3(dj+1) + 9(dk+1)
	nbrBits uint32     // cube cells that are neighbours of the centre under conn
	cellNbr [27]uint32 // cube cells that are cell c or its neighbours under conn

	node []int32  // padded grid → sweep position, noNode when not swept
	trip []uint64 // padded grid: lanes of node[g], node[g+1], node[g+2] (see linksLanes)
	// laneLimit is the most swept voxels for the packed comparison in linksLanes: laneMax (tests
	// lower it to check the one-cell-at-a-time path).
	laneLimit int

	// Per node, in sweep order (decreasing value, then increasing index).
	keys, keys2   []uint64 // sort keys: ^bits of the positive value, see gather
	order, order2 []int32  // padded grid index
	gidx          []int32  // packed maps: padded grid index of each node in index order
	fh            []float64
	rep           []int32  // a swept neighbour of each group of swept neighbours, −1 if none
	extra         []uint64 // further groups (rare): node<<32 | neighbour, sorted
	parent        []int32
	size          []int32
	w             []float64 // potential: TFCE(v) = Σ w on the path v → root
	lastF         []float64 // F(h) where the root's current extent began

	powE   []float64 // powE[s] = s^E for s = 0 … nodes
	powEOf float64
	hist   [radixDigits][radixBuckets]int32
}

const noNode = math.MaxInt32

// NewTFCEWorkspace returns a workspace for maps on dims under conn.
func NewTFCEWorkspace(dims [3]int, conn Connectivity) *TFCEWorkspace {
	gridSize(dims)
	pd := [3]int{dims[0] + 2, dims[1] + 2, dims[2] + 2}
	np := gridSize(pd)
	ws := &TFCEWorkspace{dims: dims, conn: conn, px: pd[0], py: pd[1], node: make([]int32, np)}
	for c := range 27 {
		dj, dk, di := c%3-1, (c/3)%3-1, c/9-1
		ws.cellOff[c] = int32(di + pd[0]*(dj+pd[1]*dk))
	}
	ws.nbrBits = dilate(conn, centreBit) &^ centreBit
	for c := range 27 {
		ws.cellNbr[c] = dilate(conn, 1<<c)
	}
	for g := range ws.node {
		ws.node[g] = noNode
	}
	ws.powEOf = math.NaN()
	ws.laneLimit = laneMax
	return ws
}

// TFCETo writes the exact TFCE of the chosen tail of stat into dst (len(dst) = len(stat)).
func TFCETo[T Float](ws *TFCEWorkspace, dst []float64, stat []T, E, H float64, tail Tail) {
	ws.check(len(stat), E, H)
	if len(dst) != len(stat) {
		panic(fmt.Sprintf("cluster: dst has %d voxels, stat %d", len(dst), len(stat)))
	}
	switch tail {
	case TailPositive:
		sweep(ws, stat, false, E, H, true)
		ws.emit(dst, false)
	case TailNegative:
		sweep(ws, stat, true, E, H, true)
		ws.emit(dst, false)
	case TailSigned:
		sweep(ws, stat, false, E, H, true)
		ws.emit(dst, false)
		sweep(ws, stat, true, E, H, true)
		ws.emit(dst, true)
	default:
		panic(fmt.Sprintf("cluster: tail %d, want TailPositive, TailNegative or TailSigned", int(tail)))
	}
}

// TFCEMax returns the largest TFCE of stat and of −stat (0 when a tail has no voxel > 0), the
// statistics of a permutation step, without writing a map.
func TFCEMax[T Float](ws *TFCEWorkspace, stat []T, E, H float64) (pos, neg float64) {
	ws.check(len(stat), E, H)
	sweep(ws, stat, false, E, H, false)
	pos = ws.max()
	sweep(ws, stat, true, E, H, false)
	neg = ws.max()
	return pos, neg
}

// TFCEMaxTail returns the largest TFCE of one tail of stat without writing a map: TailPositive
// gives the largest TFCE(stat) (the one-sided permutation statistic), TailNegative the largest
// TFCE(−stat), TailSigned the larger of the two (the two-sided statistic). A tail without voxels
// > 0 gives 0. It sweeps only the tails it needs, so the one-sided form costs half of TFCEMax.
func TFCEMaxTail[T Float](ws *TFCEWorkspace, stat []T, E, H float64, tail Tail) float64 {
	ws.check(len(stat), E, H)
	switch tail {
	case TailPositive:
		sweep(ws, stat, false, E, H, false)
		return ws.max()
	case TailNegative:
		sweep(ws, stat, true, E, H, false)
		return ws.max()
	case TailSigned:
		sweep(ws, stat, false, E, H, false)
		pos := ws.max()
		sweep(ws, stat, true, E, H, false)
		return max(pos, ws.max())
	}
	panic(fmt.Sprintf("cluster: tail %d, want TailPositive, TailNegative or TailSigned", int(tail)))
}

// TFCEMaxSparse returns TFCEMaxTail(ws, stat, E, H, TailPositive) of the float32 map stat
// given by its voxels > 0 alone: idx holds their linear indices in increasing order and val
// their values (every other voxel of stat is ≤ 0 or NaN). A permutation step that produces
// those voxels directly spares writing and scanning the whole grid.
func TFCEMaxSparse(ws *TFCEWorkspace, idx []int32, val []float32, E, H float64) float64 {
	if err := CheckTFCEParams(E, H); err != nil {
		panic(err.Error())
	}
	if len(idx) != len(val) {
		panic(fmt.Sprintf("cluster: %d sparse voxels but %d values", len(idx), len(val)))
	}
	gatherSparse(ws, idx, val)
	ws.sweepKeys(len(idx), true, E, H, false)
	return ws.max()
}

func (ws *TFCEWorkspace) check(n int, E, H float64) {
	if want := ws.dims[0] * ws.dims[1] * ws.dims[2]; n != want {
		panic(fmt.Sprintf("cluster: stat has %d voxels, dims %v hold %d", n, ws.dims, want))
	}
	if err := CheckTFCEParams(E, H); err != nil {
		panic(err.Error())
	}
}

// sweep runs the union-find over the voxels of stat (or −stat) that are > 0, in decreasing
// value (ties by increasing index), leaving the potentials in ws.w (methods §k):
//
//	for each voxel v, value h_v, in that order:
//	    make v a root: size 1, last = h_v, w = 0
//	    for each swept neighbour u, r = find(u), each distinct r once:
//	        w[r] += size[r]^E · (F(last[r]) − F(h_v)); last[r] = h_v   (close r's interval)
//	        union by size; a under b: w[a] −= w[b], size[b] += size[a], last[b] = h_v
//	then for each root: w[r] += size[r]^E · F(last[r])  (down to h0 = 0)
//
// Swept neighbours that are joined to each other inside v's 3×3×3 cube (through swept cells)
// are in one component already, so only one of each such group is looked up: see links.
//
// With final false the last step (the root terms) is left to max, which adds each root's term
// where a path reaches it, in the same arithmetic.
func sweep[T Float](ws *TFCEWorkspace, stat []T, negate bool, E, H float64, final bool) {
	n, packed := gather(ws, stat, negate)
	ws.sweepKeys(n, packed, E, H, final)
}

// sweepKeys is sweep after gather (n keys, packed for float32 maps).
func (ws *TFCEWorkspace) sweepKeys(n int, packed bool, E, H float64, final bool) {
	ws.prepare(n, E)
	ws.sortNodes(packed)
	keys, fh := ws.keys[:n], ws.fh[:n]
	// F(h) = h^(H+1)/(H+1) for every node, with the node map and the packed ranks of
	// linksLanes, in one loop. linksLanes reads the ranks from the lanes alone, so the node
	// map (which float32 maps gather without touching) is filled only for links, for emit (a
	// map is asked for) and for packLanes (H ≠ 2).
	lanes := packed && n <= ws.laneLimit
	needNode := !lanes || final || H != 2
	if packed && needNode {
		ws.clearNode()
	}
	node := ws.node
	if lanes {
		ws.resetLanes()
	}
	if packed {
		switch {
		case !needNode:
			// The packed ranks of links: cell g is lane 0 of trip[g], lane 1 of trip[g−1]
			// and lane 2 of trip[g−2] (all lanes start at laneMax).
			trip := ws.trip
			for t, k := range keys {
				g := uint32(k)
				x := uint64(laneMax ^ t)
				trip[g] ^= x
				trip[g-1] ^= x << laneBits
				trip[g-2] ^= x << (2 * laneBits)
				h := float64(math.Float32frombits(^uint32(k >> 32)))
				fh[t] = h * h * h / 3
			}
		case lanes && H == 2:
			// The same, with the node map.
			trip := ws.trip
			for t, k := range keys {
				g := uint32(k)
				node[g] = int32(t)
				x := uint64(laneMax ^ t)
				trip[g] ^= x
				trip[g-1] ^= x << laneBits
				trip[g-2] ^= x << (2 * laneBits)
				h := float64(math.Float32frombits(^uint32(k >> 32)))
				fh[t] = h * h * h / 3
			}
		case H == 2:
			for t, k := range keys {
				node[uint32(k)] = int32(t)
				h := float64(math.Float32frombits(^uint32(k >> 32)))
				fh[t] = h * h * h / 3
			}
		default:
			for t, k := range keys {
				node[uint32(k)] = int32(t)
				fh[t] = fOf(float64(math.Float32frombits(^uint32(k>>32))), H)
			}
			if lanes {
				ws.packLanes()
			}
		}
	} else {
		for t, k := range keys {
			fh[t] = fOf(math.Float64frombits(^k), H)
		}
		for t, g := range ws.order[:n] {
			node[g] = int32(t)
		}
	}
	if lanes {
		ws.linksLanes(n)
	} else {
		ws.links()
	}
	parent, size, w, lastF, rep, extra := ws.parent[:n], ws.size[:n], ws.w[:n], ws.lastF[:n], ws.rep[:n], ws.extra
	powE := ws.powE
	sizePow := func(s int32) float64 { return powE[s] }
	x := 0                        // next entry of extra
	nextT := int32(math.MaxInt32) // node of extra[x]
	if len(extra) > 0 {
		nextT = int32(extra[0] >> 32)
	}
	for t := range int32(n) {
		f := fh[t]
		u := rep[t]
		if u < 0 {
			parent[t], size[t], w[t], lastF[t] = t, 1, 0, f
			continue
		}
		// v joins the first neighbour's root r (union by size: a root has size ≥ 1), after
		// r's interval [h_v, last] is closed.
		r := findTFCE(parent, w, u)
		w[r] += sizePow(size[r]) * (lastF[r] - f)
		lastF[r] = f
		parent[t], w[t] = r, -w[r]
		size[r]++
		if t != nextT {
			continue
		}
		cur := r
		for ; x < len(extra) && int32(extra[x]>>32) == t; x++ {
			r := findTFCE(parent, w, int32(uint32(extra[x])))
			if r == cur {
				continue
			}
			w[r] += sizePow(size[r]) * (lastF[r] - f)
			lastF[r] = f
			a, b := r, cur
			if size[r] > size[cur] {
				a, b = cur, r
			}
			w[a] -= w[b]
			parent[a] = b
			size[b] += size[a]
			cur = b
		}
		nextT = math.MaxInt32
		if x < len(extra) {
			nextT = int32(extra[x] >> 32)
		}
	}
	if final {
		for t := range int32(n) {
			if parent[t] == t {
				w[t] += sizePow(size[t]) * lastF[t]
			}
		}
	}
}

// fOf returns F(h) = h^(H+1)/(H+1).
func fOf(h, H float64) float64 {
	switch H {
	case 2:
		return h * h * h / 3
	case 1:
		return h * h / 2
	}
	return math.Pow(h, H+1) / (H + 1)
}

// findTFCE returns the root of x, halving the path. When x is re-pointed past its parent p,
// w[x] takes w[p] so that the sum of w from x to the root is unchanged.
func findTFCE(parent []int32, w []float64, x int32) int32 {
	for {
		p := parent[x]
		if p == x {
			return x
		}
		gp := parent[p]
		if gp == p {
			return p
		}
		w[x] += w[p]
		parent[x] = gp
		x = gp
	}
}

// links finds, for every swept voxel, the groups of its swept neighbours, in one pass over the
// grid in index order (the neighbour rows stream through the cache). A 27-bit mask holds the
// cells of the 3×3×3 cube swept before the voxel; cells joined under the connectivity through
// swept cells of the cube are in one component when the voxel is swept, so one neighbour per
// group goes to rep (the first group) or extra (the others).
//
// Cube cell c is (dj+1) + 3(dk+1) + 9(di+1): the nine cube rows along x are r = (dj+1) +
// 3(dk+1), and the x offset di selects a block of nine bits (dilate does not depend on which
// grid axis is which: the connectivities are symmetric). This form compares one cell at a
// time with the node map; maps of fewer than laneMax swept float32 values take linksLanes.
func (ws *TFCEWorkspace) links() {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	node, rep, nbr := ws.node, ws.rep, ws.nbrBits
	off := ws.cellOff
	var rows [9]int32 // padded offset of the centre cell (di = 0) of each row of the cube
	for r := range rows {
		rows[r] = off[r+9]
	}
	corners := ws.conn == Corners
	extra := ws.extra[:0]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			for i, t := range node[g0 : g0+nx] {
				if t == noNode {
					continue
				}
				g := int32(g0 + i)
				m := cubeMask(node, g, t, &rows)
				seeds := m & nbr
				if seeds == 0 {
					rep[t] = -1
					continue
				}
				if corners && oneGroup(seeds) {
					rep[t] = node[g+off[bits.TrailingZeros32(seeds&faceBits)]]
					continue
				}
				first, others := ws.cubeGroups(m, seeds)
				rep[t] = node[g+off[first]]
				for ; others != 0; others &= others - 1 {
					u := node[g+off[bits.TrailingZeros32(others)]]
					extra = append(extra, uint64(t)<<32|uint64(u))
				}
			}
		}
	}
	slices.Sort(extra)
	ws.extra = extra
}

// linksLanes is links for float32 maps of fewer than laneMax swept voxels. It visits the swept
// voxels alone, in index order (ws.gidx), and takes the ranks of a voxel and of its cube's
// cells from the packed lanes (see packLanes): the three cells of a cube row are compared with
// the voxel in one 64-bit subtraction, so a mask costs nine subtractions instead of 27
// comparisons, and the node map is not read.
func (ws *TFCEWorkspace) linksLanes(n int) {
	rep, nbr := ws.rep[:n], ws.nbrBits
	off := ws.cellOff
	var rows [9]int32 // padded offset of the word holding cells di = −1, 0, +1 of each cube row
	for r := range rows {
		rows[r] = off[r+9] - 1
	}
	r0, r1, r2, r3, r4 := rows[0], rows[1], rows[2], rows[3], rows[4]
	r5, r6, r7, r8 := rows[5], rows[6], rows[7], rows[8]
	trip := ws.trip
	rank := func(g int32) int32 { return int32(trip[g]) & laneMax } // lane 0 of trip[g]: cell g
	corners := ws.conn == Corners
	extra := ws.extra[:0]
	for _, g := range ws.gidx[:n] {
		w4 := trip[g+r4] // row 4 is the voxel's own: lane 1 is the voxel
		t := int32(w4>>laneBits) & laneMax
		// Lane guard bits of (row − t) are set where the cell was not swept before t; row
		// r's go to bits 12+r, 33+r and 54+r of acc.
		tt := uint64(t) * laneOnes
		acc := (trip[g+r0]-tt)&laneGuards>>8 | (trip[g+r1]-tt)&laneGuards>>7 |
			(trip[g+r2]-tt)&laneGuards>>6 | (trip[g+r3]-tt)&laneGuards>>5 |
			(w4-tt)&laneGuards>>4 | (trip[g+r5]-tt)&laneGuards>>3 |
			(trip[g+r6]-tt)&laneGuards>>2 | (trip[g+r7]-tt)&laneGuards>>1 |
			(trip[g+r8]-tt)&laneGuards
		later := uint32(acc>>12)&0x1ff | uint32(acc>>33)&0x1ff<<9 | uint32(acc>>54)&0x1ff<<18
		m := ^later & cubeBits
		seeds := m & nbr
		if seeds == 0 {
			rep[t] = -1
			continue
		}
		if corners && oneGroup(seeds) {
			rep[t] = rank(g + off[bits.TrailingZeros32(seeds&faceBits)])
			continue
		}
		first, others := ws.cubeGroups(m, seeds)
		rep[t] = rank(g + off[first])
		for ; others != 0; others &= others - 1 {
			u := rank(g + off[bits.TrailingZeros32(others)])
			extra = append(extra, uint64(t)<<32|uint64(u))
		}
	}
	slices.Sort(extra)
	ws.extra = extra
}

// oneGroup reports, under 26-connectivity, that the swept neighbours seeds (not empty) form one
// group of which cubeGroups would pick the face centre of lowest bit: two face centres are
// neighbours unless opposite, so the face centres of seeds are joined when they are not just an
// opposite pair, and every other cell of seeds joins them when it neighbours one of them. Most
// voxels of a smooth map pass this test. faceCover holds, per set of face centres, the cells
// they reach (0 for none or an opposite pair alone), indexed by a multiplicative hash of their
// bits that has no collisions on the 64 sets (faceMagic, found by search; checked when the
// table is built).
func oneGroup(seeds uint32) bool {
	return seeds&^faceCover[faceHash(seeds&faceBits)] == 0
}

const faceMagic = 0x4404809004882c40

// faceHash maps the face-centre bits fb to 0..63, distinctly for each of the 64 sets.
func faceHash(fb uint32) uint64 { return uint64(fb) * faceMagic >> 58 }

var faceCover = func() (cover [64]uint32) {
	var used [64]bool
	for s := range 64 {
		var fb uint32
		for i, c := range [6]uint{4, 10, 12, 14, 16, 22} {
			if s>>i&1 != 0 {
				fb |= 1 << c
			}
		}
		h := faceHash(fb)
		if used[h] {
			panic("cluster: the face-centre hash has a collision")
		}
		used[h] = true
		if fb != 0 && fb != oppX && fb != oppY && fb != oppZ {
			cover[h] = dilate(Corners, fb)
		}
	}
	return cover
}()

// cubeGroups splits seeds, the swept neighbours of a voxel (the cells of m, the cube cells
// swept before it, that are its neighbours), into groups joined under the connectivity through
// cells of m, and returns one cell of the first group and a mask with one cell of each other.
// A group grows from a seed through m until it holds every seed left (the usual case: one
// group, often after one step) or stops growing. A face centre, when there is one, reaches 16
// of the 26 cells in one step, so it seeds first.
func (ws *TFCEWorkspace) cubeGroups(m, seeds uint32) (first int, others uint32) {
	first = -1
	for seeds != 0 {
		seed := seeds & faceBits
		if seed == 0 {
			seed = seeds
		}
		c := bits.TrailingZeros32(seed)
		comp := ws.cellNbr[c] & m
		for seeds&^comp != 0 {
			grown := dilate(ws.conn, comp) & m
			if grown == comp {
				break
			}
			comp = grown
		}
		seeds &^= comp | 1<<c
		if first < 0 {
			first = c
		} else {
			others |= 1 << c
		}
	}
	return first, others
}

// clearNode marks every voxel of the node map as not swept.
func (ws *TFCEWorkspace) clearNode() {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			row := ws.node[g0 : g0+nx]
			for i := range row {
				row[i] = noNode
			}
		}
	}
}

// Lanes of the packed comparison: three 21-bit lanes per word, each holding laneGuard | rank
// with rank < laneGuard (laneMax for a voxel not swept). Subtracting t from every lane cannot
// borrow across lanes (laneGuard + rank − t > 0 when t < laneGuard), and a lane keeps its guard
// bit exactly when rank ≥ t, that is when the cell was not swept before t.
const (
	laneBits   = 21
	laneGuard  = 1 << (laneBits - 1)
	laneMax    = laneGuard - 1
	laneOnes   = 1 | 1<<laneBits | 1<<(2*laneBits)
	laneGuards = laneGuard * laneOnes
)

// resetLanes sets every lane of ws.trip to laneMax (no swept voxel).
func (ws *TFCEWorkspace) resetLanes() {
	if len(ws.trip) != len(ws.node) {
		ws.trip = make([]uint64, len(ws.node))
	}
	const full = (laneGuard | laneMax) * laneOnes
	trip := ws.trip
	for g := range trip {
		trip[g] = full
	}
}

// packLanes fills ws.trip from the node map: trip[g] holds the ranks of padded cells g, g+1,
// g+2 in lanes 0–2.
func (ws *TFCEWorkspace) packLanes() {
	node := ws.node
	trip := ws.trip[:len(node)-2]
	lane := func(x int32) uint64 { return laneGuard | uint64(min(uint32(x), laneMax)) }
	w := lane(node[0])<<laneBits | lane(node[1])<<(2*laneBits)
	for g := range trip {
		w = w>>laneBits | lane(node[g+2])<<(2*laneBits)
		trip[g] = w
	}
}

// cubeMask is the mask of cells of voxel g's cube swept before t, one cell at a time (maps
// with laneMax or more swept voxels).
func cubeMask(node []int32, g, t int32, rows *[9]int32) uint32 {
	var m uint32
	for r, o := range rows {
		row := node[g+o-1 : g+o+2]
		for di, x := range row {
			m |= uint32(x-t) >> 31 << (r + 9*di)
		}
	}
	return m
}

// Cube cell masks for dilate; bit c = (di+1) + 3(dj+1) + 9(dk+1).
const (
	centreBit uint32 = 1 << 13
	faceBits  uint32 = 1<<4 | 1<<10 | 1<<12 | 1<<14 | 1<<16 | 1<<22 // the six face centres
	oppX      uint32 = 1<<4 | 1<<22                                 // opposite face centres
	oppY      uint32 = 1<<12 | 1<<14
	oppZ      uint32 = 1<<10 | 1<<16
	cubeBits  uint32 = 1<<27 - 1
	xLow      uint32 = 0b001_001_001_001_001_001_001_001_001 // di = −1
	xHigh     uint32 = xLow << 2                             // di = +1
	yLow      uint32 = 0b000_000_111_000_000_111_000_000_111 // dj = −1
	yHigh     uint32 = yLow << 6                             // dj = +1
)

// dilX, dilY and dilZ add the cells one step along x, y or z; m holds cube cells only.
func dilX(m uint32) uint32 { return m | (m<<1)&(cubeBits&^xLow) | (m>>1)&^xHigh }
func dilY(m uint32) uint32 { return m | (m<<3)&(cubeBits&^yLow) | (m>>3)&^yHigh }
func dilZ(m uint32) uint32 { return m | (m<<9)&cubeBits | m>>9 }

// dilate adds to m the cube cells that are neighbours of its cells under conn.
func dilate(conn Connectivity, m uint32) uint32 {
	switch conn {
	case Faces:
		return dilX(m) | dilY(m) | dilZ(m)
	case Edges:
		x := dilX(m)
		return dilY(x) | dilZ(x) | dilZ(dilY(m))
	}
	return dilZ(dilY(dilX(m)))
}

// gather collects the sort keys of the voxels > 0 of stat (or −stat), in increasing index
// order; a first pass counts them, so the buffers are sized once. For float32 maps (packed) a
// key is ^bits(value)<<32 | padded index, sorted on its upper half, the radix histograms of
// the three digits are counted here, and the padded indices are kept in index order in gidx
// (the node map is left to sweep); for float64 maps a key is ^bits(value), the padded index
// goes to order, and the node map is reset.
func gather[T Float](ws *TFCEWorkspace, stat []T, negate bool) (n int, packed bool) {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	probe := T(1 << 24)
	packed = probe+1 == probe // 24-bit significand: float32
	sign := T(1)
	if negate {
		sign = -1
	}
	if packed && cap(ws.keys) > 0 {
		// Steady state (permutations): the buffers are usually large enough already, so the
		// keys are gathered without counting first; only an overflow counts and retries.
		if n, ok := gatherPacked(ws, stat, sign); ok {
			return n, true
		}
	}
	for _, x := range stat {
		if sign*x > 0 {
			n++
		}
	}
	ws.grow(n, packed)
	if packed {
		n, _ = gatherPacked(ws, stat, sign)
		return n, true
	}
	keys := ws.keys[:n]
	p := 0
	order := ws.order[:n]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			v0 := nx * (j + ny*k)
			nodeRow := ws.node[g0 : g0+nx]
			for i, x := range stat[v0 : v0+nx] {
				nodeRow[i] = noNode
				h := sign * x
				if !(h > 0) {
					continue
				}
				keys[p] = ^math.Float64bits(float64(h))
				order[p] = int32(g0 + i)
				p++
			}
		}
	}
	ws.keys, ws.order = keys, order
	return n, false
}

// gatherPacked is gather for float32 maps, into the capacity of ws.keys; ok is false when
// there are more voxels > 0 than that.
func gatherPacked[T Float](ws *TFCEWorkspace, stat []T, sign T) (n int, ok bool) {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	keys := ws.keys[:cap(ws.keys)]
	if cap(ws.gidx) < len(keys) {
		ws.gidx = make([]int32, len(keys))
	}
	gidx := ws.gidx[:len(keys)]
	h := &ws.hist
	h0, h1, h2 := &h[0], &h[1], &h[2]
	*h0, *h1, *h2 = [radixBuckets]int32{}, [radixBuckets]int32{}, [radixBuckets]int32{}
	p := 0
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			v0 := nx * (j + ny*k)
			for i, x := range stat[v0 : v0+nx] {
				h := sign * x
				if !(h > 0) {
					continue
				}
				if p == len(keys) {
					return 0, false
				}
				b := ^math.Float32bits(float32(h))
				h0[b&(radixBuckets-1)]++
				h1[(b>>radixBits)&(radixBuckets-1)]++
				h2[(b>>(2*radixBits))&(radixBuckets-1)]++
				keys[p] = uint64(b)<<32 | uint64(g0+i)
				gidx[p] = int32(g0 + i)
				p++
			}
		}
	}
	ws.keys = keys[:p]
	return p, true
}

// gatherSparse is gatherPacked for a float32 map given by its voxels > 0 (see TFCEMaxSparse),
// which it checks: indices increasing and inside the grid, values > 0.
func gatherSparse(ws *TFCEWorkspace, idx []int32, val []float32) {
	n := len(idx)
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	if n > nx*ny*nz {
		panic(fmt.Sprintf("cluster: %d sparse voxels on a grid of %d", n, nx*ny*nz))
	}
	if cap(ws.keys) < n || cap(ws.keys2) < n {
		ws.grow(n, true)
	}
	keys := ws.keys[:n]
	if cap(ws.gidx) < n {
		ws.gidx = make([]int32, cap(ws.keys))
	}
	gidx := ws.gidx[:n]
	h := &ws.hist
	h0, h1, h2 := &h[0], &h[1], &h[2]
	*h0, *h1, *h2 = [radixBuckets]int32{}, [radixBuckets]int32{}, [radixBuckets]int32{}
	// Voxel v of grid row (j, k) is padded cell v + off, off = g0 − v0 of that row.
	j, k := 0, 0
	rowEnd := int32(nx)
	off := int32(1 + ws.px*(1+ws.py))
	last := int32(-1)
	val = val[:n]
	for p, v := range idx {
		if v <= last {
			panic(fmt.Sprintf("cluster: sparse voxel %d (index %d) does not follow index %d", p, v, last))
		}
		last = v
		for v >= rowEnd {
			rowEnd += int32(nx)
			if j++; j == ny {
				j = 0
				k++
			}
			if k == nz {
				panic(fmt.Sprintf("cluster: sparse voxel index %d is outside the grid of %d", v, nx*ny*nz))
			}
			off = int32(1+ws.px*(j+1+ws.py*(k+1))) - (rowEnd - int32(nx))
		}
		x := val[p]
		if !(x > 0) {
			panic(fmt.Sprintf("cluster: sparse voxel %d has value %g, want > 0", v, x))
		}
		g := v + off
		b := ^math.Float32bits(x)
		h0[b&(radixBuckets-1)]++
		h1[(b>>radixBits)&(radixBuckets-1)]++
		h2[(b>>(2*radixBits))&(radixBuckets-1)]++
		keys[p] = uint64(b)<<32 | uint64(g)
		gidx[p] = g
	}
	ws.keys = keys
}

// grow makes room for n nodes: exactly at first, with a quarter more to spare when a later
// map needs more. The index arrays of float64 maps (order) are made only when needed.
func (ws *TFCEWorkspace) grow(n int, packed bool) {
	c := n
	if ws.keys != nil {
		c += n / 4
	}
	if all := ws.dims[0] * ws.dims[1] * ws.dims[2]; c > all {
		c = all
	}
	if !packed && (cap(ws.order) < n || cap(ws.order2) < n) {
		ws.order, ws.order2 = make([]int32, c), make([]int32, c)
	}
	if cap(ws.keys) >= n && cap(ws.keys2) >= n {
		return
	}
	ws.keys, ws.keys2 = make([]uint64, c), make([]uint64, c)
	ws.fh, ws.rep = make([]float64, c), make([]int32, c)
	ws.parent, ws.size = make([]int32, c), make([]int32, c)
	ws.w, ws.lastF = make([]float64, c), make([]float64, c)
}

// prepare sizes the per-node buffers for n nodes and the s^E table for exponent E.
func (ws *TFCEWorkspace) prepare(n int, E float64) {
	ws.fh, ws.rep = ws.fh[:n], ws.rep[:n]
	ws.parent, ws.size, ws.w, ws.lastF = ws.parent[:n], ws.size[:n], ws.w[:n], ws.lastF[:n]
	if E != ws.powEOf {
		ws.powE = ws.powE[:0]
		ws.powEOf = E
	}
	// The table is filled ahead, so the sweep looks sizes up instead of taking a square root
	// (or power) on its critical path; it is kept across calls.
	for sz := len(ws.powE); sz <= n; sz++ {
		if E == 0.5 {
			ws.powE = append(ws.powE, math.Sqrt(float64(sz)))
		} else {
			ws.powE = append(ws.powE, math.Pow(float64(sz), E))
		}
	}
}

// emit writes (or, with sub, subtracts) each swept voxel's path sum into dst in index order;
// other voxels get 0 (or are left alone).
func (ws *TFCEWorkspace) emit(dst []float64, sub bool) {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	parent, w := ws.parent, ws.w
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			v0 := nx * (j + ny*k)
			out := dst[v0 : v0+nx]
			for i, t := range ws.node[g0 : g0+nx] {
				if t == noNode {
					if !sub {
						out[i] = 0
					}
					continue
				}
				s := w[t]
				for parent[t] != t {
					t = parent[t]
					s += w[t]
				}
				if sub {
					out[i] -= s
				} else {
					out[i] = s
				}
			}
		}
	}
}

// max returns the largest TFCE of the last sweep (run with final false), 0 when nothing was
// swept. Only voxels without an earlier-swept neighbour (rep < 0: local maxima, ties broken by
// sweep order) are evaluated: a voxel v swept after a neighbour u has h_u ≥ h_v and shares u's
// component at every level h ≤ h_v, so TFCE(u) = TFCE(v) + ∫_{h_v}^{h_u} e(u, h)^E h^H dh ≥
// TFCE(v), and following earlier neighbours from any voxel ends at such a local maximum. Each
// path sum is formed as in emit after a final sweep (the root's w including its root term), so
// the result is one of the values the map would hold.
func (ws *TFCEWorkspace) max() float64 {
	parent, w, size, lastF := ws.parent, ws.w, ws.size, ws.lastF
	rep := ws.rep[:len(parent)]
	m := 0.0
	for t, u := range rep {
		if u >= 0 {
			continue
		}
		x := int32(t)
		s := 0.0
		first := true
		for {
			wx := w[x]
			if parent[x] == x {
				wx += ws.powE[size[x]] * lastF[x]
			}
			if first {
				s, first = wx, false
			} else {
				s += wx
			}
			if parent[x] == x {
				break
			}
			x = parent[x]
		}
		if s > m {
			m = s
		}
	}
	return m
}
