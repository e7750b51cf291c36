package glm

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// batch is the number of volumes folded into the accumulators at once. Each accumulator
// slab is then read and written once per batch instead of once per volume, which cuts the
// memory traffic of the hot loop by this factor. With the previous volume the kernels hold
// batch+1 values per voxel and batch+1 design values: 16 float64 registers, the number Go's
// WebAssembly backend has (more spills to memory).
const batch = 7

// FoldVolumes is the number of volumes AddVolume collects before it folds them into the sums
// in one burst. A producer that decodes volumes beside it should keep at least this many
// (plus a few) ready, or it waits during every fold while the fold then waits for it.
const FoldVolumes = batch

// stride is the number of values per voxel a kernel reads: the last folded volume and the
// batch pending ones. flush interleaves them per chunk of voxels (win[v*stride + b]) so
// that a kernel reads one voxel's values from one base address.
const stride = batch + 1

// chunk is the number of voxels folded per block in flush (512 voxels of 8 values: 32 KiB,
// within L1/L2 while every regressor's slab streams by).
const chunk = 512

// Accumulator holds the single-pass sufficient statistics of a voxel-wise GLM (methods notes
// §d.4, §d.5, §f.2). Every per-voxel quantity is a contiguous []float64 slab over the in-mask
// voxels (structure of arrays); no array of volumes x voxels is ever formed.
//
// Memory, in bytes per in-mask voxel, with p design columns: 8·(3p + 4) for Syy, Sy, Lyy, the
// first sample, Sxy, Axy and Bxy; 8·(batch + 1) = 64 for the pending volumes; at most 3·3·8 = 72
// for the neighbour products S0, S+, S−; and at most 4·12 = 48 for the run and segment lists
// (in a brain mask far less: one entry per stretch of consecutive voxels). That is at most
// 24p + 216 bytes per voxel (696 for p = 20; 200 000 voxels: 139 MB), plus 32 KiB for the
// interleaved chunk of flush. AccumulatorBytes returns the bound for a caller that checks
// limits before allocating. Fit transiently needs a few more slabs (β: 8p per voxel, kept in the Fit; ρ, σ², mean: 8 each).
type Accumulator struct {
	n, p   int
	x      []float64 // n x p, row-major copy of the design
	dims   [3]int
	voxels []int32
	nv     int

	added int // volumes added (beyond n they are counted but ignored)

	// Per voxel, over the series offset by its first sample y1 (methods notes §d.5).
	syy, sy, lyy, y1 []float64
	// sxy[j][3v], sxy[j][3v+1], sxy[j][3v+2]: Sxy, Axy and Bxy of regressor j at voxel v,
	// interleaved so that the fold reads and writes them from one address.
	sxy [][]float64

	// Neighbour pairs along +x, +y, +z (compact indices, both in the list) and their
	// products S0 = Σ y_a,t y_b,t, S+ = Σ_{t≥2} y_a,t y_b,t−1, S− = Σ_{t≥2} y_a,t−1 y_b,t.
	segs       [3][]segment
	s0, sp, sm [3][]float64
	runs       []segment // stretches of consecutive voxels (grid start, compact start, length)

	// ybuf[0] is the last folded volume (offset values), ybuf[1..pending] the pending ones,
	// each contiguous over the voxels; win is flush's interleaved copy of one chunk;
	// xrow[j*stride + b] is design column j at the volume of ybuf[b].
	ybuf    [stride][]float64
	win     []float64
	xrow    []float64
	pending int
}

// AccumulatorBytes is an upper bound on the memory an Accumulator of p design columns over
// the given number of in-mask voxels allocates.
func AccumulatorBytes(p, voxels int) int64 {
	return int64(voxels)*int64(24*p+216) + chunk*stride*8
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
	next := func(k int) []float64 {
		s := slab[: k*nv : k*nv]
		slab = slab[k*nv:]
		return s
	}
	a.syy, a.sy, a.lyy, a.y1 = next(1), next(1), next(1), next(1)
	a.sxy = make([][]float64, p)
	for j := 0; j < p; j++ {
		a.sxy[j] = next(3)
	}
	for b := range a.ybuf {
		a.ybuf[b] = make([]float64, nv)
	}
	a.win = make([]float64, chunk*stride)
	a.xrow = make([]float64, p*stride)
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
	b := int64(a.nv)*8*int64(4+3*a.p+stride) + int64(len(a.win))*8
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
		a.commit(b)
	}
}

// AddVolume64 is AddVolume for float64 volumes.
func (a *Accumulator) AddVolume64(vol []float64) {
	a.checkLen(len(vol))
	if b := a.slot(); b >= 0 {
		gather(a.ybuf[b], vol, a.runs, a.y1, b == 0)
		a.commit(b)
	}
}

