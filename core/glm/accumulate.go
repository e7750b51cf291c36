package glm

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// batch is the number of volumes folded into the accumulators at once. Each accumulator
// slab is then read and written once per batch instead of once per volume, which cuts the
// memory traffic of the hot loop by this factor.
const batch = 4

// chunk is the number of voxels folded per block in flush (5 pending slices of 2048 float64:
// 80 KiB, within L2).
const chunk = 2048

// Accumulator holds the single-pass sufficient statistics of a voxel-wise GLM (methods notes
// §d.4, §d.5, §f.2). Every per-voxel quantity is a contiguous []float64 slab over the in-mask
// voxels (structure of arrays); no array of volumes x voxels is ever formed.
//
// Memory, in bytes per in-mask voxel, with p design columns: 8·(3p + 4) for Syy, Sy, Lyy, the
// first sample, Sxy, Axy and Bxy; 8·(batch + 1) = 40 for the pending volumes; at most 3·3·8 = 72
// for the neighbour products S0, S+, S−; and at most 4·12 = 48 for the run and segment lists
// (in a brain mask far less: one entry per stretch of consecutive voxels). That is at most
// 24p + 192 bytes per voxel (672 for p = 20; 200 000 voxels: 134 MB). AccumulatorBytes returns
// the bound for a caller that checks limits before allocating. Fit transiently needs a few
// more slabs (β: 8p per voxel, kept in the Fit; ρ, σ², mean: 8 each).
type Accumulator struct {
	n, p   int
	x      []float64 // n x p, row-major copy of the design
	dims   [3]int
	voxels []int32
	nv     int

	added int // volumes added (beyond n they are counted but ignored)

	// Per voxel, over the series offset by its first sample y1 (methods notes §d.5).
	syy, sy, lyy, y1 []float64
	sxy, axy, bxy    [][]float64 // [regressor][voxel]

	// Neighbour pairs along +x, +y, +z (compact indices, both in the list) and their
	// products S0 = Σ y_a,t y_b,t, S+ = Σ_{t≥2} y_a,t y_b,t−1, S− = Σ_{t≥2} y_a,t−1 y_b,t.
	segs       [3][]segment
	s0, sp, sm [3][]float64
	runs       []segment // stretches of consecutive voxels (grid start, compact start, length)

	// ybuf[0] is the last folded volume (offset values), ybuf[1..pending] the pending ones;
	// xrow[b] is the design row of ybuf[b].
	ybuf    [batch + 1][]float64
	xrow    [batch + 1][]float64
	pending int
}

// AccumulatorBytes is an upper bound on the memory an Accumulator of p design columns over
// the given number of in-mask voxels allocates.
func AccumulatorBytes(p, voxels int) int64 {
	return int64(voxels) * int64(24*p+192)
}

// NewAccumulator prepares the sums for design x (volumes x columns) over the in-mask voxels
// (ascending linear indices into a grid of the given dims). It panics on a broken contract:
// nil or empty design, non-positive dims, voxels out of range or not ascending.
func NewAccumulator(x *mat.Dense, dims [3]int, voxels []int32) *Accumulator {
	if x == nil {
		panic("glm: nil design")
	}
	n, p := x.Dims()
	if n == 0 || p == 0 {
		panic(fmt.Sprintf("glm: design is %d x %d", n, p))
	}
	grid := 1
	for i, d := range dims {
		if d <= 0 {
			panic(fmt.Sprintf("glm: dims[%d] = %d, want > 0", i, d))
		}
		grid *= d
	}
	for i, v := range voxels {
		if v < 0 || int(v) >= grid {
			panic(fmt.Sprintf("glm: voxels[%d] = %d, want 0 to %d", i, v, grid-1))
		}
		if i > 0 && v <= voxels[i-1] {
			panic(fmt.Sprintf("glm: voxels[%d] = %d not above voxels[%d] = %d", i, v, i-1, voxels[i-1]))
		}
	}
	nv := len(voxels)
	a := &Accumulator{n: n, p: p, dims: dims, voxels: voxels, nv: nv}
	a.x = make([]float64, n*p)
	for t := 0; t < n; t++ {
		for j := 0; j < p; j++ {
			a.x[t*p+j] = x.At(t, j)
		}
	}
	slab := make([]float64, nv*(4+3*p))
	next := func() []float64 {
		s := slab[:nv:nv]
		slab = slab[nv:]
		return s
	}
	a.syy, a.sy, a.lyy, a.y1 = next(), next(), next(), next()
	a.sxy = make([][]float64, p)
	a.axy = make([][]float64, p)
	a.bxy = make([][]float64, p)
	for j := 0; j < p; j++ {
		a.sxy[j], a.axy[j], a.bxy[j] = next(), next(), next()
	}
	for b := range a.ybuf {
		a.ybuf[b] = make([]float64, nv)
		a.xrow[b] = make([]float64, p)
	}
	a.pairs()
	return a
}

