package analysis

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"

	"winnow/core/cluster"
	"winnow/core/contrast"
	"winnow/core/design"
	"winnow/core/events"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/motion"
	"winnow/core/nifti"
	"winnow/core/report"
	"winnow/core/smooth"
)

// FitInputs are the files of one run.
type FitInputs struct {
	Bold, Events    Input
	Confounds, Mask *Input
}

// FitOptions are the settings of a first-level fit. The zero value means the
// documented defaults.
type FitOptions struct {
	Contrasts   []string     // SPECs "NAME=EXPR"
	TR          float64      // seconds; 0: from the header
	SmoothMM    float64      // Gaussian FWHM applied to each volume, mm; 0: none
	HighpassSec *float64     // cosine cutoff period, s; nil: 128; 0: off
	Noise       glm.Noise    // zero: AR(1)
	Correct     infer.Method // zero: fwe-rft
	Alpha       float64      // 0: 0.05
	ClusterP    float64      // cluster-forming p; 0: 0.001
	HRFDerivs   bool
	Modulate    []string
	Realign     bool // rigid-body realignment of every volume to the first, in the same pass
	NullCheck   int  // chance designs of the null check (--null-check K); 0: off
	Limits      nifti.Limits
	Progress    func(stage string, done, total int)
}

// Defaults of FitOptions (interface contract).
const (
	DefaultHighpassSec = 128
	DefaultAlpha       = 0.05
	DefaultClusterP    = 0.001
)

// Map is one output image on the run's grid.
type Map struct {
	File     string // e.g. "count-watch_z.nii.gz"
	Contrast int    // index into Summary.Contrasts; -1 for run-level maps
	Kind     string // "stat", "z", "effect", "se", "thresholded", "mean", "mask", "rho", "sd"
	Data     []float32
	Write    nifti.WriteOptions
}

// FitResult is a fitted run: the summary, the maps and what re-thresholding
// needs.
type FitResult struct {
	Summary *report.Summary
	Grid    nifti.Grid
	Mask    []bool
	Maps    []Map
	Design  *design.Design
	// MotionTSV is motion.tsv (six parameters and framewise displacement
	// per volume) when the run was realigned; nil otherwise.
	MotionTSV []byte

	null         *nullResult // the null check, when one was run
	voxels       []int32     // in-mask linear indices, ascending
	keep         []int       // for each of voxels, its index in the fit's voxel list
	baseWarnings []string
	resels       infer.Resels
	fwhmVox      [3]float64
	contrasts    []*contrastState
	inGrid       []bool // scratch of fillClusters: the surviving voxels on the grid
}

// contrastState keeps what inference needs for one contrast.
type contrastState struct {
	name, spec string
	f          bool
	df1, df2   float64
	stat, z    []float64                  // per in-mask voxel
	logp       []float64                  // ln upper-tail p per in-mask voxel
	survive    []bool                     // per in-mask voxel, under the current threshold
	order      []int32                    // voxels by ascending p, computed on first use
	adjusted   map[infer.Method][]float64 // adjusted ln p per rank-based method, made on first use
	statGrid   []float32                  // stat on the grid, for cluster tables; made on first use
}

func (o *FitOptions) defaults() {
	if o.Alpha == 0 {
		o.Alpha = DefaultAlpha
	}
	if o.ClusterP == 0 {
		o.ClusterP = DefaultClusterP
	}
	if o.HighpassSec == nil {
		h := float64(DefaultHighpassSec)
		o.HighpassSec = &h
	}
	if o.Correct == infer.MethodDefault {
		o.Correct = infer.MethodFWERFT
	}
}

