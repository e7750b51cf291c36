package glm

import "math"

// blockVoxels is the number of voxels whose whitened systems are solved together. The p x p
// work is laid out across the block (structure of arrays: element (i, k) of every voxel's
// matrix is one contiguous run of blockVoxels values), so every inner loop runs over the
// block's voxels: long and contiguous instead of a loop over p per voxel, which Go's
// WebAssembly output executes several times slower than native code.
const blockVoxels = 128

// blockSolver holds the scratch of the blocked Prais–Winsten solve (methods notes §d.4): per
// voxel of the block the lower triangle of X̃'X̃ (then its Cholesky factor L), X̃'ỹ, β̃, ỹ'ỹ.
type blockSolver struct {
	d     *design
	p     int
	g     []float64 // packed lower triangle: element (i, k), k ≤ i, at tri(i, k)*blockVoxels
	inv   []float64 // 1 / L_jj
	rhs   []float64 // X̃'ỹ, [j*blockVoxels + voxel]
	beta  []float64 // β̃
	w     []float64 // L⁻¹c for a t contrast
	yy    []float64 // ỹ'ỹ, then RSS
	ssq   []float64
	wa    []float64 // 1 + ρ²
	wr    []float64 // ρ
	wr2   []float64 // ρ²
	bad   []bool    // X̃'X̃ not positive definite
	lv    []float64 // one voxel's factor, row-major p x p, for F contrasts
	coef  []float64
	index []int // tri(i, k) for row-major (i, k)
}

func newBlockSolver(d *design) *blockSolver {
	p, B := d.p, blockVoxels
	nt := p * (p + 1) / 2
	b := &blockSolver{d: d, p: p}
	b.g = make([]float64, nt*B)
	b.inv, b.rhs, b.beta, b.w = make([]float64, p*B), make([]float64, p*B), make([]float64, p*B), make([]float64, p*B)
	b.yy, b.ssq, b.wa, b.wr, b.wr2 = make([]float64, B), make([]float64, B), make([]float64, B), make([]float64, B), make([]float64, B)
	b.bad = make([]bool, B)
	b.lv = make([]float64, p*p)
	b.coef = make([]float64, p)
	b.index = make([]int, p*p)
	for i := 0; i < p; i++ {
		for k := 0; k <= i; k++ {
			b.index[i*p+k] = i*(i+1)/2 + k
		}
	}
	return b
}

// el returns the run of element (i, k), k ≤ i.
func (b *blockSolver) el(i, k int) []float64 {
	o := b.index[i*b.p+k] * blockVoxels
	return b.g[o : o+blockVoxels : o+blockVoxels]
}

func (b *blockSolver) row(s []float64, j int) []float64 {
	return s[j*blockVoxels : (j+1)*blockVoxels : (j+1)*blockVoxels]
}

// solve builds X̃'X̃ for every slot, factors it, solves for β̃ and leaves RSS = ỹ'ỹ − β̃'X̃'ỹ in
// yy; bad marks slots whose matrix is not positive definite.
func (b *blockSolver) solve() {
	d, p := b.d, b.p
	for i := 0; i < p; i++ {
		for k := 0; k <= i; k++ {
			e := i*p + k
			gramRun(b.el(i, k), b.wa, b.wr, b.wr2, d.sxx[e], d.q1[e], d.q2[e])
		}
	}
	clear(b.bad)
	// Cholesky, left-looking, column by column (as cholesky, across the block).
	for j := 0; j < p; j++ {
		djj := b.el(j, j)
		b.subDots(djj, j, j, j)
		inv := b.row(b.inv, j)
		for v, x := range djj {
			if !(x > 0) {
				b.bad[v] = true
				x = 1
			}
			x = math.Sqrt(x)
			djj[v] = x
			inv[v] = 1 / x
		}
		for i := j + 1; i < p; i++ {
			dij := b.el(i, j)
			b.subDots(dij, i, j, j)
			mulRun(dij, inv)
		}
	}
	copy(b.beta, b.rhs)
	b.forward(b.beta)
	// L' β = w, from the last row up.
	for i := p - 1; i >= 0; i-- {
		bi := b.row(b.beta, i)
		k := i + 1
		for ; k+4 <= p; k += 4 {
			subMul4(bi, b.el(k, i), b.row(b.beta, k), b.el(k+1, i), b.row(b.beta, k+1),
				b.el(k+2, i), b.row(b.beta, k+2), b.el(k+3, i), b.row(b.beta, k+3))
		}
		for ; k < p; k++ {
			subMul(bi, b.el(k, i), b.row(b.beta, k))
		}
		mulRun(bi, b.row(b.inv, i))
	}
	for j := 0; j < p; j++ {
		subMul(b.yy, b.row(b.beta, j), b.row(b.rhs, j))
	}
}

