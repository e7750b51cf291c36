package glm

import (
	"fmt"
	"math"
	"runtime"
	"sync"

	"winnow/core/smooth"
)

// Noise selects the serial-correlation model.
type Noise int

const (
	NoiseDefault Noise = iota // AR(1)
	NoiseAR1                  // Prais–Winsten AR(1) GLS with a bias-reduced, spatially smoothed ρ
	NoiseOLS                  // ordinary least squares, white noise assumed
)

func (n Noise) String() string {
	switch n {
	case NoiseDefault, NoiseAR1:
		return "ar1"
	case NoiseOLS:
		return "ols"
	}
	return fmt.Sprintf("Noise(%d)", int(n))
}

// Defaults and limits of the AR(1) model (methods notes §d.3).
const (
	DefaultRhoFWHMmm = 15.0 // FWHM of the Gaussian that regularises the ρ map
	RhoMin           = -0.9
	RhoMax           = 0.95
)

// Options control Fit.
type Options struct {
	Noise Noise
	// RhoFWHMmm is the FWHM (mm) of the within-mask Gaussian smoothing of the AR(1)
	// coefficient map: 0 means DefaultRhoFWHMmm, < 0 turns the smoothing off.
	RhoFWHMmm float64
	// VoxelMM is the voxel spacing along each array axis (norms of the affine's columns);
	// needed when the ρ map is smoothed.
	VoxelMM [3]float64
	// Contrasts are evaluated inside Fit, sharing each voxel's factorisation; results in
	// Fit.Stats, same order. Each is rows x design columns: one row gives t, several give F.
	Contrasts [][][]float64
	// FixedRho, when set under AR(1), whitens every voxel with this ρ instead of estimating
	// it (no smoothing, no clamping); it must lie in (−1, 1).
	FixedRho *float64
}

// Fit is the result of a voxel-wise fit. Per-voxel slices run over Voxels (the in-mask list).
//
// Excluded voxels (Valid false: a constant or non-finite time series, or no residual
// variance) hold NaN in Rho, RhoVoxel, Sigma2 and in every Stat slice; Mean stays defined
// when the data are finite.
type Fit struct {
	Voxels []int32
	Dims   [3]int
	Noise  Noise   // NoiseAR1 or NoiseOLS (the default resolved)
	DF     float64 // ν = n − rank(X)
	// Rho is the AR(1) coefficient used for whitening (0 under OLS); RhoVoxel the per-voxel
	// bias-reduced estimate, clamped to [RhoMin, RhoMax], before spatial smoothing (computed
	// under OLS too, for display).
	Rho, RhoVoxel []float64
	Sigma2        []float64 // RSS/ν; under AR(1) the innovation variance
	Mean          []float64 // time mean of each voxel's series
	Valid         []bool
	Excluded      int
	// FWHMVoxels is the smoothness of the standardised (whitened under AR(1)) residuals,
	// per array axis in voxels (methods notes §f.1); NaN for an axis without neighbour pairs,
	// 0 when neighbouring residuals are not positively correlated.
	FWHMVoxels [3]float64
	Stats      []*Stat // one per Options.Contrasts entry
	Warnings   []string

	d     *design
	beta  []float64 // voxel-major, of the offset series: beta[v*p + j]
	first []float64 // each voxel's first sample (the offset)
}

// rawBeta writes voxel v's β for the series as given (the offset added back through the
// constant's coefficients; methods notes §d.5).
func (f *Fit) rawBeta(v int, dst []float64) []float64 {
	p := f.d.p
	b := f.beta[v*p : (v+1)*p]
	for j := range dst[:p] {
		dst[j] = b[j] + f.first[v]*f.d.cconst[j]
	}
	return dst[:p]
}

