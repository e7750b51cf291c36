package cluster

import (
	"cmp"
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

	cellOff [27]int32 // padded offset of each cell of the 3×3×3 cube, bit c = (di+1) + 3(dj+1) + 9(dk+1)
	nbrBits uint32    // cube cells that are neighbours of the centre under conn

	node []int32 // padded grid → sweep position, noNode when not swept

	// Per node, in sweep order (decreasing value, then increasing index).
	keys, keys2   []uint64 // sort keys: ^bits of the positive value, see gather
	order, order2 []int32  // padded grid index
	fh            []float64
	rep           []int32 // a swept neighbour of each group of swept neighbours, −1 if none
	extra         []link  // further groups (rare): (node, neighbour), sorted by node
	parent        []int32
	size          []int32
	w             []float64 // potential: TFCE(v) = Σ w on the path v → root
	lastF         []float64 // F(h) where the root's current extent began

	powE   []float64 // powE[s] = s^E, 0 when not yet computed
	powEOf float64
	hist   [radixDigits][radixBuckets]int32
}

type link struct{ t, u int32 }

const noNode = math.MaxInt32

// NewTFCEWorkspace returns a workspace for maps on dims under conn.
func NewTFCEWorkspace(dims [3]int, conn Connectivity) *TFCEWorkspace {
	gridSize(dims)
	pd := [3]int{dims[0] + 2, dims[1] + 2, dims[2] + 2}
	np := gridSize(pd)
	ws := &TFCEWorkspace{dims: dims, conn: conn, px: pd[0], py: pd[1], node: make([]int32, np)}
	for c := range 27 {
		di, dj, dk := c%3-1, (c/3)%3-1, c/9-1
		ws.cellOff[c] = int32(di + pd[0]*(dj+pd[1]*dk))
	}
	ws.nbrBits = dilate(conn, centreBit) &^ centreBit
	for g := range ws.node {
		ws.node[g] = noNode
	}
	ws.powEOf = math.NaN()
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
		sweep(ws, stat, false, E, H)
		ws.emit(dst, false)
	case TailNegative:
		sweep(ws, stat, true, E, H)
		ws.emit(dst, false)
	case TailSigned:
		sweep(ws, stat, false, E, H)
		ws.emit(dst, false)
		sweep(ws, stat, true, E, H)
		ws.emit(dst, true)
	default:
		panic(fmt.Sprintf("cluster: tail %d, want TailPositive, TailNegative or TailSigned", int(tail)))
	}
}

// TFCEMax returns the largest TFCE of stat and of −stat (0 when a tail has no voxel > 0), the
// statistics of a permutation step, without writing a map.
func TFCEMax[T Float](ws *TFCEWorkspace, stat []T, E, H float64) (pos, neg float64) {
	ws.check(len(stat), E, H)
	sweep(ws, stat, false, E, H)
	pos = ws.max()
	sweep(ws, stat, true, E, H)
	neg = ws.max()
	return pos, neg
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
func sweep[T Float](ws *TFCEWorkspace, stat []T, negate bool, E, H float64) {
	n, packed := gather(ws, stat, negate)
	ws.prepare(n, E)
	ws.sortNodes(packed)
	keys, order, fh, node := ws.keys[:n], ws.order[:n], ws.fh[:n], ws.node
	if packed {
		for t, k := range keys {
			order[t] = int32(uint32(k))
			fh[t] = float64(math.Float32frombits(^uint32(k >> 32)))
		}
	} else {
		for t, k := range keys {
			fh[t] = math.Float64frombits(^k)
		}
	}
	for t, g := range order {
		node[g] = int32(t)
	}
	ws.links()
	// F(h) = h^(H+1)/(H+1) for every node, in one loop.
	switch H {
	case 2:
		for t, h := range fh {
			fh[t] = h * h * h / 3
		}
	case 1:
		for t, h := range fh {
			fh[t] = h * h / 2
		}
	default:
		for t, h := range fh {
			fh[t] = math.Pow(h, H+1) / (H + 1)
		}
	}
	parent, size, w, lastF, rep, extra := ws.parent[:n], ws.size[:n], ws.w[:n], ws.lastF[:n], ws.rep[:n], ws.extra
	sqrtE := E == 0.5
	sizePow := func(s int32) float64 {
		if sqrtE {
			return math.Sqrt(float64(s))
		}
		return ws.sizePow(s, E)
	}
	x := 0 // next entry of extra
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
		cur := r
		for ; x < len(extra) && extra[x].t == t; x++ {
			r := findTFCE(parent, w, extra[x].u)
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
	}
	for t := range int32(n) {
		if parent[t] == t {
			w[t] += sizePow(size[t]) * lastF[t]
		}
	}
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

func (ws *TFCEWorkspace) sizePow(s int32, E float64) float64 {
	p := ws.powE[s]
	if p == 0 {
		p = math.Pow(float64(s), E)
		ws.powE[s] = p
	}
	return p
}

// links finds, for every swept voxel, the groups of its swept neighbours, in one pass over the
// grid in index order (the neighbour rows stream through the cache). A 27-bit mask holds the
// cells of the 3×3×3 cube swept before the voxel; cells joined under the connectivity through
// swept cells of the cube are in one component when the voxel is swept, so one neighbour per
// group goes to rep (the first group) or extra (the others).
func (ws *TFCEWorkspace) links() {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	node, rep, conn, nbr := ws.node, ws.rep, ws.conn, ws.nbrBits
	off := ws.cellOff
	var rows [9]int32 // padded offset of the centre cell of each row of the cube
	for r := range rows {
		rows[r] = off[3*r+1]
	}
	extra := ws.extra[:0]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			g0 := 1 + ws.px*(j+1+ws.py*(k+1))
			for g := int32(g0); g < int32(g0+nx); g++ {
				t := node[g]
				if t == noNode {
					continue
				}
				// Bit c is set when cell c was swept before t: node − t < 0 (noNode − t ≥ 0).
				// The nine rows of the cube, three cells each, unrolled.
				m := cubeRow(node[g+rows[0]-1:g+rows[0]+2], t) |
					cubeRow(node[g+rows[1]-1:g+rows[1]+2], t)<<3 |
					cubeRow(node[g+rows[2]-1:g+rows[2]+2], t)<<6 |
					cubeRow(node[g+rows[3]-1:g+rows[3]+2], t)<<9 |
					cubeRow(node[g-1:g+2], t)<<12 |
					cubeRow(node[g+rows[5]-1:g+rows[5]+2], t)<<15 |
					cubeRow(node[g+rows[6]-1:g+rows[6]+2], t)<<18 |
					cubeRow(node[g+rows[7]-1:g+rows[7]+2], t)<<21 |
					cubeRow(node[g+rows[8]-1:g+rows[8]+2], t)<<24
				seeds := m & nbr
				if seeds == 0 {
					rep[t] = -1
					continue
				}
				first := true
				for seeds != 0 {
					seed := seeds & -seeds
					comp := seed
					for {
						grown := dilate(conn, comp) & m
						if grown == comp {
							break
						}
						comp = grown
					}
					seeds &^= comp
					u := node[g+off[bits.TrailingZeros32(seed)]]
					if first {
						rep[t] = u
						first = false
					} else {
						extra = append(extra, link{t, u})
					}
				}
			}
		}
	}
	slices.SortFunc(extra, func(a, b link) int { return cmp.Compare(a.t, b.t) })
	ws.extra = extra
}