// subDots: d −= Σ_{k<kmax} L_ik L_jk for every slot, four terms per pass over d.
func (b *blockSolver) subDots(d []float64, i, j, kmax int) {
	k := 0
	for ; k+4 <= kmax; k += 4 {
		subMul4(d, b.el(i, k), b.el(j, k), b.el(i, k+1), b.el(j, k+1),
			b.el(i, k+2), b.el(j, k+2), b.el(i, k+3), b.el(j, k+3))
	}
	for ; k < kmax; k++ {
		subMul(d, b.el(i, k), b.el(j, k))
	}
}

// forward solves L w = w in place for every slot.
func (b *blockSolver) forward(w []float64) {
	for i := 0; i < b.p; i++ {
		wi := b.row(w, i)
		k := 0
		for ; k+4 <= i; k += 4 {
			subMul4(wi, b.el(i, k), b.row(w, k), b.el(i, k+1), b.row(w, k+1),
				b.el(i, k+2), b.row(w, k+2), b.el(i, k+3), b.row(w, k+3))
		}
		for ; k < i; k++ {
			subMul(wi, b.el(i, k), b.row(w, k))
		}
		mulRun(wi, b.row(b.inv, i))
	}
}

// tSE writes into ssq, for every slot, c'(X̃'X̃)⁻¹c = |L⁻¹c|².
func (b *blockSolver) tSE(c []float64) {
	for j, cj := range c {
		r := b.row(b.w, j)
		for v := range r {
			r[v] = cj
		}
	}
	b.forward(b.w)
	clear(b.ssq)
	for j := 0; j < b.p; j++ {
		r := b.row(b.w, j)
		addMul(b.ssq, r, r)
	}
}

// factor copies slot i's Cholesky factor into lv (row-major, lower triangle).
func (b *blockSolver) factor(i int) []float64 {
	p := b.p
	for r := 0; r < p; r++ {
		for k := 0; k <= r; k++ {
			b.lv[r*p+k] = b.g[b.index[r*p+k]*blockVoxels+i]
		}
	}
	return b.lv
}

// gramRun: dst = a·sxx − r·q1 − r2·q2 per slot.
func gramRun(dst, a, r, r2 []float64, sxx, q1, q2 float64) {
	n := len(dst)
	a, r, r2 = a[:n], r[:n], r2[:n]
	for v := range dst {
		dst[v] = a[v]*sxx - r[v]*q1 - r2[v]*q2
	}
}

// subMul: d −= x·y elementwise, unrolled by 4.
func subMul(d, x, y []float64) {
	n := len(d)
	x, y = x[:n], y[:n]
	i := 0
	for ; i+4 <= n; i += 4 {
		dd := (*[4]float64)(d[i : i+4])
		xx := (*[4]float64)(x[i : i+4])
		yy := (*[4]float64)(y[i : i+4])
		dd[0] -= xx[0] * yy[0]
		dd[1] -= xx[1] * yy[1]
		dd[2] -= xx[2] * yy[2]
		dd[3] -= xx[3] * yy[3]
	}
	for ; i < n; i++ {
		d[i] -= x[i] * y[i]
	}
}

// subMul4: d −= x0·y0 + x1·y1 + x2·y2 + x3·y3 elementwise (one load and store of d for four
// products).
func subMul4(d, x0, y0, x1, y1, x2, y2, x3, y3 []float64) {
	n := len(d)
	x0, y0, x1, y1 = x0[:n], y0[:n], x1[:n], y1[:n]
	x2, y2, x3, y3 = x2[:n], y2[:n], x3[:n], y3[:n]
	for v := range d {
		d[v] -= x0[v]*y0[v] + x1[v]*y1[v] + x2[v]*y2[v] + x3[v]*y3[v]
	}
}

