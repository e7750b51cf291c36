package nullcheck

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// block is the number of volumes folded into the sums per pass over the slabs.
const block = 4

// Accumulator holds, per in-mask voxel, the sums the chance designs need beyond what the
// real fit has, all after subtracting the voxel's first sample (methods d.5):
//
//	for every null column j of every chance design:  S_j = Σ_t x_tj y_t,
//	                                                  C_j = Σ_t y_t (x_{t−1,j} + x_{t+1,j})
//	(x_0 = x_{n+1} = 0; float32 slabs), and the same two for every real design column,
//	with Syy = Σ y_t², Lyy = Σ_{t≥2} y_t y_{t−1} and the last sample y_n (float64).
//
// The first sample y_1 is 0 after the offset, so these are all that the Prais–Winsten
// normal equations of methods d.4 need. The sums are a matrix product (design
// coefficients × volumes); volumes are buffered in blocks of four, interleaved per voxel,
// and every slab is updated by one long contiguous loop per block.
type Accumulator struct {
	d      *Designs
	n, m   int // volumes, in-mask voxels
	p, q   int // real columns, null columns per design
	nulls  int // K·q
	whiten bool
	dims   [3]int
	voxels []int32

	coef32             [][]float32 // 2·K·q rows × n: S rows (all null columns), then C rows
	coef64             [][]float64 // 2·p rows × n: S rows, then C rows of the real design
	s32                []float32   // 2·K·q slabs of m
	s64                []float64   // 2·p slabs of m
	syy, lyy, prev, y1 []float64
	yb32               []float32 // block × m, interleaved: yb[block·v + slot]
	yb64               []float64
	added              int
	t0                 int // time index of the first buffered volume
	nb                 int // buffered volumes

	x    *mat.Dense // real design
	sums designSums
	real RealSums // when set, the real design's sums come from here (s64, syy, lyy, prev unused)
}

// RealSums gives the real design's per-voxel sums when another accumulator of the same pass
// already gathers them (package glm's does), so that they are not summed twice. Voxels are
// indices lo..hi−1 into the same voxel list; every series is offset by its first sample.
type RealSums interface {
	// DesignSums writes S_j = Σ_t x_tj y_t into s and C_j = Σ_t y_t (x_{t−1,j} + x_{t+1,j})
	// (x_0 = x_{n+1} = 0) into c, for real design column j.
	DesignSums(j, lo, hi int, s, c []float64)
	// SeriesSums writes Σ_t y_t², Σ_{t≥2} y_t y_{t−1} and the last sample y_n.
	SeriesSums(lo, hi int, syy, lyy, last []float64)
}

// Bytes returns the memory an accumulator for these designs over the given number of
// voxels holds, for a caller that checks limits before allocating.
func Bytes(d *Designs, p, voxels int, whiten bool) int64 {
	q := int64(len(d.Columns))
	sets := int64(1)
	if whiten {
		sets = 2
	}
	per := 4*sets*int64(d.K)*q + 8*sets*int64(p) + 8*4 + block*(4+8)
	return per * int64(voxels)
}

// SharedBytes is Bytes for an accumulator made by NewSharedAccumulator.
func SharedBytes(d *Designs, voxels int, whiten bool) int64 {
	q := int64(len(d.Columns))
	sets := int64(1)
	if whiten {
		sets = 2
	}
	return (4*sets*int64(d.K)*q + 8 + block*4) * int64(voxels)
}

// NewAccumulator prepares the sums of the chance designs d (drawn from the real design x,
// volumes × p) over the in-mask voxels (ascending linear indices into a grid of dims).
// It panics on a broken contract (lengths that do not match).
//
// With whiten false (ordinary least squares) only the S sums are kept: Solve must then be
// given no ρ. That halves the cost of the pass.
func NewAccumulator(d *Designs, x *mat.Dense, dims [3]int, voxels []int32, whiten bool) *Accumulator {
	return newAccumulator(d, x, dims, voxels, whiten, nil)
}

