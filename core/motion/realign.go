package motion

import (
	"fmt"
	"math"

	"winnow/core/nifti"
	"winnow/core/smooth"
)

// Options tunes the estimator. The zero value gives the documented defaults.
type Options struct {
	SigmaMM float64 // σ of the Gaussian smoothing at the fine level, mm; 0: mean voxel spacing
	Step    int     // sampling step at the fine level, voxels; 0: 2
	Levels  int     // resolution levels; each coarser one averages 2×2×2 blocks (σ in mm doubles, step in its own voxels); 0: 2
	MaxIter int     // Gauss–Newton iterations per level; 0: 50
	TolMM   float64 // convergence: largest move of a 50 mm sphere point by the last update; 0: 1e-3 mm
}

// Defaults of Options.
const (
	DefaultStep    = 2
	DefaultLevels  = 2
	DefaultMaxIter = 50
	DefaultTolMM   = 1e-3
	// HeadRadiusMM is the sphere radius that turns rotations into
	// displacements (Power et al. 2012).
	HeadRadiusMM = 50.0
	maxLevels    = 4
	minSamples   = 64
)

// EstimateError reports a volume whose parameters could not be estimated.
type EstimateError struct {
	Volume int    // 0-based index in the order volumes were passed to Estimate
	Reason string // what went wrong
}

func (e *EstimateError) Error() string {
	return fmt.Sprintf("motion: volume %d (0-based): %s", e.Volume, e.Reason)
}

// level holds the reference side of one resolution level.
type level struct {
	factor  int           // block size of the downsampling from the full grid
	dims    [3]int        // this level's grid
	aff     [4][4]float64 // this level's voxel → world
	inv     [4][4]float64 // world → this level's voxel
	down    []float32     // block-averaged moving volume (nil at factor 1)
	sm      *smooth.Smoother
	moving  []float32 // smoothed moving volume
	tol     float64
	vox     []float64 // sample voxel coordinates, 3 per sample
	ref     []float64 // smoothed reference at the samples
	jac     []float64 // 6 per sample: ∂/∂(Δt, Δθ) of the warped reference
	hess    [6][6]float64
	val     []float64 // moving volume at the warped samples
	inside  []bool
	samples int
}

// Realigner estimates and applies rigid-body motion, one volume at a time,
// against one reference volume. It keeps per-volume buffers, so it must not be
// used from two goroutines at once.
type Realigner struct {
	grid    nifti.Grid
	dims    [3]int
	aff     [4][4]float64 // voxel → world
	inv     [4][4]float64 // world → voxel
	centre  [3]float64    // world mm of the grid centre
	levels  []*level
	maxIter int
	prev    Params
	next    int // index of the next volume passed to Estimate
	coef    []float64
	tmp     []float64
}

