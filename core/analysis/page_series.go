package analysis

import (
	"context"
	"errors"
	"fmt"

	"winnow/core/glm"
	"winnow/core/motion"
	"winnow/core/nifti"
	"winnow/core/smooth"
)

// Series is one voxel's time series beside the model fitted to it.
type Series struct {
	IJK      [3]int
	TimeSec  []float64 // acquisition time of each volume, (k + 0.5)·TR
	Observed []float64 // the series the fit saw: realigned and smoothed as in the fit
	Fitted   []float64 // X·β of this voxel, all design columns
	Beta     []float64 // β per design column
	Rho      float64   // the AR(1) coefficient used (0 under OLS)
}

// SeriesInputs are the run's files, opened again.
type SeriesInputs struct {
	Bold Input
	Mask *Input // the mask given to Fit, if one was
}

// SeriesAt reads the run again and returns the series of voxel ijk and the
// model fitted to it. The bold stream is read once more from the start (for
// a compressed file, one more decompression).
//
// The observed series goes through the steps of Fit: each volume is
// realigned with the parameters of FitResult.MotionTSV (when the run was
// realigned), non-finite values are set to 0, and, when the fit smoothed,
// the volume is smoothed within the same candidate mask (the given mask, or
// the automatic one recomputed from the first volume).
//
// The fitted values come from refitting this one series with the same design
// and noise model: under AR(1) the voxel is whitened with the spatially
// smoothed ρ that Fit used (the "rho" map, stored as float32), through
// glm.Options.FixedRho, so β agrees with the whole-volume fit to float32
// precision. Two approximations remain: the motion parameters are read back
// from motion.tsv, rounded to 1e-6 mm or degree, and ρ is rounded to float32.
func (r *FitResult) SeriesAt(ctx context.Context, in SeriesInputs, ijk [3]int, progress func(done, total int)) (*Series, error) {
	g := r.Grid
	for a := range 3 {
		if ijk[a] < 0 || ijk[a] >= g.Dims[a] {
			return nil, fmt.Errorf("voxel (%d, %d, %d) is outside the grid %dx%dx%d", ijk[0], ijk[1], ijk[2], g.Dims[0], g.Dims[1], g.Dims[2])
		}
	}
	idx := g.Index(ijk[0], ijk[1], ijk[2])
	if !r.Mask[idx] {
		return nil, fmt.Errorf("voxel (%d, %d, %d) is outside the analysis mask; no model was fitted there", ijk[0], ijk[1], ijk[2])
	}
	if r.Design == nil {
		return nil, errors.New("analysis: the result has no design matrix")
	}
	nvol, p := r.Design.X.Dims()
	nr, err := nifti.NewReader(in.Bold.R, nifti.Limits{})
	if err != nil {
		return nil, inputErr(in.Bold.Name, err)
	}
	hdr := nr.Header()
	if hg := hdr.Grid(); !hg.SameSpace(g) || hdr.NumVolumes() != nvol {
		return nil, inputErrf(in.Bold.Name, "grid %v with %d volumes; want the fitted run's %v with %d volumes", hg.Dims, hdr.NumVolumes(), g.Dims, nvol)
	}
	nvox := g.Voxels()
	vol := make([]float32, nvox)
	if err := nr.ReadVolume(vol); err != nil {
		return nil, inputErr(in.Bold.Name, volumeErr(err, 1, nvol))
	}

	var sm *smooth.Smoother
	var smoothed []float32
	if r.Summary.SmoothMM > 0 {
		var mask []bool
		if in.Mask != nil {
			if mask, err = readMask(in.Mask.R, in.Mask.Name, g, nifti.Limits{}); err != nil {
				return nil, err
			}
		} else {
			mask = autoMask(vol, g.Dims)
		}
		sm = smooth.New(g.Dims, smooth.Sigmas(r.Summary.SmoothMM, g.VoxelMM), mask)
		smoothed = make([]float32, nvox)
	}
	var rl *motion.Realigner
	var ms *MotionSeries
	var realigned []float32
	if r.MotionTSV != nil {
		if ms, err = ParseMotionTSV(r.MotionTSV); err != nil {
			return nil, err
		}
		if len(ms.Params) != nvol {
			return nil, fmt.Errorf("motion.tsv: %d rows; want %d (one per volume)", len(ms.Params), nvol)
		}
		if rl, err = motion.NewRealigner(g, vol, motion.Options{}); err != nil {
			return nil, inputErr(in.Bold.Name, err)
		}
		realigned = make([]float32, nvox)
	}

	s := &Series{IJK: ijk, TimeSec: make([]float64, nvol), Observed: make([]float64, nvol)}
	tr := 0.0
	if r.Summary.TR != nil {
		tr = *r.Summary.TR
	}
	one := make([]float32, 1)
	acc := glm.NewAccumulator(r.Design.X, [3]int{1, 1, 1}, []int32{0})
	for t := range nvol {
		if t > 0 {
			if err := nr.ReadVolume(vol); err != nil {
				return nil, inputErr(in.Bold.Name, volumeErr(err, t+1, nvol))
			}
		}
		// As in Fit: the first volume is cleaned before it is resampled,
		// later ones after.
		v := vol
		if t == 0 {
			zeroNonFinite(v)
		}
		if rl != nil {
			rl.Resample(realigned, vol, ms.Params[t])
			v = realigned
		}
		if t > 0 {
			zeroNonFinite(v)
		}
		y := v[idx]
		if sm != nil {
			sm.Float32(smoothed, v)
			y = smoothed[idx]
		}
		s.Observed[t] = float64(y)
		s.TimeSec[t] = (float64(t) + 0.5) * tr
		one[0] = y
		acc.AddVolume(one)
		if t%8 == 0 || t == nvol-1 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			if progress != nil {
				progress(t+1, nvol)
			}
		}
	}

	opt := glm.Options{Noise: glm.NoiseOLS}
	if r.Summary.Noise != "ols" {
		m := r.MapOf(-1, "rho")
		if m == nil {
			return nil, errors.New("analysis: an AR(1) result without its rho map")
		}
		rho := float64(m.Data[idx])
		s.Rho = rho
		opt = glm.Options{Noise: glm.NoiseAR1, FixedRho: &rho}
	}
	fit, err := acc.Fit(opt)
	if err != nil {
		return nil, err
	}
	if !fit.Valid[0] {
		return nil, fmt.Errorf("voxel (%d, %d, %d): its series is constant or non-finite; no model to show", ijk[0], ijk[1], ijk[2])
	}
	s.Beta = make([]float64, p)
	for j := range p {
		s.Beta[j] = fit.Beta(j)[0]
	}
	s.Fitted = make([]float64, nvol)
	for t := range nvol {
		row := r.Design.X.RawRowView(t)
		var f float64
		for j, b := range s.Beta {
			f += row[j] * b
		}
		s.Fitted[t] = f
	}
	return s, nil
}

// zeroNonFinite sets NaN and infinite values to 0, as Fit does before
// smoothing and accumulating.
func zeroNonFinite(v []float32) {
	for i, x := range v {
		if x-x != 0 {
			v[i] = 0
		}
	}
}