// Stat is a contrast map. For a t contrast Effect is c'β, SE its standard error and Stat
// the t value, df DF2 (DF1 = 1). For an F contrast (several rows) Stat is F with df
// (DF1, DF2), DF1 the rank of the rows; Effect is the Euclidean norm of Cβ with the rows as
// given, and SE is nil.
type Stat struct {
	Effect, SE, Stat []float64
	F                bool
	DF1, DF2         float64
}

// Columns is the number of design columns.
func (f *Fit) Columns() int { return f.d.p }

// Beta returns the estimate of design column j for every in-mask voxel (NaN when excluded).
func (f *Fit) Beta(j int) []float64 {
	if j < 0 || j >= f.d.p {
		panic(fmt.Sprintf("glm: Beta(%d), want 0 to %d", j, f.d.p-1))
	}
	out := make([]float64, len(f.Voxels))
	for v := range out {
		out[v] = f.beta[v*f.d.p+j] + f.first[v]*f.d.cconst[j]
	}
	return out
}

// voxSums is one voxel's sums, as used by the fit: of the offset series when the constant
// is in the design's column space, else converted back to the raw series.
type voxSums struct {
	sxy, axy, bxy, c []float64
	syy, lyy, sy     float64
	y1, yn           float64 // first and last value of the series the sums describe
	offSyy           float64 // Σ (y − y_first)², for the constant-voxel test
}

func newVoxSums(p int) *voxSums {
	b := make([]float64, 4*p)
	return &voxSums{sxy: b[:p:p], axy: b[p : 2*p : 2*p], bxy: b[2*p : 3*p : 3*p], c: b[3*p:]}
}

// load fills s with voxel v's sums and reports whether they are all finite.
func (a *Accumulator) load(d *design, v int, s *voxSums) bool {
	ok := true
	for j := 0; j < a.p; j++ {
		o := a.sxy[j][3*v : 3*v+3]
		s.sxy[j], s.axy[j], s.bxy[j] = o[0], o[1], o[2]
	}
	s.syy, s.lyy, s.sy = a.syy[v], a.lyy[v], a.sy[v]
	s.offSyy = s.syy
	s.y1, s.yn = 0, a.last(v)
	if !d.hasConst {
		// Without a constant in the model the offset would change the fit: undo it exactly.
		c, n := a.y1[v], float64(a.n)
		s.lyy += c*(2*s.sy-s.yn) + (n-1)*c*c
		s.syy += 2*c*s.sy + n*c*c
		s.sy += n * c
		for j := 0; j < a.p; j++ {
			s.sxy[j] += c * d.sx[j]
			s.axy[j] += c * (d.sx[j] - d.x1[j])
			s.bxy[j] += c * (d.sx[j] - d.xn[j])
		}
		s.y1, s.yn = c, s.yn+c
	}
	for j := 0; j < a.p; j++ {
		s.c[j] = s.axy[j] + s.bxy[j]
		ok = ok && finite(s.sxy[j]) && finite(s.c[j])
	}
	return ok && finite(s.syy) && finite(s.lyy) && finite(s.yn) && finite(a.y1[v])
}

// sums writes voxel v's Sxy, Axy and Bxy into sxy, axy, bxy and returns its first and last
// sample, as load (the offset undone when the constant is not in the design), without the
// finiteness checks (for voxels already known valid).
func (a *Accumulator) sums(d *design, v int, sxy, axy, bxy []float64) (y1, yn float64) {
	sxy, axy, bxy = sxy[:a.p], axy[:a.p], bxy[:a.p]
	for j := range sxy {
		o := a.sxy[j][3*v : 3*v+3]
		sxy[j], axy[j], bxy[j] = o[0], o[1], o[2]
	}
	yn = a.last(v)
	if !d.hasConst {
		c := a.y1[v]
		for j := range sxy {
			sxy[j] += c * d.sx[j]
			axy[j] += c * (d.sx[j] - d.x1[j])
			bxy[j] += c * (d.sx[j] - d.xn[j])
		}
		return c, yn + c
	}
	return 0, yn
}