// addMul: d += x·y elementwise, unrolled by 4.
func addMul(d, x, y []float64) {
	n := len(d)
	x, y = x[:n], y[:n]
	i := 0
	for ; i+4 <= n; i += 4 {
		dd := (*[4]float64)(d[i : i+4])
		xx := (*[4]float64)(x[i : i+4])
		yy := (*[4]float64)(y[i : i+4])
		dd[0] += xx[0] * yy[0]
		dd[1] += xx[1] * yy[1]
		dd[2] += xx[2] * yy[2]
		dd[3] += xx[3] * yy[3]
	}
	for ; i < n; i++ {
		d[i] += x[i] * y[i]
	}
}

// mulRun: d *= s elementwise, unrolled by 4.
func mulRun(d, s []float64) {
	n := len(d)
	s = s[:n]
	i := 0
	for ; i+4 <= n; i += 4 {
		dd := (*[4]float64)(d[i : i+4])
		ss := (*[4]float64)(s[i : i+4])
		dd[0] *= ss[0]
		dd[1] *= ss[1]
		dd[2] *= ss[2]
		dd[3] *= ss[3]
	}
	for ; i < n; i++ {
		d[i] *= s[i]
	}
}

// ols computes, for every slot, β̂ = Sxx⁻¹Sxy (in beta) with the design's shared Cholesky
// factor, then a0 = Syy − β̂'Sxy (in yy) and a1 = Lyy − β̂'C + β̂'P1β̂ (in ssq), as design.ols
// (methods notes §d.4).
func (b *blockSolver) ols() {
	d, p := b.d, b.p
	l := d.cholSxx
	copy(b.beta, b.rhs)
	beta := func(k int) []float64 { return b.row(b.beta, k) }
	neg := b.coef[:p]
	for i := 0; i < p; i++ {
		for k := 0; k < i; k++ {
			neg[k] = -l[i*p+k]
		}
		bi := b.row(b.beta, i)
		axpyRows(bi, neg[:i], beta)
		scaleRun(bi, 1/l[i*p+i])
	}
	for i := p - 1; i >= 0; i-- {
		for k := i + 1; k < p; k++ {
			neg[k] = -l[k*p+i]
		}
		bi := b.row(b.beta, i)
		axpyRows(bi, neg[i+1:], func(k int) []float64 { return beta(i + 1 + k) })
		scaleRun(bi, 1/l[i*p+i])
	}
	u := b.row(b.inv, 0)
	for j := 0; j < p; j++ {
		bj := b.row(b.beta, j)
		subMul(b.yy, bj, b.row(b.rhs, j))
		subMul(b.ssq, bj, b.row(b.w, j))
		clear(u)
		axpyRows(u, d.p1[j*p:(j+1)*p], beta)
		addMul(b.ssq, bj, u)
	}
}

// axpyRows: d += Σ_k c[k]·rows(k), four rows per pass over d.
func axpyRows(d []float64, c []float64, rows func(k int) []float64) {
	k := 0
	for ; k+4 <= len(c); k += 4 {
		axpy4(d, rows(k), rows(k+1), rows(k+2), rows(k+3), c[k], c[k+1], c[k+2], c[k+3])
	}
	for ; k < len(c); k++ {
		axpy(d, rows(k), c[k])
	}
}

// axpy4: d += c0·x0 + c1·x1 + c2·x2 + c3·x3 elementwise.
func axpy4(d, x0, x1, x2, x3 []float64, c0, c1, c2, c3 float64) {
	n := len(d)
	x0, x1, x2, x3 = x0[:n], x1[:n], x2[:n], x3[:n]
	for v := range d {
		d[v] += c0*x0[v] + c1*x1[v] + c2*x2[v] + c3*x3[v]
	}
}