func (o *FitOptions) check() error {
	if err := checkLevels(o.Alpha, o.ClusterP); err != nil {
		return err
	}
	if o.SmoothMM < 0 || math.IsNaN(o.SmoothMM) || o.SmoothMM > 50 {
		return inputErrf("--smooth", "%g mm; want 0 (none) to 50 mm", o.SmoothMM)
	}
	if h := *o.HighpassSec; h < 0 || math.IsNaN(h) {
		return inputErrf("--highpass", "%g s; want 0 (off) or a positive period in seconds", h)
	}
	if o.TR < 0 || math.IsNaN(o.TR) || math.IsInf(o.TR, 0) {
		return inputErrf("--tr", "%g s; want a positive repetition time in seconds", o.TR)
	}
	if !o.Correct.FirstLevel() {
		return inputErrf("--correct", "%q is for group analyses only; want one of %s", o.Correct, strings.Join(firstLevelMethods(), ", "))
	}
	if len(o.Contrasts) == 0 {
		return inputErrf("--contrast", "no contrast given; want at least one NAME=EXPR")
	}
	return nil
}

// checkLevels checks the error level and the cluster-forming p.
func checkLevels(alpha, clusterP float64) error {
	if !(alpha > 0 && alpha < 1) {
		return inputErrf("--alpha", "%g is not a probability; want 0 < alpha < 1", alpha)
	}
	if !(clusterP > 0 && clusterP < 1) {
		return inputErrf("--cluster-p", "%g is not a probability; want 0 < p < 1", clusterP)
	}
	return nil
}

func firstLevelMethods() []string {
	var names []string
	for _, m := range infer.Methods() {
		if m.FirstLevel() {
			names = append(names, m.String())
		}
	}
	return names
}

func (o *FitOptions) progress(stage string, done, total int) {
	if o.Progress != nil {
		o.Progress(stage, done, total)
	}
}