// ols computes β̂ = Sxx⁻¹Sxy into beta and returns a0 = Σr², a1 = Σ r_t r_{t−1}
// (methods notes §d.4).
func (d *design) ols(s *voxSums, beta []float64) (a0, a1 float64) {
	p := d.p
	copy(beta, s.sxy)
	cholSolve(d.cholSxx, p, beta)
	a0 = s.syy - dot(beta, s.sxy)
	bp := 0.0
	for j := 0; j < p; j++ {
		bp += beta[j] * dot(d.p1[j*p:(j+1)*p], beta)
	}
	a1 = s.lyy - dot(beta, s.c) + bp
	return a0, a1
}

// biasReduced solves M [v0 v1]' = [a0 a1]' and returns v1/v0 (methods notes §d.3), unclamped.
func (d *design) biasReduced(a0, a1 float64) float64 {
	v0 := d.minv[0][0]*a0 + d.minv[0][1]*a1
	v1 := d.minv[1][0]*a0 + d.minv[1][1]*a1
	return v1 / v0
}

// Fit estimates the model at every in-mask voxel from the sums: OLS, the AR(1) coefficient,
// the whitened fit, the requested contrasts and the residual smoothness.
func (a *Accumulator) Fit(opt Options) (*Fit, error) {
	a.flush()
	if a.added != a.n {
		return nil, fmt.Errorf("glm: %d volumes added, want %d (design rows)", a.added, a.n)
	}
	// Every volume is folded in: the pending-volume buffers (all but the last volume,
	// ybuf[0]) are not needed any more, and their memory can go before the fit's own.
	for b := 1; b < stride; b++ {
		a.ybuf[b] = nil
	}
	a.win = nil
	d, err := newDesign(a.x, a.n, a.p)
	if err != nil {
		return nil, err
	}
	noise := opt.Noise
	switch noise {
	case NoiseDefault, NoiseAR1:
		noise = NoiseAR1
	case NoiseOLS:
	default:
		return nil, fmt.Errorf("glm: Options.Noise = %d, want NoiseDefault, NoiseAR1 or NoiseOLS", int(opt.Noise))
	}
	rhoFWHM := opt.RhoFWHMmm
	if rhoFWHM == 0 {
		rhoFWHM = DefaultRhoFWHMmm
	}
	if math.IsNaN(rhoFWHM) {
		return nil, fmt.Errorf("glm: Options.RhoFWHMmm is NaN, want a number (0 default, < 0 off)")
	}
	smoothRho := noise == NoiseAR1 && opt.FixedRho == nil && rhoFWHM > 0
	if smoothRho {
		for i, s := range opt.VoxelMM {
			if !(s > 0) || math.IsInf(s, 0) {
				return nil, fmt.Errorf("glm: Options.VoxelMM[%d] = %g, want a positive spacing in mm (needed to smooth the AR(1) map)", i, s)
			}
		}
	}
	if opt.FixedRho != nil {
		if r := *opt.FixedRho; !(r > -1 && r < 1) {
			return nil, fmt.Errorf("glm: Options.FixedRho = %g, want a value in (-1, 1)", r)
		}
	}
	cons := make([]*prepared, len(opt.Contrasts))
	for i, w := range opt.Contrasts {
		if cons[i], err = prepare(w, a.p); err != nil {
			return nil, fmt.Errorf("glm: contrast %d: %w", i+1, err)
		}
	}

	nv, p := a.nv, a.p
	f := &Fit{Voxels: a.voxels, Dims: a.dims, Noise: noise, DF: float64(a.n - p), d: d}
	f.Rho, f.RhoVoxel = make([]float64, nv), make([]float64, nv)
	f.Sigma2, f.Mean, f.Valid = make([]float64, nv), make([]float64, nv), make([]bool, nv)
	f.beta = make([]float64, nv*p)
	f.first = append([]float64(nil), a.y1...)

	invN := 1 / float64(a.n)
	excluded := make([]int, maxWorkers(nv))
	parallelRanges(nv, func(w, lo0, hi0 int) {
		bs := newBlockSolver(d)
		use := make([]bool, blockVoxels)
		bsum := newBlockSums()
		for lo := lo0; lo < hi0; lo += blockVoxels {
			hi := min(lo+blockVoxels, hi0)
			bs.gatherSums(a, lo, hi-lo, bsum)
			for i := range use {
				use[i] = false
				if v := lo + i; v < hi {
					f.Mean[v] = a.y1[v] + a.sy[v]*invN
					tiny := 1e-24 * float64(a.n) * (1 + a.y1[v]*a.y1[v])
					use[i] = bsum.chk[i] == 0 && bsum.off[i] > tiny
				}
			}
			copy(bs.yy, bsum.syy)
			copy(bs.ssq, bsum.lyy)
			bs.ols()
			for v := lo; v < hi; v++ {
				i := v - lo
				if a0, a1 := bs.yy[i], bs.ssq[i]; use[i] && a0 > 1e-12*bsum.syy[i] && finite(a0) && finite(a1) {
					r := d.biasReduced(a0, a1)
					if math.IsNaN(r) {
						r = 0
					}
					f.RhoVoxel[v] = min(max(r, RhoMin), RhoMax)
					f.Valid[v] = true
					continue
				}
				f.RhoVoxel[v] = math.NaN()
				excluded[w]++
			}
		}
	})

	switch {
	case noise == NoiseOLS:
	case opt.FixedRho != nil:
		for v := range f.Rho {
			f.Rho[v] = *opt.FixedRho
		}
	case smoothRho:
		f.smoothRho(smooth.Sigmas(rhoFWHM, opt.VoxelMM))
	default:
		copy(f.Rho, f.RhoVoxel)
	}

	f.Stats = make([]*Stat, len(cons))
	for i, c := range cons {
		f.Stats[i] = c.newStat(nv, f.DF)
	}
	parallelRanges(nv, func(w, lo0, hi0 int) {
		bs := newBlockSolver(d)
		use := make([]bool, blockVoxels)
		bsum := newBlockSums()
		sc := newScratch(p)
		braw := make([]float64, p)
		rho := make([]float64, blockVoxels)
		for lo := lo0; lo < hi0; lo += blockVoxels {
			hi := min(lo+blockVoxels, hi0)
			f.glsBlock(a, bs, bsum, cons, use, rho, sc, braw, lo, hi, &excluded[w])
		}
	})
	for _, n := range excluded {
		f.Excluded += n
	}
	if f.Excluded > 0 {
		f.Warnings = append(f.Warnings, fmt.Sprintf(
			"glm: %d of %d in-mask voxels excluded (constant or non-finite time series, or no residual variance)",
			f.Excluded, nv))
	}
	f.FWHMVoxels = a.smoothness(f)
	return f, nil
}