// pairs finds the neighbour pairs along each axis with a monotone two-pointer scan.
func (a *Accumulator) pairs() {
	nx, ny, nz := a.dims[0], a.dims[1], a.dims[2]
	step := [3]int32{1, int32(nx), int32(nx * ny)}
	for ax := 0; ax < 3; ax++ {
		var pa, pb []int32
		w := 0
		for v, g := range a.voxels {
			i := int(g) % nx
			j := (int(g) / nx) % ny
			k := int(g) / (nx * ny)
			switch {
			case ax == 0 && i == nx-1, ax == 1 && j == ny-1, ax == 2 && k == nz-1:
				continue
			}
			target := g + step[ax]
			for w < a.nv && a.voxels[w] < target {
				w++
			}
			if w < a.nv && a.voxels[w] == target {
				pa = append(pa, int32(v))
				pb = append(pb, int32(w))
			}
		}
		// Consecutive pairs (a+1, b+1) form segments: the fold runs over contiguous slices.
		var segs []segment
		for k := range pa {
			if k > 0 && pa[k] == pa[k-1]+1 && pb[k] == pb[k-1]+1 {
				segs[len(segs)-1].n++
				continue
			}
			segs = append(segs, segment{a: pa[k], b: pb[k], n: 1})
		}
		a.segs[ax] = segs
		a.s0[ax] = make([]float64, len(pa))
		a.sp[ax] = make([]float64, len(pa))
		a.sm[ax] = make([]float64, len(pa))
	}
	// Runs of consecutive grid indices: the gather copies contiguous stretches.
	for v, g := range a.voxels {
		if v > 0 && g == a.voxels[v-1]+1 {
			a.runs[len(a.runs)-1].n++
			continue
		}
		a.runs = append(a.runs, segment{a: g, b: int32(v), n: 1})
	}
}

// segment is a stretch of n consecutive pairs (a+k, b+k), or for runs n consecutive grid
// indices a+k at compact indices b+k.
type segment struct{ a, b, n int32 }

// pairList expands the pairs of axis ax (ascending first member).
func (a *Accumulator) pairList(ax int) (pa, pb []int32) {
	n := len(a.s0[ax])
	pa, pb = make([]int32, 0, n), make([]int32, 0, n)
	for _, s := range a.segs[ax] {
		for k := int32(0); k < s.n; k++ {
			pa = append(pa, s.a+k)
			pb = append(pb, s.b+k)
		}
	}
	return pa, pb
}

// Bytes is the memory held by the accumulator's slabs.
func (a *Accumulator) Bytes() int64 {
	b := int64(a.nv) * 8 * int64(4+3*a.p+batch+1)
	for ax := 0; ax < 3; ax++ {
		b += int64(len(a.s0[ax]))*3*8 + int64(len(a.segs[ax]))*12
	}
	b += int64(len(a.runs)) * 12
	return b
}

// Volumes is the number of volumes added so far.
func (a *Accumulator) Volumes() int { return a.added }

// AddVolume folds the next volume (full grid, time order) into the sums. It panics when the
// volume does not have the grid's length (a caller bug).
func (a *Accumulator) AddVolume(vol []float32) {
	a.checkLen(len(vol))
	if b := a.slot(); b >= 0 {
		gather(a.ybuf[b], vol, a.runs, a.y1, b == 0)
		a.commit()
	}
}

// AddVolume64 is AddVolume for float64 volumes.
func (a *Accumulator) AddVolume64(vol []float64) {
	a.checkLen(len(vol))
	if b := a.slot(); b >= 0 {
		gather(a.ybuf[b], vol, a.runs, a.y1, b == 0)
		a.commit()
	}
}

func (a *Accumulator) checkLen(n int) {
	if g := a.dims[0] * a.dims[1] * a.dims[2]; n != g {
		panic(fmt.Sprintf("glm: volume has %d voxels, want %d", n, g))
	}
}

// slot returns the ybuf index the next volume goes to, or −1 when the design has no row for
// it (Fit reports the mismatch). Index 0 means the first volume: it sets y1.
func (a *Accumulator) slot() int {
	if a.added >= a.n {
		a.added++
		return -1
	}
	if a.added == 0 {
		return 0
	}
	return a.pending + 1
}

func (a *Accumulator) commit() {
	t := a.added
	a.added++
	if t == 0 {
		copy(a.xrow[0], a.x[:a.p])
		return
	}
	a.pending++
	copy(a.xrow[a.pending], a.x[t*a.p:(t+1)*a.p])
	if a.pending == batch {
		a.flush()
	}
}

// gather writes the offset in-mask values of vol into dst, run by run; for the first volume
// it records each voxel's first sample in y1 and writes zeros.
func gather[T float32 | float64](dst []float64, vol []T, runs []segment, y1 []float64, first bool) {
	for _, r := range runs {
		src := vol[r.a : r.a+r.n]
		d := dst[r.b : r.b+r.n]
		y := y1[r.b : r.b+r.n]
		d = d[:len(src)]
		y = y[:len(src)]
		if first {
			for i, v := range src {
				y[i] = float64(v)
				d[i] = 0
			}
			continue
		}
		for i, v := range src {
			d[i] = float64(v) - y[i]
		}
	}
}