// Fit runs the first-level model of one run. The bold stream is read once.
func Fit(ctx context.Context, in FitInputs, opt FitOptions) (*FitResult, error) {
	opt.defaults()
	if err := opt.check(); err != nil {
		return nil, err
	}
	var warnings []string
	var inputs []report.InputRef

	// Tables first: they are small, and their errors should not wait for the scan.
	evh := newInputReader(in.Events)
	ev, err := events.ParseEvents(evh)
	if err != nil {
		return nil, inputErr(in.Events.Name, err)
	}
	inputs = append(inputs, evh.ref("events", in.Events.Name))
	for _, w := range ev.Warnings {
		warnings = append(warnings, in.Events.Name+": "+w)
	}
	var conf *events.Table
	if in.Confounds != nil {
		ch := newInputReader(*in.Confounds)
		conf, err = events.ParseConfounds(ch)
		if err != nil {
			return nil, inputErr(in.Confounds.Name, err)
		}
		inputs = append(inputs, ch.ref("confounds", in.Confounds.Name))
		for _, w := range conf.Warnings {
			warnings = append(warnings, in.Confounds.Name+": "+w)
		}
	}

	// The run's header.
	bh := newInputReader(in.Bold)
	if runtime.GOMAXPROCS(0) > 1 {
		// Hash the run beside its decompression rather than in its path.
		bh.hashAsync()
		defer bh.abort() // on an error path; after ref it does nothing
	}
	nr, err := nifti.NewReader(bh, opt.Limits)
	if err != nil {
		return nil, inputErr(in.Bold.Name, err)
	}
	hdr := nr.Header()
	dimsAll := hdr.Dims()
	if len(dimsAll) < 4 || dimsAll[3] < 2 {
		return nil, inputErrf(in.Bold.Name, "nifti: dims %v hold one volume; want a 4D run of several volumes", dimsAll)
	}
	grid := hdr.Grid()
	nvol := hdr.NumVolumes()
	tr := opt.TR
	if tr == 0 {
		t, ok := hdr.TR()
		if !ok || !(t > 0) {
			return nil, inputErrf(in.Bold.Name, "nifti: pixdim[4] = %g gives no repetition time; want a positive TR, or give --tr", hdr.Pixdim[4])
		}
		tr = t
		if hdr.XYZTUnits&0x38 == 0 {
			warnings = append(warnings, fmt.Sprintf("%s: the header gives no time unit; TR %g read as seconds", in.Bold.Name, tr))
		}
	}

	// The design.
	des, err := buildDesign(ev, conf, nvol, tr, opt, in)
	if err != nil {
		return nil, err
	}
	warnings = append(warnings, des.Warnings...)
	names := des.Names()
	cons := make([]*contrast.Contrast, len(opt.Contrasts))
	seen := map[string]bool{}
	for i, spec := range opt.Contrasts {
		flag := fmt.Sprintf("--contrast %q", spec)
		c, err := contrast.Parse(spec, names)
		if err != nil {
			return nil, inputErr(flag, err)
		}
		if seen[c.Name] {
			return nil, inputErrf(flag, "the name %q is used by another contrast; want distinct names", c.Name)
		}
		seen[c.Name] = true
		if err := contrast.Estimable(c, des.X); err != nil {
			return nil, inputErr(flag, err)
		}
		cons[i] = c
	}

	// The analysis mask (candidate voxels; refined after the pass).
	nvox := grid.Voxels()
	first := make([]float32, nvox)
	if err := nr.ReadVolume(first); err != nil {
		return nil, inputErr(in.Bold.Name, volumeErr(err, 1, nvol))
	}
	var mask []bool
	if in.Mask != nil {
		mh := newInputReader(*in.Mask)
		mask, err = readMask(mh, in.Mask.Name, grid, opt.Limits)
		if err != nil {
			return nil, err
		}
		if err := mh.drain(); err != nil {
			return nil, inputErr(in.Mask.Name, err)
		}
		inputs = append(inputs, mh.ref("mask", in.Mask.Name))
	} else {
		mask = autoMask(first, grid.Dims)
	}
	nonFinite := make([]bool, nvox)
	// Integer data within the float32 range cannot hold NaN or ±Inf: no scan.
	checkFinite := !hdr.FiniteValues()
	if checkFinite {
		markNonFinite(first, mask, nonFinite)
	}
	voxels := maskVoxels(mask)
	if len(voxels) == 0 {
		f := in.Bold.Name
		if in.Mask != nil {
			f = in.Mask.Name
		}
		return nil, inputErrf(f, "the analysis mask is empty; want at least one brain voxel")
	}

	// The stream: smoothing, then the sums.
	var sm *smooth.Smoother
	var smoothed []float32
	if opt.SmoothMM > 0 {
		sm = smooth.New(grid.Dims, smooth.Sigmas(opt.SmoothMM, grid.VoxelMM), mask)
		smoothed = make([]float32, nvox)
	}
	acc := glm.NewAccumulator(des.X, grid.Dims, voxels)
	chance, err := newNullCheck(opt.NullCheck, ev, des, cons, opt, nvol, tr, grid.Dims, voxels, acc)
	if err != nil {
		return nil, err
	}
	var rl *motion.Realigner
	var realigned []float32
	var params []motion.Params
	if opt.Realign {
		if rl, err = motion.NewRealigner(grid, first, motion.Options{}); err != nil {
			return nil, inputErr(in.Bold.Name, err)
		}
		realigned = make([]float32, nvox)
		params = make([]motion.Params, 0, nvol)
	}
	// Volumes 2..n are decoded in a goroutine while this one accumulates,
	// so decompression and accumulation overlap where there are two cores.
	done := make(chan struct{})
	defer close(done)
	stream, free := readAhead(nr, bh, nvol, done)
	vol := first
	cur := make([]float32, nvox) // volumes 2..n, decoded here from the reader's bytes
	for t := 0; t < nvol; t++ {
		if t > 0 {
			next := <-stream
			if next.err != nil {
				return nil, inputErr(in.Bold.Name, next.err)
			}
			nr.DecodeVolume(cur, next.raw)
			free <- next.raw // back to the reader for reuse
			vol = cur
		}
		if rl != nil {
			p, err := rl.Estimate(vol)
			if err != nil {
				return nil, inputErr(in.Bold.Name, err)
			}
			params = append(params, p)
			rl.Resample(realigned, vol, p)
			copy(vol, realigned)
		}
		if t > 0 && checkFinite {
			markNonFinite(vol, mask, nonFinite)
		}
		v := vol
		if sm != nil {
			sm.Float32(smoothed, vol)
			v = smoothed
		}
		acc.AddVolume(v)
		chance.AddVolume(v)
		if t%8 == 0 || t == nvol-1 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			opt.progress("reading and accumulating", t+1, nvol)
		}
	}
	// The end of the stream: the gzip checksum and the rest of the file.
	if end := <-stream; end.err != nil {
		return nil, inputErr(in.Bold.Name, end.err)
	}

	// The fit.
	opt.progress("fitting", 0, 1)
	weights := make([][][]float64, len(cons))
	for i, c := range cons {
		weights[i] = c.Weights
	}
	fit, err := acc.Fit(glm.Options{Noise: opt.Noise, VoxelMM: grid.VoxelMM, Contrasts: weights})
	if err != nil {
		return nil, inputErr(in.Bold.Name, err)
	}
	// The run's size and SHA-256, asked for only now: where another worker
	// hashes the file (the page's parallel read), it does so during the fit.
	boldRef, err := bh.refErr("bold", in.Bold.Name)
	if err != nil {
		return nil, inputErr(in.Bold.Name, err)
	}
	inputs = slices.Insert(inputs, 0, boldRef)
	opt.progress("fitting", 1, 1)

	warnings = append(warnings, fit.Warnings...)
	res := &FitResult{Grid: grid, Design: des}
	var motionFig *motion.Figures
	if rl != nil {
		fd := motion.FramewiseDisplacement(params)
		fig := motion.Summarise(fd, 0)
		motionFig = &fig
		var buf bytes.Buffer
		if err := motion.WriteTSV(&buf, params, fd); err != nil {
			return nil, err
		}
		res.MotionTSV = buf.Bytes()
		var names []string
		var cols [][]float64
		for j, c := range des.Columns {
			if c.Kind == design.ColumnCondition {
				names = append(names, c.Name)
				cols = append(cols, mat.Col(nil, j, des.X))
			}
		}
		if tc, err := motion.TaskCorrelation(params, names, cols); err == nil && tc.Warning != "" {
			warnings = append(warnings, tc.Warning)
		}
		if fig.Above > 0 {
			warnings = append(warnings, fmt.Sprintf("%d of %d volumes moved more than %g mm (framewise displacement)", fig.Above, fig.Volumes, fig.ThresholdMM))
		}
	}
	res.finishMask(fit, nonFinite)
	if len(res.voxels) == 0 {
		return nil, inputErrf(in.Bold.Name, "no voxel of the mask varies over time; nothing to fit")
	}
	sum := &report.Summary{
		Tool:           report.Tool{Name: "winnow", Version: report.Version},
		Dims:           dimsAll,
		VoxelMM:        grid.VoxelMM,
		TR:             &tr,
		MaskVoxels:     len(res.voxels),
		DF:             fit.DF,
		Noise:          noiseName(opt.Noise),
		SampleFraction: 0.5,
		HighpassSec:    *opt.HighpassSec,
		SmoothMM:       opt.SmoothMM,
		Inputs:         inputs,
		DesignColumns:  names,
		Warnings:       []string{},
	}
	if motionFig != nil {
		sum.Motion = motionFig.Report()
	}
	nf, nc := res.excludedCounts(fit, nonFinite)
	if nf+nc > 0 {
		sum.Excluded = &report.Excluded{NonFinite: nf, Constant: nc}
		if nf > 0 {
			warnings = append(warnings, fmt.Sprintf("%s: %d voxels held non-finite values and left the mask", in.Bold.Name, nf))
		}
	}
	res.fwhmVox = fit.FWHMVoxels
	for j := range 3 {
		sum.FWHMmm[j] = fit.FWHMVoxels[j] * grid.VoxelMM[j]
	}
	res.resels = infer.CountResels(res.Mask, grid.Dims, fit.FWHMVoxels)
	sum.ReselCounts = res.resels
	sum.Resels = res.resels[3]
	if opt.Noise != glm.NoiseOLS {
		med := medianAt(fit.Rho, fit, res.voxels)
		sum.RhoMedian = &med
	}
	res.Summary = sum

	// Contrasts.
	for i, c := range cons {
		res.addContrast(c, opt.Contrasts[i], fit.Stats[i], fit)
	}
	sum.Warnings = append(sum.Warnings, warnings...)
	res.addRunMaps(fit)
	if err := res.Rethreshold(opt.Correct, opt.Alpha, opt.ClusterP); err != nil {
		return nil, err
	}
	if err := res.finishNullCheck(ctx, chance, fit, opt); err != nil {
		return nil, err
	}
	return res, nil
}