// NewRealigner prepares realignment to the reference volume ref (full grid,
// index i + nx*(j + ny*k); it is smoothed into the Realigner's own buffers and
// not retained). It returns an error for a grid too small to register (fewer
// than 4 voxels along an axis), a singular affine, non-finite reference values
// or a reference without enough signal for a head mask. It panics if len(ref)
// is not grid.Voxels().
func NewRealigner(grid nifti.Grid, ref []float32, opt Options) (*Realigner, error) {
	nvox := grid.Voxels()
	if len(ref) != nvox {
		panic(fmt.Sprintf("motion: reference has %d values, grid has %d voxels", len(ref), nvox))
	}
	dims := grid.Dims
	for a := 0; a < 3; a++ {
		if dims[a] < 4 {
			return nil, fmt.Errorf("motion: grid dims %dx%dx%d; want at least 4 voxels along each axis for 3D realignment", dims[0], dims[1], dims[2])
		}
	}
	inv, err := grid.Inverse()
	if err != nil {
		return nil, fmt.Errorf("motion: affine is singular; want an invertible voxel-to-world map")
	}
	for i, v := range ref {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			i0, j0, k0 := i%dims[0], (i/dims[0])%dims[1], i/(dims[0]*dims[1])
			return nil, fmt.Errorf("motion: reference voxel (%d, %d, %d) = %v; want finite values", i0, j0, k0, v)
		}
	}
	if opt.SigmaMM < 0 || math.IsNaN(opt.SigmaMM) || math.IsInf(opt.SigmaMM, 0) {
		return nil, fmt.Errorf("motion: smoothing σ = %v mm; want 0 (default) or a positive number", opt.SigmaMM)
	}
	if opt.Step < 0 || opt.Levels < 0 || opt.Levels > maxLevels || opt.MaxIter < 0 || opt.TolMM < 0 || math.IsNaN(opt.TolMM) {
		return nil, fmt.Errorf("motion: options %+v; want step ≥ 0, levels 0 to %d, max iterations ≥ 0, tolerance ≥ 0", opt, maxLevels)
	}
	sigma := opt.SigmaMM
	if sigma == 0 {
		sigma = (grid.VoxelMM[0] + grid.VoxelMM[1] + grid.VoxelMM[2]) / 3
	}
	step := opt.Step
	if step == 0 {
		step = DefaultStep
	}
	nlev := opt.Levels
	if nlev == 0 {
		nlev = DefaultLevels
	}
	tol := opt.TolMM
	if tol == 0 {
		tol = DefaultTolMM
	}
	r := &Realigner{grid: grid, dims: dims, aff: grid.Affine, inv: inv, maxIter: opt.MaxIter}
	if r.maxIter == 0 {
		r.maxIter = DefaultMaxIter
	}
	r.centre = grid.World(float64(dims[0]-1)/2, float64(dims[1]-1)/2, float64(dims[2]-1)/2)
	for l := nlev - 1; l >= 0; l-- {
		f := 1 << l
		ld := [3]int{dims[0] / f, dims[1] / f, dims[2] / f}
		if ld[0] < 2*step+2 || ld[1] < 2*step+2 || ld[2] < 2*step+2 {
			continue // too coarse for this grid
		}
		lt := tol
		if l > 0 {
			lt = 10 * tol // the fine level sets the precision
		}
		lv, err := r.newLevel(ref, f, sigma, step, lt)
		if err != nil {
			if l > 0 {
				continue // a coarse level is optional; the fine level decides
			}
			return nil, err
		}
		r.levels = append(r.levels, lv)
	}
	if len(r.levels) == 0 {
		return nil, fmt.Errorf("motion: sampling step %d is too coarse for grid %dx%dx%d", step, dims[0], dims[1], dims[2])
	}
	return r, nil
}