// glsBlock fits voxels lo..hi−1 (one block) by Prais–Winsten GLS at their ρ and evaluates the
// contrasts, counting newly excluded voxels in excluded.
func (f *Fit) glsBlock(a *Accumulator, bs *blockSolver, bsum *blockSums, cons []*prepared, use []bool, rho []float64, sc *scratch, braw []float64, lo, hi int, excluded *int) {
	p := f.d.p
	bs.gatherSums(a, lo, hi-lo, bsum)
	for i := range use {
		v := lo + i
		use[i] = v < hi && f.Valid[v]
		if use[i] {
			rho[i] = f.Rho[v]
		}
	}
	bs.setGLS(bsum, rho, use)
	bs.solve()
	for v := lo; v < hi; v++ {
		i := v - lo
		bv := f.beta[v*p : (v+1)*p]
		if f.Valid[v] {
			if rss := bs.yy[i]; !bs.bad[i] && rss > 0 && finite(rss) {
				f.Sigma2[v] = rss / f.DF
				for j := range bv {
					bv[j] = bs.beta[j*blockVoxels+i]
				}
				continue
			}
			f.Valid[v] = false
			*excluded++
		}
		f.Rho[v], f.RhoVoxel[v], f.Sigma2[v] = math.NaN(), math.NaN(), math.NaN()
		for j := range bv {
			bv[j] = math.NaN()
		}
		for _, st := range f.Stats {
			st.setNaN(v)
		}
	}
	for k, c := range cons {
		st := f.Stats[k]
		if !c.f {
			bs.tSE(c.basis[0])
		}
		for v := lo; v < hi; v++ {
			if !f.Valid[v] {
				continue
			}
			i := v - lo
			f.rawBeta(v, braw)
			if c.f {
				c.eval(st, v, bs.factor(i), p, braw, f.Sigma2[v], sc)
				continue
			}
			eff := dot(c.basis[0], braw)
			se := math.Sqrt(f.Sigma2[v] * bs.ssq[i])
			st.Effect[v], st.SE[v], st.Stat[v] = eff, se, eff/se
		}
	}
}