func noiseName(n glm.Noise) string {
	if n == glm.NoiseOLS {
		return "ols"
	}
	return "ar1"
}

func volumeErr(err error, v, n int) error {
	if errors.Is(err, io.EOF) {
		return fmt.Errorf("nifti: volume %d of %d: unexpected EOF", v, n)
	}
	return err
}

// volMsg is one volume's stored bytes, or the error that ended the stream.
// The last message after the final volume has nil bytes and reports the end
// of the stream (the gzip checksum).
type volMsg struct {
	raw []byte
	err error
}

// readAhead reads the stored bytes of volumes 2..nvol into a small pool of
// buffers in its own goroutine (decompression, and hashing the file); the
// consumer decodes them (nifti.Reader.DecodeVolume) and returns each buffer
// on free. On two or more cores the reading, which is the longer half, then
// runs alone in its goroutine.
func readAhead(nr *nifti.Reader, bh *hashingReader, nvol int, done <-chan struct{}) (<-chan volMsg, chan<- []byte) {
	pool := readAheadPool(nr.VolumeBytes())
	out := make(chan volMsg, pool)
	free := make(chan []byte, pool)
	for range pool {
		free <- make([]byte, nr.VolumeBytes())
	}
	send := func(m volMsg) bool {
		select {
		case out <- m:
			return true
		case <-done:
			return false
		}
	}
	go func() {
		for t := 1; t < nvol; t++ {
			var buf []byte
			select {
			case buf = <-free:
			case <-done:
				return
			}
			if err := nr.ReadVolumeRaw(buf); err != nil {
				send(volMsg{err: volumeErr(err, t+1, nvol)})
				return
			}
			if !send(volMsg{raw: buf}) {
				return
			}
		}
		// One more read verifies the end of the stream (the gzip checksum),
		// then the rest of the file is hashed.
		var err error
		scratch := make([]byte, nr.VolumeBytes())
		if err = nr.ReadVolumeRaw(scratch); errors.Is(err, io.EOF) {
			err = bh.drain()
		} else if err == nil {
			err = fmt.Errorf("nifti: data beyond volume %d of %d", nvol, nvol)
		}
		send(volMsg{err: err})
	}()
	return out, free
}

