package glm

import "math"

// smoothness estimates the FWHM (voxels) per axis from the neighbour cross-products of the
// standardised residuals (whitened with each voxel's ρ; ρ = 0 under OLS), methods notes §f.1
// and §f.2: d = mean over valid pairs of 2(1 − corr), d' = d·ν/(ν+1),
// FWHM = sqrt(−2 ln 2 / ln(1 − d'/2)).
//
// β'Sxxβ_w-type terms need Sxx β and P1 β per voxel; they are computed for two z slices at a
// time (every neighbour pair lies within a slice or between consecutive slices), so the extra
// memory is two slices' worth.
func (a *Accumulator) smoothness(f *Fit) [3]float64 {
	d, p, nv := f.d, a.p, a.nv
	nx, ny, nz := a.dims[0], a.dims[1], a.dims[2]
	slab := int32(nx * ny)
	// compact start index of each z slice
	start := make([]int, nz+1)
	k := 0
	for z := 0; z <= nz; z++ {
		for k < nv && a.voxels[k] < int32(z)*slab {
			k++
		}
		start[z] = k
	}
	maxS := 0
	for z := 0; z < nz; z++ {
		maxS = max(maxS, start[z+1]-start[z])
	}
	// per voxel in the window: Sxx β, P1 β, x1'β, xn'β, then Sxy, Axy, Bxy, y1, yn
	w := 5*p + 4
	cur, nxt := make([]float64, maxS*w), make([]float64, maxS*w)
	// Sxx β, P1 β, x1'β and xn'β are formed for blocks of voxels with the voxel index innermost
	// (long contiguous loops; see blockVoxels).
	const bk = blockVoxels
	bt := make([]float64, p*bk) // β, [k*bk + voxel of the block]
	u := make([]float64, bk)
	row := func(k int) []float64 { return bt[k*bk : (k+1)*bk] }
	combine := func(buf []float64, base, lo, m, col int, coef []float64) {
		clear(u)
		axpyRows(u, coef, row)
		for i := 0; i < m; i++ {
			buf[(lo+i-base)*w+col] = u[i]
		}
	}
	fill := func(buf []float64, z int) {
		for lo := start[z]; lo < start[z+1]; lo += bk {
			m := min(bk, start[z+1]-lo)
			for k := 0; k < p; k++ {
				r := row(k)
				clear(r)
				for i := 0; i < m; i++ {
					if v := lo + i; f.Valid[v] {
						r[i] = f.beta[v*p+k]
					}
				}
			}
			for j := 0; j < p; j++ {
				combine(buf, start[z], lo, m, j, d.sxx[j*p:(j+1)*p])
				combine(buf, start[z], lo, m, p+j, d.p1[j*p:(j+1)*p])
			}
			combine(buf, start[z], lo, m, 2*p, d.x1)
			combine(buf, start[z], lo, m, 2*p+1, d.xn)
		}
		for v := start[z]; v < start[z+1]; v++ {
			o := buf[(v-start[z])*w : (v-start[z]+1)*w]
			if !f.Valid[v] {
				continue
			}
			o[5*p+2], o[5*p+3] = a.sums(d, v, o[2*p+2:3*p+2], o[3*p+2:4*p+2], o[4*p+2:5*p+2])
		}
	}
	view := func(o []float64, s *voxSums) {
		s.sxy, s.axy, s.bxy = o[2*p+2:3*p+2], o[3*p+2:4*p+2], o[4*p+2:5*p+2]
		s.y1, s.yn = o[5*p+2], o[5*p+3]
	}
	var pairs [3][2][]int32
	for ax := range pairs {
		pairs[ax][0], pairs[ax][1] = a.pairList(ax)
	}
	var sum [3]float64
	var cnt [3]int
	cursor := [3]int{}
	sv, sw := &voxSums{}, &voxSums{}
	if nz > 0 {
		fill(cur, 0)
	}
	for z := 0; z < nz; z++ {
		if z+1 < nz {
			fill(nxt, z+1)
		}
		pre := func(v int) []float64 {
			if v < start[z+1] {
				return cur[(v-start[z])*w : (v-start[z]+1)*w]
			}
			return nxt[(v-start[z+1])*w : (v-start[z+1]+1)*w]
		}
		for ax := 0; ax < 3; ax++ {
			pa, pb := pairs[ax][0], pairs[ax][1]
			for ; cursor[ax] < len(pa) && int(pa[cursor[ax]]) < start[z+1]; cursor[ax]++ {
				i := cursor[ax]
				v, u := int(pa[i]), int(pb[i])
				if !f.Valid[v] || !f.Valid[u] {
					continue
				}
				view(pre(v), sv)
				view(pre(u), sw)
				s0, sp, sm := a.s0[ax][i], a.sp[ax][i], a.sm[ax][i]
				if !d.hasConst {
					// undo the first-sample offsets of both voxels exactly (as in load)
					cv, cu, n := a.y1[v], a.y1[u], float64(a.n)
					yv, yu := a.sy[v], a.sy[u]
					ynv, ynu := a.last(v), a.last(u)
					s0 += cu*yv + cv*yu + n*cv*cu
					sp += cu*yv + cv*(yu-ynu) + (n-1)*cv*cu
					sm += cu*(yv-ynv) + cv*yu + (n-1)*cv*cu
				}
				cross := pairCross(d, sv, sw, f.beta[v*p:(v+1)*p], f.beta[u*p:(u+1)*p], pre(v), pre(u),
					f.Rho[v], f.Rho[u], s0, sp, sm)
				corr := cross / (f.DF * math.Sqrt(f.Sigma2[v]*f.Sigma2[u]))
				if finite(corr) {
					sum[ax] += 2 * (1 - corr)
					cnt[ax]++
				}
			}
		}
		cur, nxt = nxt, cur
	}
	var out [3]float64
	for ax := 0; ax < 3; ax++ {
		if cnt[ax] == 0 {
			out[ax] = math.NaN()
			continue
		}
		out[ax] = fwhmFromD(sum[ax]/float64(cnt[ax]), f.DF)
	}
	return out
}