// newLevel prepares one resolution level: the reference block-averaged by
// factor f along each axis, smoothed with σ = sigmaMM·f, sampled every step
// voxels of the level's grid.
func (r *Realigner) newLevel(ref []float32, f int, sigmaMM float64, step int, tol float64) (*level, error) {
	lv := &level{factor: f, tol: tol}
	lv.dims = [3]int{r.dims[0] / f, r.dims[1] / f, r.dims[2] / f}
	nx, ny, nz := lv.dims[0], lv.dims[1], lv.dims[2]
	// Level voxel I is the centre of the block of full-grid voxels
	// f·I .. f·I + f − 1, i.e. full-grid position f·I + (f − 1)/2.
	var sc [4][4]float64
	for a := 0; a < 3; a++ {
		sc[a][a] = float64(f)
		sc[a][3] = float64(f-1) / 2
	}
	sc[3][3] = 1
	lv.aff = mul4(r.aff, sc)
	lg := nifti.Grid{Dims: lv.dims, Affine: lv.aff}
	inv, err := lg.Inverse()
	if err != nil {
		return nil, fmt.Errorf("motion: affine is singular; want an invertible voxel-to-world map")
	}
	lv.inv = inv
	var sig [3]float64
	for a := 0; a < 3; a++ {
		if r.grid.VoxelMM[a] > 0 {
			sig[a] = sigmaMM / r.grid.VoxelMM[a] // σ·f mm in voxels of f·spacing
		}
	}
	n := nx * ny * nz
	lv.sm = smooth.New(lv.dims, sig, nil)
	lv.moving = make([]float32, n)
	src := ref
	if f > 1 {
		lv.down = make([]float32, n)
		downsample(lv.down, ref, r.dims, f)
		src = lv.down
	}
	sref := make([]float32, n)
	lv.sm.Float32(sref, src)
	// Head mask: above a tenth of the mean of the voxels brighter than the
	// overall mean.
	var s0 float64
	for _, v := range sref {
		s0 += float64(v)
	}
	m0 := s0 / float64(len(sref))
	var s1 float64
	var n1 int
	for _, v := range sref {
		if float64(v) > m0 {
			s1 += float64(v)
			n1++
		}
	}
	if n1 == 0 || s1 <= 0 {
		return nil, fmt.Errorf("motion: the reference volume is constant or not positive; want an image of the head")
	}
	thr := 0.1 * s1 / float64(n1)
	// World gradient = inv3ᵀ · voxel gradient.
	var it [3][3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			it[a][b] = lv.inv[b][a]
		}
	}
	off := step / 2
	for k := max(off, 1); k < nz-1; k += step {
		for j := max(off, 1); j < ny-1; j += step {
			base := nx * (j + ny*k)
			for i := max(off, 1); i < nx-1; i += step {
				idx := base + i
				v := float64(sref[idx])
				if v <= thr {
					continue
				}
				gv := [3]float64{
					0.5 * float64(sref[idx+1]-sref[idx-1]),
					0.5 * float64(sref[idx+nx]-sref[idx-nx]),
					0.5 * float64(sref[idx+nx*ny]-sref[idx-nx*ny]),
				}
				var g [3]float64
				for a := 0; a < 3; a++ {
					g[a] = it[a][0]*gv[0] + it[a][1]*gv[1] + it[a][2]*gv[2]
				}
				fi, fj, fk := float64(i), float64(j), float64(k)
				var w [3]float64
				for a := 0; a < 3; a++ {
					w[a] = lv.aff[a][0]*fi + lv.aff[a][1]*fj + lv.aff[a][2]*fk + lv.aff[a][3]
				}
				d := [3]float64{w[0] - r.centre[0], w[1] - r.centre[1], w[2] - r.centre[2]}
				jr := [6]float64{
					g[0], g[1], g[2],
					deg * (d[1]*g[2] - d[2]*g[1]),
					deg * (d[2]*g[0] - d[0]*g[2]),
					deg * (d[0]*g[1] - d[1]*g[0]),
				}
				lv.vox = append(lv.vox, float64(i), float64(j), float64(k))
				lv.ref = append(lv.ref, v)
				lv.jac = append(lv.jac, jr[:]...)
				for a := 0; a < 6; a++ {
					for b := 0; b <= a; b++ {
						lv.hess[a][b] += jr[a] * jr[b]
					}
				}
			}
		}
	}
	lv.samples = len(lv.ref)
	if lv.samples < minSamples {
		return nil, fmt.Errorf("motion: the reference head mask holds %d sample points at step %d; want at least %d", lv.samples, step, minSamples)
	}
	lv.val = make([]float64, lv.samples)
	lv.inside = make([]bool, lv.samples)
	return lv, nil
}

// Centre returns the world position (mm) about which rotations are applied:
// the centre of the voxel grid.
func (r *Realigner) Centre() [3]float64 { return r.centre }

// voxelMap returns the voxel-to-voxel map of p: reference voxel → moving voxel.
func (r *Realigner) voxelMap(p Params) [4][4]float64 {
	return mul4(r.inv, mul4(p.Matrix(r.centre), r.aff))
}