// readAheadBytes caps the memory of readAhead's buffers.
const readAheadBytes = 32 << 20

// readAheadPool is the number of volume buffers of readAhead: enough to keep
// decompressing while the accumulator folds a batch of glm.FoldVolumes
// volumes (with 3 buffers the reader stood idle during each fold, and the fold
// then waited for the reader: 6.0 s instead of 4.9 s for the stream of a
// 96x96x60x600 int16 run on two cores), and at least 3 however large a
// volume is.
func readAheadPool(volumeBytes int) int {
	n := glm.FoldVolumes + 3
	if volumeBytes > 0 {
		n = min(n, readAheadBytes/volumeBytes)
	}
	return max(n, 3)
}

// buildDesign turns the events and confounds tables into the design matrix.
func buildDesign(ev *events.Events, conf *events.Table, nvol int, tr float64, opt FitOptions, in FitInputs) (*design.Design, error) {
	byName := map[string]*design.Condition{}
	var conds []design.Condition
	order := ev.Conditions()
	conds = make([]design.Condition, len(order))
	for i, name := range order {
		conds[i] = design.Condition{Name: name}
		if len(opt.Modulate) > 0 {
			conds[i].Modulators = map[string][]float64{}
		}
		byName[name] = &conds[i]
	}
	for _, m := range opt.Modulate {
		if _, ok := ev.Numeric[m]; !ok {
			return nil, inputErrf(in.Events.Name, "--modulate %q: no numeric column of that name (header has: %s)", m, strings.Join(ev.Columns, ", "))
		}
	}
	for k, e := range ev.Events {
		c := byName[e.TrialType]
		c.Onsets = append(c.Onsets, e.Onset)
		c.Durations = append(c.Durations, e.Duration)
		for _, m := range opt.Modulate {
			c.Modulators[m] = append(c.Modulators[m], ev.Numeric[m][k])
		}
	}
	dopt := design.Options{
		Volumes:     nvol,
		TR:          tr,
		HRFDerivs:   opt.HRFDerivs,
		Modulate:    opt.Modulate,
		HighpassSec: *opt.HighpassSec,
	}
	if conf != nil {
		if conf.Rows() != nvol {
			return nil, inputErrf(in.Confounds.Name, "%d rows, want %d (one per volume of %s)", conf.Rows(), nvol, in.Bold.Name)
		}
		for c, name := range conf.Names {
			dopt.Confounds = append(dopt.Confounds, design.Confound{Name: name, Values: conf.Columns[c]})
		}
	}
	d, err := design.Build(conds, dopt)
	if err != nil {
		return nil, inputErr(in.Events.Name, err)
	}
	return d, nil
}

