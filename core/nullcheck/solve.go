package nullcheck

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// designSums holds the design-only sums of methods d.4 for the combined model
// [null | real]: Sxx = Σ x_t x_t', P = P₁ + P₁' (P₁ = Σ_{t≥2} x_t x_{t−1}') and
// E = x₁x₁' + x_n x_n', split into the real block (shared) and, per chance design, the
// null×null and null×real blocks; and the last rows x_n.
type designSums struct {
	p, q            int
	sxxXX, pXX, eXX []float64   // p×p
	sxxNN, pNN, eNN [][]float64 // per design, q×q
	sxxNX, pNX, eNX [][]float64 // per design, q×p
	xnX             []float64
	xnN             [][]float64
}

// cross returns Σ_t a_t b_t', Σ_{t≥1} (a_t b_{t−1}' + a_{t−1} b_t') and a_0 b_0' + a_{n−1} b_{n−1}'
// for the columns of a and b (0-based rows), row-major len(a cols) × len(b cols).
func cross(a, b *mat.Dense) (sxx, pp, e []float64) {
	n, ca := a.Dims()
	_, cb := b.Dims()
	sxx = make([]float64, ca*cb)
	pp = make([]float64, ca*cb)
	e = make([]float64, ca*cb)
	for i := range ca {
		for j := range cb {
			s, l := 0.0, 0.0
			for t := range n {
				s += a.At(t, i) * b.At(t, j)
				if t > 0 {
					l += a.At(t, i)*b.At(t-1, j) + a.At(t-1, i)*b.At(t, j)
				}
			}
			sxx[i*cb+j] = s
			pp[i*cb+j] = l
			e[i*cb+j] = a.At(0, i)*b.At(0, j) + a.At(n-1, i)*b.At(n-1, j)
		}
	}
	return sxx, pp, e
}

func newDesignSums(d *Designs, x *mat.Dense) designSums {
	n, p := x.Dims()
	s := designSums{p: p, q: len(d.Columns)}
	s.sxxXX, s.pXX, s.eXX = cross(x, x)
	s.xnX = mat.Row(nil, n-1, x)
	for _, xd := range d.X {
		a, b, c := cross(xd, xd)
		s.sxxNN, s.pNN, s.eNN = append(s.sxxNN, a), append(s.pNN, b), append(s.eNN, c)
		a, b, c = cross(xd, x)
		s.sxxNX, s.pNX, s.eNX = append(s.sxxNX, a), append(s.pNX, b), append(s.eNX, c)
		s.xnN = append(s.xnN, mat.Row(nil, n-1, xd))
	}
	return s
}

// Stat is one contrast's statistic map for one chance design, over the accumulator's
// voxels (NaN where the voxel is not valid).
type Stat struct {
	Stat     []float64
	F        bool
	DF1, DF2 float64 // t: DF1 = 1, DF2 = ν; F: (rank of the rows, ν)
}

// DF is the error degrees of freedom of every chance-design fit: n − (p + q).
func (a *Accumulator) DF() float64 { return float64(a.n - a.p - a.q) }

// groupBytes bounds the statistic maps held at once: the chance designs are solved in
// groups (at least minGroup designs) whose maps fit in it, one sweep over the voxels per
// group, and the real block's factorisation is shared by the designs of a sweep.
const (
	groupBytes = 64 << 20
	minGroup   = 8
)

// contrastRows are the independent rows of one contrast over the null columns.
type contrastRows struct {
	rows [][]float64
	f    bool
}

// independentRows keeps a maximal linearly independent subset of rows (Gram–Schmidt,
// relative tolerance 1e−10): the F statistic depends on the rows' span only.
func independentRows(w [][]float64) [][]float64 {
	var basis, keep [][]float64
	for _, row := range w {
		v := append([]float64(nil), row...)
		nrm0 := math.Sqrt(dotf(v, v))
		for _, b := range basis {
			c := dotf(v, b)
			for i := range v {
				v[i] -= c * b[i]
			}
		}
		nrm := math.Sqrt(dotf(v, v))
		if nrm0 == 0 || nrm <= 1e-10*nrm0 {
			continue
		}
		for i := range v {
			v[i] /= nrm
		}
		basis = append(basis, v)
		keep = append(keep, row)
	}
	return keep
}