// Estimate returns the parameters that bring vol (full grid) onto the
// reference, starting from the previous volume's estimate (zero for the first
// volume). A volume that does not converge, leaves the field of view or holds
// non-finite values gives an *EstimateError; the next volume then starts from
// the last good estimate. It panics if len(vol) is not the grid's voxel count.
func (r *Realigner) Estimate(vol []float32) (Params, error) {
	if len(vol) != r.grid.Voxels() {
		panic(fmt.Sprintf("motion: volume has %d values, grid has %d voxels", len(vol), r.grid.Voxels()))
	}
	volIdx := r.next
	r.next++
	for i, v := range vol {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			nx, ny := r.dims[0], r.dims[1]
			return Params{}, &EstimateError{volIdx, fmt.Sprintf("voxel (%d, %d, %d) = %v; want finite values", i%nx, (i/nx)%ny, i/(nx*ny), v)}
		}
	}
	p := r.prev
	for li, lv := range r.levels {
		fine := li == len(r.levels)-1
		if lv.factor > 1 {
			downsample(lv.down, vol, r.dims, lv.factor)
			lv.sm.Float32(lv.moving, lv.down)
		} else {
			lv.sm.Float32(lv.moving, vol)
		}
		converged := false
		var stepMM float64
		for iter := 0; iter < r.maxIter; iter++ {
			delta, reason := r.gaussNewton(lv, p)
			if reason != "" {
				if !fine {
					break // let the fine level decide
				}
				return Params{}, &EstimateError{volIdx, reason}
			}
			tDelta := delta.Matrix(r.centre)
			p = FromMatrix(mul4(p.Matrix(r.centre), invRigid(tDelta)), r.centre)
			stepMM = math.Abs(delta[0]) + math.Abs(delta[1]) + math.Abs(delta[2]) +
				HeadRadiusMM*deg*(math.Abs(delta[3])+math.Abs(delta[4])+math.Abs(delta[5]))
			if math.IsNaN(stepMM) || math.IsInf(stepMM, 0) {
				return Params{}, &EstimateError{volIdx, "the Gauss–Newton update is not finite"}
			}
			if stepMM < lv.tol {
				converged = true
				break
			}
		}
		if !converged && fine {
			return Params{}, &EstimateError{volIdx, fmt.Sprintf("did not converge in %d iterations (last update moved points by %.3g mm; want < %.3g mm)", r.maxIter, stepMM, lv.tol)}
		}
	}
	r.prev = p
	return p, nil
}

// gaussNewton computes one inverse compositional update at parameters p.
// A non-empty reason means the step cannot be taken.
func (r *Realigner) gaussNewton(lv *level, p Params) (Params, string) {
	m := mul4(lv.inv, mul4(p.Matrix(r.centre), lv.aff))
	nx, ny, nz := lv.dims[0], lv.dims[1], lv.dims[2]
	nxy := nx * ny
	hx, hy, hz := float64(nx-1), float64(ny-1), float64(nz-1)
	mov := lv.moving
	vox, val, inside := lv.vox, lv.val, lv.inside
	var sumM, sumR float64
	valid := 0
	for s := range val {
		i, j, k := vox[3*s], vox[3*s+1], vox[3*s+2]
		x := m[0][0]*i + m[0][1]*j + m[0][2]*k + m[0][3]
		y := m[1][0]*i + m[1][1]*j + m[1][2]*k + m[1][3]
		z := m[2][0]*i + m[2][1]*j + m[2][2]*k + m[2][3]
		if !(x >= 0 && x <= hx && y >= 0 && y <= hy && z >= 0 && z <= hz) {
			inside[s] = false
			continue
		}
		x0, y0, z0 := int(x), int(y), int(z)
		if x0 == nx-1 {
			x0--
		}
		if y0 == ny-1 {
			y0--
		}
		if z0 == nz-1 {
			z0--
		}
		tx, ty, tz := x-float64(x0), y-float64(y0), z-float64(z0)
		b := x0 + nx*(y0+ny*z0)
		c00 := float64(mov[b]) + tx*float64(mov[b+1]-mov[b])
		c10 := float64(mov[b+nx]) + tx*float64(mov[b+nx+1]-mov[b+nx])
		c01 := float64(mov[b+nxy]) + tx*float64(mov[b+nxy+1]-mov[b+nxy])
		c11 := float64(mov[b+nxy+nx]) + tx*float64(mov[b+nxy+nx+1]-mov[b+nxy+nx])
		c0 := c00 + ty*(c10-c00)
		c1 := c01 + ty*(c11-c01)
		v := c0 + tz*(c1-c0)
		val[s] = v
		inside[s] = true
		sumM += v
		sumR += lv.ref[s]
		valid++
	}
	if valid < lv.samples/2 || valid < minSamples {
		return Params{}, fmt.Sprintf("only %d of %d head sample points fall inside the volume after the estimated motion (%s); want at least half", valid, lv.samples, p)
	}
	if !(sumM > 0) {
		return Params{}, "the volume has no positive signal where the reference head is"
	}
	scale := sumR / sumM
	h := lv.hess
	var g [6]float64
	jac := lv.jac
	for s := range val {
		jr := jac[6*s : 6*s+6 : 6*s+6]
		if !inside[s] {
			for a := 0; a < 6; a++ {
				for b := 0; b <= a; b++ {
					h[a][b] -= jr[a] * jr[b]
				}
			}
			continue
		}
		e := scale*val[s] - lv.ref[s]
		g[0] += jr[0] * e
		g[1] += jr[1] * e
		g[2] += jr[2] * e
		g[3] += jr[3] * e
		g[4] += jr[4] * e
		g[5] += jr[5] * e
	}
	delta, ok := solve6(h, g)
	if !ok {
		return Params{}, "the normal equations are singular (too little image structure to fix all six parameters)"
	}
	return delta, ""
}