// readMask reads a mask image on the run's grid: nonzero, finite voxels are in.
func readMask(r io.Reader, name string, grid nifti.Grid, lim nifti.Limits) ([]bool, error) {
	h, data, err := nifti.ReadImage(r, lim)
	if err != nil {
		return nil, inputErr(name, err)
	}
	if g := h.Grid(); !g.SameSpace(grid) {
		return nil, inputErrf(name, "nifti: grid %v with affine %v differs from the run's %v with affine %v; want the same grid", g.Dims, g.Affine, grid.Dims, grid.Affine)
	}
	mask := make([]bool, len(data))
	for i, v := range data {
		mask[i] = v != 0 && !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0)
	}
	return mask, nil
}

// autoMask computes the analysis mask from one volume (winnow's method):
// values above 30 % of the volume's 98th percentile; a morphological opening
// (erode by one voxel, keep the largest 26-connected component, dilate back
// within the thresholded set) cuts thin bridges to scalp and background
// structures; enclosed holes are then filled.
func autoMask(vol []float32, dims [3]int) []bool {
	vals := make([]float32, 0, len(vol))
	for _, v := range vol {
		if v > 0 && !math.IsInf(float64(v), 0) {
			vals = append(vals, v)
		}
	}
	n := len(vol)
	if len(vals) == 0 {
		return make([]bool, n)
	}
	slices.Sort(vals)
	thr := 0.3 * vals[int(0.98*float64(len(vals)-1))]
	above := make([]bool, n)
	for i, v := range vol {
		above[i] = v > thr && !math.IsInf(float64(v), 0)
	}
	core := largestComponent(erode(above, dims), dims)
	if core == nil {
		core = largestComponent(above, dims)
	}
	mask := dilate(core, dims)
	for i := range mask {
		mask[i] = mask[i] && above[i]
	}
	fillHoles(mask, dims)
	return mask
}

// neighbours6 calls f with the linear index of each face neighbour of (i, j, k) inside the grid.
func neighbours6(dims [3]int, i, j, k int, f func(int)) {
	nx, ny := dims[0], dims[1]
	idx := i + nx*(j+ny*k)
	if i > 0 {
		f(idx - 1)
	}
	if i < nx-1 {
		f(idx + 1)
	}
	if j > 0 {
		f(idx - nx)
	}
	if j < ny-1 {
		f(idx + nx)
	}
	if k > 0 {
		f(idx - nx*ny)
	}
	if k < dims[2]-1 {
		f(idx + nx*ny)
	}
}