// NewSharedAccumulator is NewAccumulator for a pass in which real (package glm's accumulator
// over the same voxels and design x) already gathers the real design's sums: this one then
// sums only the chance designs' columns and reads the rest from real in Solve.
func NewSharedAccumulator(d *Designs, x *mat.Dense, dims [3]int, voxels []int32, whiten bool, real RealSums) *Accumulator {
	if real == nil {
		panic("nullcheck: nil RealSums")
	}
	return newAccumulator(d, x, dims, voxels, whiten, real)
}

func newAccumulator(d *Designs, x *mat.Dense, dims [3]int, voxels []int32, whiten bool, real RealSums) *Accumulator {
	n, p := x.Dims()
	q := len(d.Columns)
	if len(d.X) != d.K {
		panic(fmt.Sprintf("nullcheck: %d designs, want %d", len(d.X), d.K))
	}
	g := dims[0] * dims[1] * dims[2]
	for i, v := range voxels {
		if int(v) < 0 || int(v) >= g || (i > 0 && v <= voxels[i-1]) {
			panic("nullcheck: voxel list out of range or not ascending")
		}
	}
	m := len(voxels)
	a := &Accumulator{d: d, n: n, m: m, p: p, q: q, nulls: d.K * q, dims: dims, voxels: voxels, x: x, whiten: whiten, real: real}
	sets := 1 // S rows only
	if whiten {
		sets = 2 // S rows, then C rows
	}
	a.coef32 = make([][]float32, sets*a.nulls)
	for k, xd := range d.X {
		if r, c := xd.Dims(); r != n || c != q {
			panic(fmt.Sprintf("nullcheck: design %d is %d×%d, want %d×%d", k, r, c, n, q))
		}
		for j := range q {
			s, c := shiftRows(xd, j)
			a.coef32[k*q+j] = toF32(s)
			if whiten {
				a.coef32[a.nulls+k*q+j] = toF32(c)
			}
		}
	}
	a.s32 = make([]float32, sets*a.nulls*m)
	a.y1 = make([]float64, m)
	a.yb32 = make([]float32, block*m)
	a.sums = newDesignSums(d, x)
	if real != nil {
		return a
	}
	a.coef64 = make([][]float64, sets*p)
	for j := range p {
		s, c := shiftRows(x, j)
		a.coef64[j] = s
		if whiten {
			a.coef64[p+j] = c
		}
	}
	a.s64 = make([]float64, sets*p*m)
	a.syy = make([]float64, m)
	a.lyy = make([]float64, m)
	a.prev = make([]float64, m)
	a.yb64 = make([]float64, block*m)
	return a
}

// shiftRows returns column j of x and z_t = x_{t−1,j} + x_{t+1,j} (zero beyond the ends).
func shiftRows(x *mat.Dense, j int) (s, c []float64) {
	n, _ := x.Dims()
	s = make([]float64, n)
	c = make([]float64, n)
	for t := range n {
		s[t] = x.At(t, j)
		if t > 0 {
			c[t] += x.At(t-1, j)
		}
		if t < n-1 {
			c[t] += x.At(t+1, j)
		}
	}
	return s, c
}

func toF32(x []float64) []float32 {
	out := make([]float32, len(x))
	for i, v := range x {
		out[i] = float32(v)
	}
	return out
}

// Volumes is the number of volumes added so far.
func (a *Accumulator) Volumes() int { return a.added }

// AddVolume folds the next volume (full grid, time order) into the sums. Volumes beyond
// the design's row count are counted and ignored; Solve reports the mismatch.
func (a *Accumulator) AddVolume(vol []float32) {
	if len(vol) != a.dims[0]*a.dims[1]*a.dims[2] {
		panic(fmt.Sprintf("nullcheck: volume has %d voxels, want %d", len(vol), a.dims[0]*a.dims[1]*a.dims[2]))
	}
	t := a.added
	a.added++
	if t >= a.n {
		return
	}
	slot := a.nb
	y1 := a.y1[:a.m]
	if t == 0 {
		for k, v := range a.voxels {
			y1[k] = float64(vol[v])
		}
	}
	if a.real != nil {
		yb32 := a.yb32[:block*a.m]
		for k, v := range a.voxels {
			yb32[block*k+slot] = float32(float64(vol[v]) - y1[k])
		}
	} else {
		a.addSeries(vol, slot)
	}
	a.nb++
	if a.nb == block || t == a.n-1 {
		a.flush()
	}
}