func (a *Accumulator) checkLen(n int) {
	if g := a.dims[0] * a.dims[1] * a.dims[2]; n != g {
		panic(fmt.Sprintf("glm: volume has %d voxels, want %d", n, g))
	}
}

// slot returns the ybuf slot the next volume goes to, or −1 when the design has no row for
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

func (a *Accumulator) commit(b int) {
	t := a.added
	a.added++
	a.setRow(b, t)
	if t == 0 {
		return
	}
	a.pending++
	if a.pending == batch {
		a.flush()
	}
}

// setRow stores design row t as the coefficients of slot b.
func (a *Accumulator) setRow(b, t int) {
	for j, v := range a.x[t*a.p : (t+1)*a.p] {
		a.xrow[j*stride+b] = v
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

// DesignSums writes, for design column j and the in-mask voxels lo..hi−1 (indices into the
// voxel list), S = Σ_t x_tj y_t into s and C = Σ_{t≥2} (x_tj y_{t−1} + x_{t−1,j} y_t) into c, of
// each voxel's series offset by its first sample (methods notes §d.5). Another accumulator of
// the same pass (the null check's) reads the real design's sums here instead of summing them
// again. Valid once every volume has been added; pending volumes are folded first.
func (a *Accumulator) DesignSums(j, lo, hi int, s, c []float64) {
	a.flush()
	src := a.sxy[j][3*lo : 3*hi]
	s, c = s[:hi-lo], c[:hi-lo]
	for i := range s {
		o := (*[3]float64)(src[3*i : 3*i+3])
		s[i], c[i] = o[0], o[1]+o[2]
	}
}

// SeriesSums writes, for the in-mask voxels lo..hi−1, Σ_t y_t², Σ_{t≥2} y_t y_{t−1} and the last
// sample y_n of each voxel's offset series (as DesignSums).
func (a *Accumulator) SeriesSums(lo, hi int, syy, lyy, last []float64) {
	a.flush()
	copy(syy[:hi-lo], a.syy[lo:hi])
	copy(lyy[:hi-lo], a.lyy[lo:hi])
	copy(last[:hi-lo], a.ybuf[0][lo:hi])
}

// last is voxel v's last folded value (offset by its first sample).
func (a *Accumulator) last(v int) float64 { return a.ybuf[0][v] }

// flush folds the pending volumes into the sums. Missing batch slots are zero-filled (zero
// data and zero design rows add nothing to any sum), so one kernel serves every count.
func (a *Accumulator) flush() {
	k := a.pending
	if k == 0 {
		return
	}
	nv := a.nv
	for b := k + 1; b < stride; b++ {
		clear(a.ybuf[b])
		for j := 0; j < a.p; j++ {
			a.xrow[j*stride+b] = 0
		}
	}
	// Voxel chunks: the chunk's values are interleaved into win (in cache) while every
	// regressor's slabs stream by.
	for lo := 0; lo < nv; lo += chunk {
		hi := min(lo+chunk, nv)
		y := a.win[:(hi-lo)*stride]
		interleave(y, &a.ybuf, lo, hi)
		for j := 0; j < a.p; j++ {
			foldRegressor(a.sxy[j][3*lo:3*hi], y, (*[stride]float64)(a.xrow[j*stride:(j+1)*stride]))
		}
		foldSeries(a.syy[lo:hi], a.sy[lo:hi], a.lyy[lo:hi], y)
	}
	for ax := 0; ax < 3; ax++ {
		foldPairs(a.s0[ax], a.sp[ax], a.sm[ax], a.segs[ax], &a.ybuf)
	}
	// The last pending volume becomes the previous one of the next batch.
	a.ybuf[0], a.ybuf[k] = a.ybuf[k], a.ybuf[0]
	for j := 0; j < a.p; j++ {
		a.xrow[j*stride] = a.xrow[j*stride+k]
	}
	a.pending = 0
}

// interleave copies voxels lo..hi−1 of the stride volumes into dst, voxel by voxel.
func interleave(dst []float64, ybuf *[stride][]float64, lo, hi int) {
	n := hi - lo
	y0, y1, y2, y3 := ybuf[0][lo:hi], ybuf[1][lo:hi], ybuf[2][lo:hi], ybuf[3][lo:hi]
	y4, y5, y6, y7 := ybuf[4][lo:hi], ybuf[5][lo:hi], ybuf[6][lo:hi], ybuf[7][lo:hi]
	y0, y1, y2, y3, y4, y5, y6, y7 = y0[:n], y1[:n], y2[:n], y3[:n], y4[:n], y5[:n], y6[:n], y7[:n]
	dst = dst[:n*stride]
	for v := 0; v < n; v++ {
		q := (*[stride]float64)(dst[v*stride : v*stride+stride])
		q[0], q[1], q[2], q[3], q[4], q[5], q[6], q[7] = y0[v], y1[v], y2[v], y3[v], y4[v], y5[v], y6[v], y7[v]
	}
}

// foldRegressor adds one batch to one regressor's interleaved sums s (Sxy, Axy, Bxy per
// voxel): Sxy += Σ_b x_b y_b, Axy += Σ_b x_b y_{b−1}, Bxy += Σ_b x_{b−1} y_b over b = 1..batch,
// where y holds stride values per voxel (y_0 the previous volume) and x the design values of
// the same slots. The body is fully unrolled over the batch: one long loop over voxels whose
// values stay in registers, which Go's WebAssembly output runs at close to native speed.
func foldRegressor(s, y []float64, x *[stride]float64) {
	n := len(s) / 3
	y = y[:n*stride]
	x0, x1, x2, x3, x4, x5, x6, x7 := x[0], x[1], x[2], x[3], x[4], x[5], x[6], x[7]
	for v := 0; v < n; v++ {
		q := (*[stride]float64)(y[v*stride : v*stride+stride])
		o := (*[3]float64)(s[3*v : 3*v+3])
		a0, a1, a2, a3, a4, a5, a6, a7 := q[0], q[1], q[2], q[3], q[4], q[5], q[6], q[7]
		o[0] += x1*a1 + x2*a2 + x3*a3 + x4*a4 + x5*a5 + x6*a6 + x7*a7
		o[1] += x1*a0 + x2*a1 + x3*a2 + x4*a3 + x5*a4 + x6*a5 + x7*a6
		o[2] += x0*a1 + x1*a2 + x2*a3 + x3*a4 + x4*a5 + x5*a6 + x6*a7
	}
}

// foldSeries adds one batch to Syy, Sy and Lyy.
func foldSeries(syy, sy, lyy, y []float64) {
	n := len(syy)
	sy, lyy = sy[:n], lyy[:n]
	y = y[:n*stride]
	for v := range syy {
		q := (*[stride]float64)(y[v*stride : v*stride+stride])
		a0, a1, a2, a3, a4, a5, a6, a7 := q[0], q[1], q[2], q[3], q[4], q[5], q[6], q[7]
		syy[v] += a1*a1 + a2*a2 + a3*a3 + a4*a4 + a5*a5 + a6*a6 + a7*a7
		sy[v] += a1 + a2 + a3 + a4 + a5 + a6 + a7
		lyy[v] += a1*a0 + a2*a1 + a3*a2 + a4*a3 + a5*a4 + a6*a5 + a7*a6
	}
}

// foldPairs adds one batch to the neighbour products of one axis, segment by segment.
func foldPairs(s0, sp, sm []float64, segs []segment, y *[stride][]float64) {
	off := int32(0)
	for _, sg := range segs {
		n := sg.n
		q0, qp, qm := s0[off:off+n], sp[off:off+n], sm[off:off+n]
		off += n
		qp, qm = qp[:len(q0)], qm[:len(q0)]
		ua, ub := sg.a, sg.b
		u0, u1, u2, u3 := y[0][ua:ua+n], y[1][ua:ua+n], y[2][ua:ua+n], y[3][ua:ua+n]
		u4, u5, u6, u7 := y[4][ua:ua+n], y[5][ua:ua+n], y[6][ua:ua+n], y[7][ua:ua+n]
		w0, w1, w2, w3 := y[0][ub:ub+n], y[1][ub:ub+n], y[2][ub:ub+n], y[3][ub:ub+n]
		w4, w5, w6, w7 := y[4][ub:ub+n], y[5][ub:ub+n], y[6][ub:ub+n], y[7][ub:ub+n]
		m := len(q0)
		u0, u1, u2, u3, u4, u5, u6, u7 = u0[:m], u1[:m], u2[:m], u3[:m], u4[:m], u5[:m], u6[:m], u7[:m]
		w0, w1, w2, w3, w4, w5, w6, w7 = w0[:m], w1[:m], w2[:m], w3[:m], w4[:m], w5[:m], w6[:m], w7[:m]
		for k := range q0 {
			a0, a1, a2, a3, a4, a5, a6, a7 := u0[k], u1[k], u2[k], u3[k], u4[k], u5[k], u6[k], u7[k]
			b0, b1, b2, b3, b4, b5, b6, b7 := w0[k], w1[k], w2[k], w3[k], w4[k], w5[k], w6[k], w7[k]
			q0[k] += a1*b1 + a2*b2 + a3*b3 + a4*b4 + a5*b5 + a6*b6 + a7*b7
			qp[k] += a1*b0 + a2*b1 + a3*b2 + a4*b3 + a5*b4 + a6*b5 + a7*b6
			qm[k] += a0*b1 + a1*b2 + a2*b3 + a3*b4 + a4*b5 + a5*b6 + a6*b7
		}
	}
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
