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
	trip []uint64 // padded grid: lanes of node[g], node[g+1], node[g+2] (see links)
	// laneLimit is the most swept voxels for the packed comparison in links: laneMax (tests
	// lower it to check the one-cell-at-a-time path).
	laneLimit int

	// Per node, in sweep order (decreasing value, then increasing index).
	keys, keys2   []uint64 // sort keys: ^bits of the positive value, see gather
	order, order2 []int32  // padded grid index
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
	ws.prepare(n, E)
	ws.sortNodes(packed)
	keys, fh, node := ws.keys[:n], ws.fh[:n], ws.node
	// F(h) = h^(H+1)/(H+1) for every node, with the node map, in one loop.
	lanes := packed && n <= ws.laneLimit
	if lanes {
		ws.resetLanes()
	}
	if packed {
		switch {
		case lanes && H == 2:
			// The node map and the packed ranks of links: cell g is lane 0 of trip[g], lane 1
			// of trip[g−1] and lane 2 of trip[g−2] (all lanes start at laneMax).
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
	ws.links(lanes)
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
// grid axis is which: the connectivities are symmetric). With fewer than laneMax swept voxels
// the three cells of a cube row are compared with the voxel in one 64-bit subtraction (see
// packLanes), so a mask costs nine subtractions instead of 27 comparisons.
func (ws *TFCEWorkspace) links(packed bool) {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	node, rep, conn, nbr := ws.node, ws.rep, ws.conn, ws.nbrBits
	off := ws.cellOff
	var rows [9]int32 // padded offset of the centre cell (di = 0) of each row of the cube
	for r := range rows {
		rows[r] = off[r+9]
	}
	trip := ws.trip
	extra := ws.extra[:0]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			nodeRow := node[g0 : g0+nx]
			var tr [9][]uint64
			if packed {
				// tr[r][i] holds the cells di = −1, 0, +1 of cube row r of voxel i.
				for r, o := range rows {
					a := g0 + int(o) - 1
					tr[r] = trip[a : a+nx : a+nx]
				}
			}
			t0, t1, t2, t3, t4 := tr[0], tr[1], tr[2], tr[3], tr[4]
			t5, t6, t7, t8 := tr[5], tr[6], tr[7], tr[8]
			for i, t := range nodeRow {
				if t == noNode {
					continue
				}
				g := int32(g0 + i)
				var m uint32
				if packed {
					// Lane guard bits of (row − t) are set where the cell was not swept
					// before t; row r's go to bits 12+r, 33+r and 54+r of acc.
					tt := uint64(t) * laneOnes
					acc := (t0[i]-tt)&laneGuards>>8 | (t1[i]-tt)&laneGuards>>7 |
						(t2[i]-tt)&laneGuards>>6 | (t3[i]-tt)&laneGuards>>5 |
						(t4[i]-tt)&laneGuards>>4 | (t5[i]-tt)&laneGuards>>3 |
						(t6[i]-tt)&laneGuards>>2 | (t7[i]-tt)&laneGuards>>1 |
						(t8[i]-tt)&laneGuards
					later := uint32(acc>>12)&0x1ff | uint32(acc>>33)&0x1ff<<9 | uint32(acc>>54)&0x1ff<<18
					m = ^later & cubeBits
				} else {
					m = cubeMask(node, g, t, &rows)
				}
				seeds := m & nbr
				if seeds == 0 {
					rep[t] = -1
					continue
				}
				// Grow a group from a seed through m until it holds every seed left (the usual
				// case: one group, often after one step) or stops growing. A face centre, when
				// there is one, reaches 16 of the 26 cells in one step, so it seeds first.
				first := true
				for seeds != 0 {
					seed := seeds & faceBits
					if seed == 0 {
						seed = seeds
					}
					c := bits.TrailingZeros32(seed)
					comp := ws.cellNbr[c] & m
					for seeds&^comp != 0 {
						grown := dilate(conn, comp) & m
						if grown == comp {
							break
						}
						comp = grown
					}
					seeds &^= comp | 1<<c
					u := node[g+off[c]]
					if first {
						rep[t] = u
						first = false
					} else {
						extra = append(extra, uint64(t)<<32|uint64(u))
					}
				}
			}
		}
	}
	slices.Sort(extra)
	ws.extra = extra
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

// gather resets the node map and collects the sort keys of the voxels > 0 of stat (or −stat),
// in increasing index order; a first pass counts them, so the buffers are sized once. For
// float32 maps (packed) a key is ^bits(value)<<32 | padded index, sorted on its upper half,
// and the radix histograms of the three digits are counted here; for float64 maps a key is
// ^bits(value), and the padded index goes to order.
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
	h := &ws.hist
	h0, h1, h2 := &h[0], &h[1], &h[2]
	*h0, *h1, *h2 = [radixBuckets]int32{}, [radixBuckets]int32{}, [radixBuckets]int32{}
	p := 0
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
				if p == len(keys) {
					return 0, false
				}
				b := ^math.Float32bits(float32(h))
				h0[b&(radixBuckets-1)]++
				h1[(b>>radixBits)&(radixBuckets-1)]++
				h2[(b>>(2*radixBits))&(radixBuckets-1)]++
				keys[p] = uint64(b)<<32 | uint64(g0+i)
				p++
			}
		}
	}
	ws.keys = keys[:p]
	return p, true
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