func dotf(a, b []float64) float64 {
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

// Solve fits every chance design at every voxel, by generalised least squares under
// AR(1) at the voxel's coefficient rho[k] (Prais–Winsten; nil rho: ordinary least
// squares), from the normal equations of methods d.4 assembled from the sums, and
// evaluates the contrasts (rows over the null columns; one row: t, several: F). The real
// design's columns stay in every model. For each design in turn, each is called with one
// Stat per contrast; the slices are reused after each returns.
func (a *Accumulator) Solve(rho []float64, valid []bool, contrasts [][][]float64, each func(design int, stats []Stat) error) error {
	if a.added != a.n {
		return fmt.Errorf("null check: %d volumes were added, want %d (one per design row)", a.added, a.n)
	}
	if rho != nil && !a.whiten {
		panic("nullcheck: ρ given to an accumulator made without the AR(1) sums")
	}
	if (rho != nil && len(rho) != a.m) || len(valid) != a.m {
		panic(fmt.Sprintf("nullcheck: %d ρ and %d validity flags for %d voxels", len(rho), len(valid), a.m))
	}
	df := a.DF()
	if df < 1 {
		return fmt.Errorf("null check: %d volumes leave no error degrees of freedom for %d real and %d chance columns", a.n, a.p, a.q)
	}
	cons := make([]contrastRows, len(contrasts))
	for c, w := range contrasts {
		for _, row := range w {
			if len(row) != a.q {
				panic(fmt.Sprintf("nullcheck: contrast %d has rows of %d weights, want %d", c, len(row), a.q))
			}
		}
		rows := independentRows(w)
		if len(rows) == 0 {
			return fmt.Errorf("null check: contrast %d has no weight on any condition column", c+1)
		}
		cons[c] = contrastRows{rows: rows, f: len(w) > 1}
	}
	groupSize := minGroup
	if per := 8 * a.m * len(cons); per > 0 {
		groupSize = max(minGroup, groupBytes/per)
	}
	groupSize = min(groupSize, a.d.K)
	stats := make([][]Stat, groupSize)
	for g := range stats {
		stats[g] = make([]Stat, len(cons))
		for c, cr := range cons {
			st := Stat{Stat: make([]float64, a.m), F: cr.f, DF1: 1, DF2: df}
			if cr.f {
				st.DF1 = float64(len(cr.rows))
			}
			stats[g][c] = st
		}
	}
	w := newWorkspace(a.p, a.q, chunk)
	for d0 := 0; d0 < a.d.K; d0 += groupSize {
		d1 := min(d0+groupSize, a.d.K)
		for k0 := 0; k0 < a.m; k0 += chunk {
			k1 := min(k0+chunk, a.m)
			w.setChunk(a, k0, k1, rho, valid)
			a.chunkReal(w)
			for dd := d0; dd < d1; dd++ {
				a.chunkNull(w, dd, df, cons, stats[dd-d0])
			}
		}
		for dd := d0; dd < d1; dd++ {
			if err := each(dd, stats[dd-d0]); err != nil {
				return err
			}
		}
	}
	return nil
}

// chunk is the number of voxels solved together: every small matrix is held as one
// slice per entry across the chunk's voxels (structure of arrays), so that every inner
// loop runs over the voxels, long and contiguous.
const chunk = 256

// workspace holds the small matrices of one chunk of voxels; entry e of a matrix is
// x[e·nb : (e+1)·nb].
type workspace struct {
	p, q, nb   int
	k0         int
	ca, cb, cc []float64 // 1 + ρ², ρ, ρ² per voxel
	bad        []bool    // voxel not valid, or the real block's factorisation failed
	nbad       []bool    // bad, or a chance design's factorisation failed
	l          []float64 // p×p Cholesky factor of the real block (lower)
	r          []float64 // p: L⁻¹ X̃'ỹ
	rr, yy, yn []float64
	syy, lyy   []float64 // the chunk's Σy² and lag-1 sums
	rs, rc     []float64 // one real column's S and C sums at the chunk's voxels
	wm         []float64 // q×p: row i = L⁻¹ (X̃'x̃_Ni)
	s          []float64 // q×q Schur complement, then its factor M
	z          []float64 // q: M⁻¹ u
	s2         []float64
	h          []float64 // q × rows of a contrast: M⁻¹ C'
	hh         []float64 // rows × rows
	hz         []float64 // rows
	tmp        []float64
}

func newWorkspace(p, q, nb int) *workspace {
	f := func(n int) []float64 { return make([]float64, n*nb) }
	return &workspace{p: p, q: q, nb: nb,
		ca: f(1), cb: f(1), cc: f(1), bad: make([]bool, nb), nbad: make([]bool, nb),
		l: f(p * p), r: f(p), rr: f(1), yy: f(1), yn: f(1), syy: f(1), lyy: f(1), rs: f(1), rc: f(1),
		wm: f(q * p), s: f(q * q), z: f(q), s2: f(1),
		h: f(q * q), hh: f(q * q), hz: f(q), tmp: f(1)}
}

// setChunk loads the voxels k0..k1−1: their whitening coefficients and validity.
func (w *workspace) setChunk(a *Accumulator, k0, k1 int, rho []float64, valid []bool) {
	w.k0 = k0
	nb := k1 - k0
	if nb != w.nb {
		*w = *newWorkspace(w.p, w.q, nb)
		w.k0 = k0
	}
	for v := range nb {
		r := 0.0
		if rho != nil {
			r = rho[k0+v]
		}
		w.bad[v] = !valid[k0+v] || math.IsNaN(r)
		if w.bad[v] {
			r = 0
		}
		w.ca[v], w.cb[v], w.cc[v] = 1+r*r, r, r*r
	}
	if a.real != nil {
		a.real.SeriesSums(k0, k1, w.syy, w.lyy, w.yn)
		return
	}
	copy(w.yn, a.prev[k0:k1])
	copy(w.syy, a.syy[k0:k1])
	copy(w.lyy, a.lyy[k0:k1])
}

// realSums returns real design column j's S and C sums at the chunk's voxels.
func (a *Accumulator) realSums(w *workspace, j int) (sj, cj []float64) {
	k0, nb, m := w.k0, w.nb, a.m
	if a.real != nil {
		sj, cj = w.rs[:nb], w.rc[:nb]
		a.real.DesignSums(j, k0, k0+nb, sj, cj)
		return sj, cj
	}
	sj = a.s64[j*m+k0 : j*m+k0+nb]
	if a.whiten {
		cj = a.s64[(a.p+j)*m+k0 : (a.p+j)*m+k0+nb]
	}
	return sj, cj
}

// ent returns entry e of an SoA matrix.
func (w *workspace) ent(x []float64, e int) []float64 { return x[e*w.nb : (e+1)*w.nb : (e+1)*w.nb] }

// combine sets dst[v] = ca[v]·s − cb[v]·p − cc[v]·e (an entry of (1+ρ²)Sxx − ρP − ρ²E).
func (w *workspace) combine(dst []float64, s, p, e float64) {
	ca, cb, cc := w.ca[:len(dst)], w.cb[:len(dst)], w.cc[:len(dst)]
	for v := range dst {
		dst[v] = ca[v]*s - cb[v]*p - cc[v]*e
	}
}

// mulBy sets dst[v] *= x[v] (the reslicing lets the compiler drop the bounds checks).
func mulBy(dst, x []float64) {
	x = x[:len(dst)]
	for v := range dst {
		dst[v] *= x[v]
	}
}

// dots adds to dst[v] sign·Σ_{k<n} x_{xo+k}[v]·y_{yo+k}[v], where x_e is entry e of the SoA
// matrix x (x[e·nb:(e+1)·nb], nb = len(dst)); four entries per pass over the voxels.
func dots(dst, x []float64, xo int, y []float64, yo, n int, sign float64) {
	nb := len(dst)
	ent := func(a []float64, e int) []float64 { return a[e*nb : (e+1)*nb : (e+1)*nb] }
	k := 0
	for ; k+4 <= n; k += 4 {
		x0, x1, x2, x3 := ent(x, xo+k), ent(x, xo+k+1), ent(x, xo+k+2), ent(x, xo+k+3)
		y0, y1, y2, y3 := ent(y, yo+k), ent(y, yo+k+1), ent(y, yo+k+2), ent(y, yo+k+3)
		x0, x1, x2, x3 = x0[:nb], x1[:nb], x2[:nb], x3[:nb]
		y0, y1, y2, y3 = y0[:nb], y1[:nb], y2[:nb], y3[:nb]
		for v := range dst {
			dst[v] += sign * (x0[v]*y0[v] + x1[v]*y1[v] + x2[v]*y2[v] + x3[v]*y3[v])
		}
	}
	for ; k < n; k++ {
		x0, y0 := ent(x, xo+k)[:nb], ent(y, yo+k)[:nb]
		for v := range dst {
			dst[v] += sign * x0[v] * y0[v]
		}
	}
}

// cholSoA factors, per voxel, the n×n matrix a (lower triangle) into L in place, except
// that the diagonal holds the reciprocals 1/L_jj (forwardSoA multiplies by them); voxels
// whose matrix is not positive definite are marked bad (and get a harmless unit pivot).
func (w *workspace) cholSoA(a []float64, n int, bad []bool) {
	for j := range n {
		djj := w.ent(a, j*n+j)
		dots(djj, a, j*n, a, j*n, j, -1)
		bad = bad[:len(djj)]
		for v, d := range djj {
			if d > 0 {
				djj[v] = 1 / math.Sqrt(d)
			} else {
				djj[v] = 1
				bad[v] = true
			}
		}
		for i := j + 1; i < n; i++ {
			lij := w.ent(a, i*n+j)
			dots(lij, a, i*n, a, j*n, j, -1)
			mulBy(lij, djj)
		}
	}
}

// forwardSoA solves L x = b per voxel in place (L n×n lower from cholSoA, diagonal held
// as reciprocals; b n entries).
func (w *workspace) forwardSoA(l []float64, n int, b []float64) {
	for i := range n {
		bi := w.ent(b, i)
		dots(bi, l, i*n, b, 0, i, -1)
		mulBy(bi, w.ent(l, i*n+i)) // 1/L_ii
	}
}

// dotSoA sets dst[v] = Σ_e x_e[v]·y_e[v] over n entries.
func (w *workspace) dotSoA(dst, x, y []float64, n int) {
	clear(dst)
	dots(dst, x, 0, y, 0, n, 1)
}

// chunkReal assembles and factors the real block of the chunk's voxels and whitens its
// right-hand side: G_XX = (1+ρ²)Sxx − ρP − ρ²E = LL', r = L⁻¹ X̃'ỹ with
// X̃'ỹ = (1+ρ²)S − ρC − ρ²x_n y_n, and ỹ'ỹ = (1+ρ²)Syy − 2ρLyy − ρ²y_n².
func (a *Accumulator) chunkReal(w *workspace) {
	p, nb := a.p, w.nb
	s := &a.sums
	for i := range p {
		for j := 0; j <= i; j++ {
			e := i*p + j
			w.combine(w.ent(w.l, e), s.sxxXX[e], s.pXX[e], s.eXX[e])
		}
	}
	w.cholSoA(w.l, p, w.bad)
	for j := range p {
		rj := w.ent(w.r, j)
		sj, cj := a.realSums(w, j)
		xn := s.xnX[j]
		if !a.whiten {
			copy(rj, sj) // ρ = 0
			continue
		}
		cj = cj[:len(rj)]
		sj = sj[:len(rj)]
		ca, cb, cc, yn := w.ca[:len(rj)], w.cb[:len(rj)], w.cc[:len(rj)], w.yn[:len(rj)]
		for v := range rj {
			rj[v] = ca[v]*sj[v] - cb[v]*cj[v] - cc[v]*xn*yn[v]
		}
	}
	w.forwardSoA(w.l, p, w.r)
	w.dotSoA(w.rr, w.r, w.r, p)
	syy, lyy := w.syy[:nb], w.lyy[:nb]
	for v := range w.yy {
		w.yy[v] = w.ca[v]*syy[v] - 2*w.cb[v]*lyy[v] - w.cc[v]*w.yn[v]*w.yn[v]
	}
}

// chunkNull fits chance design dd at the chunk's voxels from the factored real block (the
// Schur complement of the real block in the whitened normal equations, package doc) and
// writes each contrast's statistic.
func (a *Accumulator) chunkNull(w *workspace, dd int, df float64, cons []contrastRows, st []Stat) {
	p, q, m, nb, k0 := a.p, a.q, a.m, w.nb, w.k0
	s := &a.sums
	sNX, pNX, eNX := s.sxxNX[dd], s.pNX[dd], s.eNX[dd]
	for e := range q * p {
		w.combine(w.ent(w.wm, e), sNX[e], pNX[e], eNX[e])
	}
	for i := range q {
		w.forwardSoA(w.l, p, w.wm[i*p*nb:(i+1)*p*nb])
	}
	sNN, pNN, eNN := s.sxxNN[dd], s.pNN[dd], s.eNN[dd]
	for i := range q {
		for j := 0; j <= i; j++ {
			e := i*q + j
			sij := w.ent(w.s, e)
			w.combine(sij, sNN[e], pNN[e], eNN[e])
			dots(sij, w.wm, i*p, w.wm, j*p, p, -1)
		}
	}
	bad := w.nbad // this design's failures on top of the real block's
	copy(bad, w.bad)
	w.cholSoA(w.s, q, bad)
	xn := s.xnN[dd]
	for i := range q {
		row := dd*q + i
		zi := w.ent(w.z, i)
		sr := a.s32[row*m+k0 : row*m+k0+nb]
		sr = sr[:len(zi)]
		if a.whiten {
			cr := a.s32[(a.nulls+row)*m+k0 : (a.nulls+row)*m+k0+nb][:len(zi)]
			ca, cb, cc, yn := w.ca[:len(zi)], w.cb[:len(zi)], w.cc[:len(zi)], w.yn[:len(zi)]
			xi := xn[i]
			for v := range zi {
				zi[v] = ca[v]*float64(sr[v]) - cb[v]*float64(cr[v]) - cc[v]*xi*yn[v]
			}
		} else {
			for v := range zi {
				zi[v] = float64(sr[v]) // ρ = 0
			}
		}
		dots(zi, w.wm, i*p, w.r, 0, p, -1)
	}
	w.forwardSoA(w.s, q, w.z)
	w.dotSoA(w.tmp, w.z, w.z, q)
	s2, yy, rr, tmp := w.s2, w.yy[:len(w.s2)], w.rr[:len(w.s2)], w.tmp[:len(w.s2)]
	for v := range s2 {
		s2[v] = (yy[v] - rr[v] - tmp[v]) / df
	}
	for c, cr := range cons {
		out := st[c].Stat[k0 : k0+nb]
		nr := len(cr.rows)
		// H = M⁻¹ C' (q × nr), column r at entries r·q .. r·q+q−1.
		for r, row := range cr.rows {
			for i, x := range row {
				hi := w.ent(w.h, r*q+i)
				for v := range hi {
					hi[v] = x
				}
			}
			w.forwardSoA(w.s, q, w.h[r*q*nb:(r+1)*q*nb])
		}
		if !cr.f {
			hz := w.ent(w.hz, 0)
			w.dotSoA(hz, w.h, w.z, q)
			w.dotSoA(w.tmp, w.h, w.h, q)
			for v := range out {
				out[v] = hz[v] / math.Sqrt(w.s2[v]*w.tmp[v])
			}
		} else {
			// F = (H'z)'(H'H)⁻¹(H'z) / (nr σ²).
			for i := range nr {
				w.dotSoA(w.ent(w.hz, i), w.h[i*q*nb:(i+1)*q*nb], w.z, q)
				for j := 0; j <= i; j++ {
					w.dotSoA(w.ent(w.hh, i*nr+j), w.h[i*q*nb:(i+1)*q*nb], w.h[j*q*nb:(j+1)*q*nb], q)
				}
			}
			w.cholSoA(w.hh[:nr*nr*nb], nr, bad)
			w.forwardSoA(w.hh[:nr*nr*nb], nr, w.hz[:nr*nb])
			w.dotSoA(w.tmp, w.hz, w.hz, nr)
			for v := range out {
				out[v] = w.tmp[v] / (float64(nr) * w.s2[v])
			}
		}
		for v := range out {
			if bad[v] || !(w.s2[v] > 0) {
				out[v] = math.NaN()
			}
		}
	}
}