// flush folds the pending volumes into the sums. Missing batch slots are zero-filled (zero
// data and zero design rows add nothing to any sum), so one kernel serves every count.
func (a *Accumulator) flush() {
	k := a.pending
	if k == 0 {
		return
	}
	for b := k + 1; b <= batch; b++ {
		clear(a.ybuf[b])
		clear(a.xrow[b])
	}
	nv := a.nv
	// Voxel chunks keep the pending values in cache while every regressor's slabs stream by.
	for lo := 0; lo < nv; lo += chunk {
		hi := min(lo+chunk, nv)
		y0, y1, y2, y3, y4 := a.ybuf[0][lo:hi], a.ybuf[1][lo:hi], a.ybuf[2][lo:hi], a.ybuf[3][lo:hi], a.ybuf[4][lo:hi]
		for j := 0; j < a.p; j++ {
			foldRegressor(a.sxy[j][lo:hi], a.axy[j][lo:hi], a.bxy[j][lo:hi], y0, y1, y2, y3, y4,
				a.xrow[0][j], a.xrow[1][j], a.xrow[2][j], a.xrow[3][j], a.xrow[4][j])
		}
		foldSeries(a.syy[lo:hi], a.sy[lo:hi], a.lyy[lo:hi], y0, y1, y2, y3, y4)
	}
	y0, y1, y2, y3, y4 := a.ybuf[0][:nv], a.ybuf[1][:nv], a.ybuf[2][:nv], a.ybuf[3][:nv], a.ybuf[4][:nv]
	for ax := 0; ax < 3; ax++ {
		foldPairs(a.s0[ax], a.sp[ax], a.sm[ax], a.segs[ax], y0, y1, y2, y3, y4)
	}
	a.ybuf[0], a.ybuf[k] = a.ybuf[k], a.ybuf[0]
	a.xrow[0], a.xrow[k] = a.xrow[k], a.xrow[0]
	a.pending = 0
}

// foldRegressor: s += Σ_b x_b y_b, acc += Σ_b x_b y_{b−1}, bcc += Σ_b x_{b−1} y_b, over long
// contiguous slices (x0 is the design row of y0, the previous volume).
func foldRegressor(s, acc, bcc, y0, y1, y2, y3, y4 []float64, x0, x1, x2, x3, x4 float64) {
	n := len(s)
	acc, bcc = acc[:n], bcc[:n]
	y0, y1, y2, y3, y4 = y0[:n], y1[:n], y2[:n], y3[:n], y4[:n]
	for v := range s {
		a0, a1, a2, a3, a4 := y0[v], y1[v], y2[v], y3[v], y4[v]
		s[v] += x1*a1 + x2*a2 + x3*a3 + x4*a4
		acc[v] += x1*a0 + x2*a1 + x3*a2 + x4*a3
		bcc[v] += x0*a1 + x1*a2 + x2*a3 + x3*a4
	}
}

func foldSeries(syy, sy, lyy, y0, y1, y2, y3, y4 []float64) {
	n := len(syy)
	sy, lyy = sy[:n], lyy[:n]
	y0, y1, y2, y3, y4 = y0[:n], y1[:n], y2[:n], y3[:n], y4[:n]
	for v := range syy {
		a0, a1, a2, a3, a4 := y0[v], y1[v], y2[v], y3[v], y4[v]
		syy[v] += a1*a1 + a2*a2 + a3*a3 + a4*a4
		sy[v] += a1 + a2 + a3 + a4
		lyy[v] += a1*a0 + a2*a1 + a3*a2 + a4*a3
	}
}

func foldPairs(s0, sp, sm []float64, segs []segment, y0, y1, y2, y3, y4 []float64) {
	off := int32(0)
	for _, sg := range segs {
		n := sg.n
		q0, qp, qm := s0[off:off+n], sp[off:off+n], sm[off:off+n]
		off += n
		u0, u1, u2, u3, u4 := y0[sg.a:sg.a+n], y1[sg.a:sg.a+n], y2[sg.a:sg.a+n], y3[sg.a:sg.a+n], y4[sg.a:sg.a+n]
		w0, w1, w2, w3, w4 := y0[sg.b:sg.b+n], y1[sg.b:sg.b+n], y2[sg.b:sg.b+n], y3[sg.b:sg.b+n], y4[sg.b:sg.b+n]
		qp, qm = qp[:len(q0)], qm[:len(q0)]
		u0, u1, u2, u3, u4 = u0[:len(q0)], u1[:len(q0)], u2[:len(q0)], u3[:len(q0)], u4[:len(q0)]
		w0, w1, w2, w3, w4 = w0[:len(q0)], w1[:len(q0)], w2[:len(q0)], w3[:len(q0)], w4[:len(q0)]
		for k := range q0 {
			a0, a1, a2, a3, a4 := u0[k], u1[k], u2[k], u3[k], u4[k]
			b0, b1, b2, b3, b4 := w0[k], w1[k], w2[k], w3[k], w4[k]
			q0[k] += a1*b1 + a2*b2 + a3*b3 + a4*b4
			qp[k] += a1*b0 + a2*b1 + a3*b2 + a4*b3
			qm[k] += a0*b1 + a1*b2 + a2*b3 + a3*b4
		}
	}
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