// scaleRun: d *= c, unrolled by 4.
func scaleRun(d []float64, c float64) {
	i := 0
	for ; i+4 <= len(d); i += 4 {
		dd := (*[4]float64)(d[i : i+4])
		dd[0] *= c
		dd[1] *= c
		dd[2] *= c
		dd[3] *= c
	}
	for ; i < len(d); i++ {
		d[i] *= c
	}
}

// blockSums are a block's per-voxel scalar sums, as load gives them (offset undone when the
// design has no constant).
type blockSums struct {
	syy, lyy, y1, yn, off []float64
	chk                   []float64 // 0 when every sum of the slot is finite, else NaN
}

func newBlockSums() *blockSums {
	B := blockVoxels
	return &blockSums{syy: make([]float64, B), lyy: make([]float64, B), y1: make([]float64, B),
		yn: make([]float64, B), off: make([]float64, B), chk: make([]float64, B)}
}

// gatherSums loads voxels lo..lo+m−1 into the block as load does, across the block: Sxy into
// rhs, C = Axy + Bxy into w, the scalars into bsum. Slots from m on are zero.
func (b *blockSolver) gatherSums(a *Accumulator, lo, m int, bsum *blockSums) {
	d, B := b.d, blockVoxels
	n := float64(a.n)
	for i := 0; i < B; i++ {
		if i >= m {
			bsum.syy[i], bsum.lyy[i], bsum.y1[i], bsum.yn[i], bsum.off[i], bsum.chk[i] = 0, 0, 0, 0, 0, 0
			continue
		}
		v := lo + i
		syy, lyy, sy, yn := a.syy[v], a.lyy[v], a.sy[v], a.last(v)
		bsum.off[i] = syy
		y1 := 0.0
		if !d.hasConst {
			c := a.y1[v]
			lyy += c*(2*sy-yn) + (n-1)*c*c
			syy += 2*c*sy + n*c*c
			y1, yn = c, yn+c
		}
		bsum.syy[i], bsum.lyy[i], bsum.y1[i], bsum.yn[i] = syy, lyy, y1, yn
		bsum.chk[i] = syy*0 + lyy*0 + yn*0 + a.y1[v]*0
	}
	chk := bsum.chk[:m]
	y1 := a.y1[lo : lo+m]
	for j := 0; j < b.p; j++ {
		src := a.sxy[j][3*lo : 3*(lo+m)]
		rr, ww := b.row(b.rhs, j), b.row(b.w, j)
		sx, x1, xn := d.sx[j], d.x1[j], d.xn[j]
		for i := range chk {
			o := (*[3]float64)(src[3*i : 3*i+3])
			s, ax, bx := o[0], o[1], o[2]
			if !d.hasConst {
				c := y1[i]
				s += c * sx
				ax += c * (sx - x1)
				bx += c * (sx - xn)
			}
			cj := ax + bx
			rr[i], ww[i] = s, cj
			chk[i] += s*0 + cj*0
		}
		clear(rr[m:])
		clear(ww[m:])
	}
}

// setGLS turns the gathered sums of slot i into the whitened right-hand side and ỹ'ỹ at ρ
// (methods notes §d.4); a slot not fitted gets ρ = 0 and zero data.
func (b *blockSolver) setGLS(bsum *blockSums, rho []float64, use []bool) {
	d, B := b.d, blockVoxels
	for i := 0; i < B; i++ {
		r := 0.0
		if use[i] {
			r = rho[i]
		}
		a, r2 := 1+r*r, r*r
		b.wa[i], b.wr[i], b.wr2[i] = a, r, r2
		if !use[i] {
			b.yy[i] = 0
			continue
		}
		y1, yn := bsum.y1[i], bsum.yn[i]
		b.yy[i] = a*bsum.syy[i] - 2*r*bsum.lyy[i] - r2*(y1*y1+yn*yn)
	}
	for j := 0; j < b.p; j++ {
		rr, ww := b.row(b.rhs, j), b.row(b.w, j)
		x1, xn := d.x1[j], d.xn[j]
		for i := range rr {
			if !use[i] {
				rr[i] = 0
				continue
			}
			rr[i] = b.wa[i]*rr[i] - b.wr[i]*ww[i] - b.wr2[i]*(x1*bsum.y1[i]+xn*bsum.yn[i])
		}
	}
}