func forEachVoxel(dims [3]int, f func(idx, i, j, k int)) {
	idx := 0
	for k := 0; k < dims[2]; k++ {
		for j := 0; j < dims[1]; j++ {
			for i := 0; i < dims[0]; i++ {
				f(idx, i, j, k)
				idx++
			}
		}
	}
}

// erode keeps voxels whose six face neighbours are all in (the grid edge counts as out).
func erode(in []bool, dims [3]int) []bool {
	out := make([]bool, len(in))
	forEachVoxel(dims, func(idx, i, j, k int) {
		if !in[idx] || i == 0 || j == 0 || k == 0 || i == dims[0]-1 || j == dims[1]-1 || k == dims[2]-1 {
			return
		}
		all := true
		neighbours6(dims, i, j, k, func(n int) { all = all && in[n] })
		out[idx] = all
	})
	return out
}

// dilate adds the face neighbours of every voxel in.
func dilate(in []bool, dims [3]int) []bool {
	out := slices.Clone(in)
	forEachVoxel(dims, func(idx, i, j, k int) {
		if in[idx] {
			neighbours6(dims, i, j, k, func(n int) { out[n] = true })
		}
	})
	return out
}

// largestComponent keeps the largest 26-connected component; nil if in is empty.
func largestComponent(in []bool, dims [3]int) []bool {
	labels, sizes := cluster.Label(in, dims, cluster.Corners)
	if len(sizes) == 0 {
		return nil
	}
	best := int32(1)
	for l := range sizes {
		if sizes[l] > sizes[best-1] {
			best = int32(l + 1)
		}
	}
	out := make([]bool, len(in))
	for i := range out {
		out[i] = labels[i] == best
	}
	return out
}

// fillHoles adds to mask every region outside it that does not reach the grid's edge
// (face connectivity), so enclosed cavities become part of the mask.
func fillHoles(mask []bool, dims [3]int) {
	outside := make([]bool, len(mask))
	var queue []int
	forEachVoxel(dims, func(idx, i, j, k int) {
		edge := i == 0 || j == 0 || k == 0 || i == dims[0]-1 || j == dims[1]-1 || k == dims[2]-1
		if edge && !mask[idx] {
			outside[idx] = true
			queue = append(queue, idx)
		}
	})
	nx, ny := dims[0], dims[1]
	for len(queue) > 0 {
		idx := queue[len(queue)-1]
		queue = queue[:len(queue)-1]
		i, j, k := idx%nx, idx/nx%ny, idx/(nx*ny)
		neighbours6(dims, i, j, k, func(n int) {
			if !mask[n] && !outside[n] {
				outside[n] = true
				queue = append(queue, n)
			}
		})
	}
	for i := range mask {
		mask[i] = !outside[i]
	}
}

// markNonFinite flags in-mask voxels that hold NaN or infinity and sets
// their value to 0, so that smoothing does not spread them.
func markNonFinite(vol []float32, mask, bad []bool) {
	for i, v := range vol {
		if v-v != 0 { // NaN or ±Inf
			if mask[i] {
				bad[i] = true
			}
			vol[i] = 0
		}
	}
}

func maskVoxels(mask []bool) []int32 {
	var vox []int32
	for i, in := range mask {
		if in {
			vox = append(vox, int32(i))
		}
	}
	return vox
}

func medianAt(x []float64, fit *glm.Fit, keep []int32) float64 {
	vals := make([]float64, 0, len(x))
	for k, v := range x {
		if fit.Valid[k] && !math.IsNaN(v) {
			vals = append(vals, v)
		}
	}
	if len(vals) == 0 {
		return math.NaN()
	}
	slices.Sort(vals)
	return vals[len(vals)/2]
}

// bytesInput makes an Input from bytes in memory.
func bytesInput(name string, b []byte) Input {
	return Input{Name: name, R: bytes.NewReader(b), Size: int64(len(b))}
}