// solve6 solves H x = g for a symmetric positive definite H given by its
// lower triangle, by Cholesky factorisation.
func solve6(h [6][6]float64, g [6]float64) (Params, bool) {
	var l [6][6]float64
	for i := 0; i < 6; i++ {
		for j := 0; j <= i; j++ {
			s := h[i][j]
			for k := 0; k < j; k++ {
				s -= l[i][k] * l[j][k]
			}
			if i == j {
				if !(s > 1e-12*math.Abs(h[i][i])) || s <= 0 {
					return Params{}, false
				}
				l[i][i] = math.Sqrt(s)
			} else {
				l[i][j] = s / l[j][j]
			}
		}
	}
	var y, x [6]float64
	for i := 0; i < 6; i++ {
		s := g[i]
		for k := 0; k < i; k++ {
			s -= l[i][k] * y[k]
		}
		y[i] = s / l[i][i]
	}
	for i := 5; i >= 0; i-- {
		s := y[i]
		for k := i + 1; k < 6; k++ {
			s -= l[k][i] * x[k]
		}
		x[i] = s / l[i][i]
	}
	return Params(x), true
}

// String formats the parameters as "tx ty tz mm, rx ry rz deg".
func (p Params) String() string {
	return fmt.Sprintf("%.3f %.3f %.3f mm, %.3f %.3f %.3f deg", p[0], p[1], p[2], p[3], p[4], p[5])
}

// Resample writes into dst (full grid) the moving volume vol brought onto the
// reference grid with parameters p: dst at reference voxel v is vol at the
// moving position of v, by cubic B-spline interpolation; positions outside
// the moving volume take the value at the nearest edge. It panics if dst or
// vol is not of the grid's voxel count.
func (r *Realigner) Resample(dst, vol []float32, p Params) {
	n := r.grid.Voxels()
	if len(dst) != n || len(vol) != n {
		panic(fmt.Sprintf("motion: Resample got %d and %d values, grid has %d voxels", len(dst), len(vol), n))
	}
	if r.coef == nil {
		r.coef = make([]float64, n)
		r.tmp = make([]float64, r.dims[0]*r.dims[1])
	}
	c := r.coef
	for i, v := range vol {
		c[i] = float64(v)
	}
	prefilter3(c, r.dims, r.tmp)
	m := r.voxelMap(p)
	nx, ny, nz := r.dims[0], r.dims[1], r.dims[2]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			fj, fk := float64(j), float64(k)
			x := m[0][1]*fj + m[0][2]*fk + m[0][3]
			y := m[1][1]*fj + m[1][2]*fk + m[1][3]
			z := m[2][1]*fj + m[2][2]*fk + m[2][3]
			out := dst[nx*(j+ny*k) : nx*(j+ny*k)+nx]
			for i := range out {
				out[i] = float32(splineAt(c, r.dims, x, y, z))
				x += m[0][0]
				y += m[1][0]
				z += m[2][0]
			}
		}
	}
}

// downsample writes into dst the averages of the f×f×f blocks of src (dims);
// dst has dims/f voxels along each axis (trailing partial blocks dropped).
func downsample(dst, src []float32, dims [3]int, f int) {
	nx, ny := dims[0], dims[1]
	cx, cy, cz := dims[0]/f, dims[1]/f, dims[2]/f
	clear(dst)
	w := float32(1 / float64(f*f*f))
	for k := 0; k < cz*f; k++ {
		for j := 0; j < cy*f; j++ {
			row := src[nx*(j+ny*k) : nx*(j+ny*k)+cx*f]
			out := dst[cx*(j/f+cy*(k/f)) : cx*(j/f+cy*(k/f))+cx]
			for i, v := range row {
				out[i/f] += v
			}
		}
	}
	for i := range dst {
		dst[i] *= w
	}
}