// parallelChunk is the number of voxels below which Fit stays on one goroutine, and the
// granularity of its split (whole blocks).
const parallelChunk = 64 * blockVoxels

// maxWorkers is the number of goroutines parallelRanges uses for n voxels.
func maxWorkers(n int) int {
	return max(1, min(runtime.GOMAXPROCS(0), (n+parallelChunk-1)/parallelChunk))
}

// parallelRanges splits the voxels 0..n−1 into contiguous ranges of whole blocks, one per
// goroutine (maxWorkers of them), and runs body(worker, lo, hi) on each. Every voxel's
// result depends on its own sums only, so the output is the same for any split.
func parallelRanges(n int, body func(w, lo, hi int)) {
	k := maxWorkers(n)
	if k == 1 {
		body(0, 0, n)
		return
	}
	blocks := (n + blockVoxels - 1) / blockVoxels
	var wg sync.WaitGroup
	for w := range k {
		lo := blocks * w / k * blockVoxels
		hi := min(blocks*(w+1)/k*blockVoxels, n)
		wg.Go(func() { body(w, lo, hi) })
	}
	wg.Wait()
}

// smoothRho replaces Rho by the ρ map smoothed within the valid voxels.
func (f *Fit) smoothRho(sigma [3]float64) {
	grid := f.Dims[0] * f.Dims[1] * f.Dims[2]
	mask := make([]bool, grid)
	full := make([]float64, grid)
	for v, g := range f.Voxels {
		if f.Valid[v] {
			mask[g] = true
			full[g] = f.RhoVoxel[v]
		}
	}
	sm := smooth.New(f.Dims, sigma, mask)
	sm.Float64(full, full)
	for v, g := range f.Voxels {
		if f.Valid[v] {
			f.Rho[v] = min(max(full[g], RhoMin), RhoMax)
		}
	}
}

// Contrast evaluates a contrast after the fit, recomputing each voxel's factorisation from
// its ρ (cheaper in memory than storing the factors; Options.Contrasts shares them instead).
func (f *Fit) Contrast(weights [][]float64) (*Stat, error) {
	c, err := prepare(weights, f.d.p)
	if err != nil {
		return nil, fmt.Errorf("glm: %w", err)
	}
	p := f.d.p
	st := c.newStat(len(f.Voxels), f.DF)
	g := make([]float64, p*p)
	sc := newScratch(p)
	braw := make([]float64, p)
	for v := range f.Voxels {
		if !f.Valid[v] {
			st.setNaN(v)
			continue
		}
		f.d.gram(g, f.Rho[v])
		if !cholesky(g, p) {
			st.setNaN(v)
			continue
		}
		c.eval(st, v, g, p, f.rawBeta(v, braw), f.Sigma2[v], sc)
	}
	return st, nil
}