// fwhmFromD is the log-correlation estimator with the small-ν correction (methods notes §f.1).
func fwhmFromD(dj, nu float64) float64 {
	dc := dj * nu / (nu + 1)
	l := math.Log(1 - dc/2)
	switch {
	case dc <= 0:
		return math.Inf(1)
	case !(l < 0) || dc >= 2:
		return 0
	}
	return math.Sqrt(-2 * math.Ln2 / l)
}

// pairCross returns r̃_v'r̃_w, the cross-product of the whitened residuals of neighbours v and
// w, each whitened with its own ρ (methods notes §f.2). pv, pw hold Sxx β, P1 β, x1'β, xn'β.
func pairCross(d *design, sv, sw *voxSums, bv, bw, pv, pw []float64, rv, rw, s0, sp, sm float64) float64 {
	p := d.p
	cv, cw := math.Sqrt(1-rv*rv), math.Sqrt(1-rw*rw)
	yy := cv*cw*sv.y1*sw.y1 + (s0 - sv.y1*sw.y1) - rw*sp - rv*sm + rv*rw*(s0-sv.yn*sw.yn)
	x1v, xnv := pv[2*p], pv[2*p+1]
	x1w, xnw := pw[2*p], pw[2*p+1]
	// The nine inner products over the design columns in one loop (each summed in column
	// order, as dot does).
	bv = bv[:p]
	bw = bw[:len(bv)]
	ws, wa, wb := sw.sxy[:len(bv)], sw.axy[:len(bv)], sw.bxy[:len(bv)]
	vs, va, vb := sv.sxy[:len(bv)], sv.axy[:len(bv)], sv.bxy[:len(bv)]
	gw, qw, qv := pw[:len(bv)], pw[p:p+len(bv)], pv[p:p+len(bv)]
	var bvS, bvA, bvB, bwS, bwA, bwB, bGb, bvQ, bwQ float64
	for j, x := range bv {
		y := bw[j]
		bvS += x * ws[j]
		bvA += x * wa[j]
		bvB += x * wb[j]
		bwS += y * vs[j]
		bwA += y * va[j]
		bwB += y * vb[j]
		bGb += x * gw[j]
		bvQ += x * qw[j]
		bwQ += y * qv[j]
	}
	bvXvyw := cv*cw*x1v*sw.y1 + bvS - x1v*sw.y1 - rw*bvA - rv*bvB + rv*rw*(bvS-xnv*sw.yn)
	bwXwyv := cw*cv*x1w*sv.y1 + bwS - x1w*sv.y1 - rv*bwA - rw*bwB + rw*rv*(bwS-xnw*sv.yn)
	bXXb := cv*cw*x1v*x1w + bGb - x1v*x1w - rw*bvQ - rv*bwQ + rv*rw*(bGb-xnv*xnw)
	return yy - bvXvyw - bwXwyv + bXXb
}