// addSeries buffers volume slot of the block and sums the real design's series terms.
func (a *Accumulator) addSeries(vol []float32, slot int) {
	yb32, yb64 := a.yb32[:block*a.m], a.yb64[:block*a.m]
	syy, lyy, prev, y1 := a.syy[:a.m], a.lyy[:a.m], a.prev[:a.m], a.y1[:a.m]
	for k, v := range a.voxels {
		y := float64(vol[v]) - y1[k]
		syy[k] += y * y
		lyy[k] += y * prev[k]
		prev[k] = y
		yb32[block*k+slot] = float32(y)
		yb64[block*k+slot] = y
	}
}

// flush adds the buffered volumes to every slab, one chunk of voxels at a time so that the
// chunk's buffered volumes stay in the first-level cache while every slab passes over them.
func (a *Accumulator) flush() {
	nb, t0, m := a.nb, a.t0, a.m
	c32 := make([][block]float32, len(a.coef32))
	for r := range c32 {
		copy(c32[r][:nb], a.coef32[r][t0:t0+nb])
	}
	c64 := make([][block]float64, len(a.coef64))
	for r := range c64 {
		copy(c64[r][:nb], a.coef64[r][t0:t0+nb])
	}
	for v0 := 0; v0 < m; v0 += flushChunk {
		v1 := min(v0+flushChunk, m)
		addRows(a.s32, m, v0, v1, a.yb32[block*v0:block*v1], c32)
		if a.real == nil {
			addRows(a.s64, m, v0, v1, a.yb64[block*v0:block*v1], c64)
		}
	}
	a.t0 += nb
	a.nb = 0
}

// flushChunk is the number of voxels per chunk of flush (16 KB of float32 volumes).
const flushChunk = 1024

// addRows updates voxels v0..v1−1 of every slab (slab r at s[r·m:]) with the block yb.
func addRows[T float](s []T, m, v0, v1 int, yb []T, c [][block]T) {
	r := 0
	for ; r+1 < len(c); r += 2 {
		axpy2(s[r*m+v0:r*m+v1], s[(r+1)*m+v0:(r+1)*m+v1], yb, &c[r], &c[r+1])
	}
	if r < len(c) {
		axpy1(s[r*m+v0:r*m+v1], yb, &c[r])
	}
}

type float interface{ ~float32 | ~float64 }

// axpy2 adds to two slabs the block of volumes yb (interleaved per voxel) weighted by the
// rows' coefficients: s_i[v] += Σ_k c_i[k]·yb[block·v+k]. Unused slots carry zero
// coefficients.
func axpy2[T float](s0, s1, yb []T, c0, c1 *[block]T) {
	m := len(s0)
	s1 = s1[:m]
	yb = yb[:block*m]
	a0, a1, a2, a3 := c0[0], c0[1], c0[2], c0[3]
	b0, b1, b2, b3 := c1[0], c1[1], c1[2], c1[3]
	for v := range m {
		y := yb[block*v : block*v+block : block*v+block]
		y0, y1, y2, y3 := y[0], y[1], y[2], y[3]
		s0[v] += a0*y0 + a1*y1 + a2*y2 + a3*y3
		s1[v] += b0*y0 + b1*y1 + b2*y2 + b3*y3
	}
}

func axpy1[T float](s0, yb []T, c0 *[block]T) {
	m := len(s0)
	yb = yb[:block*m]
	a0, a1, a2, a3 := c0[0], c0[1], c0[2], c0[3]
	for v := range m {
		y := yb[block*v : block*v+block : block*v+block]
		s0[v] += a0*y[0] + a1*y[1] + a2*y[2] + a3*y[3]
	}
}