// cubeRow returns 3 bits: which of the three cells of row were swept before t.
func cubeRow(row []int32, t int32) uint32 {
	_ = row[2]
	return uint32(row[0]-t)>>31 | uint32(row[1]-t)>>31<<1 | uint32(row[2]-t)>>31<<2
}

// Cube cell masks for dilate; bit c = (di+1) + 3(dj+1) + 9(dk+1).
const (
	centreBit uint32 = 1 << 13
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
// float32 maps (packed) a key is ^bits(value)<<32 | padded index, sorted on its upper half;
// for float64 maps it is ^bits(value), and the padded index goes to order.
func gather[T Float](ws *TFCEWorkspace, stat []T, negate bool) (n int, packed bool) {
	nx, ny, nz := ws.dims[0], ws.dims[1], ws.dims[2]
	probe := T(1 << 24)
	packed = probe+1 == probe // 24-bit significand: float32
	sign := T(1)
	if negate {
		sign = -1
	}
	for _, x := range stat {
		if sign*x > 0 {
			n++
		}
	}
	ws.grow(n)
	keys, order := ws.keys[:n], ws.order[:n]
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
				if packed {
					keys[p] = uint64(^math.Float32bits(float32(h)))<<32 | uint64(g0+i)
				} else {
					keys[p] = ^math.Float64bits(float64(h))
					order[p] = int32(g0 + i)
				}
				p++
			}
		}
	}
	ws.keys, ws.order = keys, order
	return n, packed
}

// grow makes room for n nodes: exactly at first, with a quarter more to spare when a later
// map needs more.
func (ws *TFCEWorkspace) grow(n int) {
	if cap(ws.keys) >= n && cap(ws.keys2) >= n {
		return
	}
	c := n
	if ws.keys != nil {
		c += n / 4
	}
	if all := ws.dims[0] * ws.dims[1] * ws.dims[2]; c > all {
		c = all
	}
	ws.keys, ws.keys2 = make([]uint64, c), make([]uint64, c)
	ws.order, ws.order2 = make([]int32, c), make([]int32, c)
	ws.fh, ws.rep = make([]float64, c), make([]int32, c)
	ws.parent, ws.size = make([]int32, c), make([]int32, c)
	ws.w, ws.lastF = make([]float64, c), make([]float64, c)
}

// prepare sizes the per-node buffers for n nodes and the s^E table for exponent E.
func (ws *TFCEWorkspace) prepare(n int, E float64) {
	ws.fh, ws.rep = ws.fh[:n], ws.rep[:n]
	ws.parent, ws.size, ws.w, ws.lastF = ws.parent[:n], ws.size[:n], ws.w[:n], ws.lastF[:n]
	if E == 0.5 {
		return // sweep takes square roots
	}
	if E != ws.powEOf {
		ws.powE = ws.powE[:0]
		ws.powEOf = E
	}
	if len(ws.powE) < n+1 {
		ws.powE = append(ws.powE, make([]float64, n+1-len(ws.powE))...)
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

// max returns the largest path sum of the last sweep, 0 when nothing was swept.
func (ws *TFCEWorkspace) max() float64 {
	parent, w := ws.parent, ws.w
	m := 0.0
	for t := range parent {
		s := w[t]
		for x := int32(t); parent[x] != x; {
			x = parent[x]
			s += w[x]
		}
		if s > m {
			m = s
		}
	}
	return m
}
