package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"winnow/core/analysis"
	"winnow/core/motion"
	"winnow/core/nifti"
)

// runRealign is `winnow realign --bold F --out DIR`: rigid-body realignment
// of a 4D run to one of its volumes (volume 0 unless --reference says
// otherwise). It writes DIR/realigned.nii.gz and DIR/motion.tsv and prints
// the framewise displacement figures.
//
// The reference is a single volume of the run. With the default (volume 0)
// the run is read once: the first volume becomes the reference and every
// volume, the first included, is estimated, resampled and written as it is
// read. With --reference N > 0 the file is read twice: a first pass stops at
// volume N to take the reference, then the file is reopened and streamed
// from the start.
//
// The output keeps the grid, affine and TR of the input. Integer input of at
// most 16 bits (int8, uint8, int16) is written as int16 with the input's
// scl_slope and scl_inter (resampled values are rounded to the stored
// integers, as the input was); every other datatype as float32.
func runRealign(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("realign", stderr)
	bold := fs.String("bold", "", "4D run, NIfTI .nii, .nii.gz or .hdr/.img (required)")
	out := fs.String("out", "", "output folder (required)")
	refIdx := fs.Int("reference", 0, "0-based index of the reference volume")
	fdThr := fs.Float64("fd-threshold", motion.DefaultFDThresholdMM, "framewise displacement (mm) above which a volume is counted")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("realign: unexpected argument %q", fs.Arg(0))}
	}
	for _, req := range []struct{ name, val string }{{"bold", *bold}, {"out", *out}} {
		if req.val == "" {
			return usageError{fmt.Sprintf("realign: --%s is required", req.name)}
		}
	}
	if !(*fdThr > 0) {
		return &analysis.InputError{File: "--fd-threshold", Err: fmt.Errorf("%v; want a positive number of mm", *fdThr)}
	}
	name := *bold
	rd, closeIn, err := openRun(name)
	if err != nil {
		return err
	}
	defer func() { closeIn() }()
	h := rd.Header()
	nvols := h.NumVolumes()
	if err := motion.CheckReference(*refIdx, nvols); err != nil {
		file := name
		if nvols >= 2 {
			file = "--reference"
		}
		return &analysis.InputError{File: file, Err: errors.New(strings.TrimPrefix(err.Error(), "motion: "))}
	}
	grid := h.Grid()
	vol := make([]float32, h.VolumeVoxels())
	readErr := func(err error) error {
		if errors.Is(err, io.EOF) {
			err = fmt.Errorf("the data ended before volume %d of %d", nvols, nvols)
		}
		return &analysis.InputError{File: name, Err: err}
	}
	ref := make([]float32, len(vol))
	for v := 0; v <= *refIdx; v++ {
		if err := rd.ReadVolume(ref); err != nil {
			return readErr(err)
		}
	}
	if *refIdx > 0 {
		// Second pass from the start of a reopened file.
		closeIn()
		if rd, closeIn, err = openRun(name); err != nil {
			return err
		}
		if err := rd.ReadVolume(vol); err != nil {
			return readErr(err)
		}
	} else {
		copy(vol, ref)
	}
	rl, err := motion.NewRealigner(grid, ref, motion.Options{})
	if err != nil {
		return &analysis.InputError{File: name, Err: err}
	}

	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	imgPath := filepath.Join(*out, "realigned.nii.gz")
	tsvPath := filepath.Join(*out, "motion.tsv")
	tmpImg, tmpTSV := imgPath+".partial", tsvPath+".partial"
	done := false
	defer func() {
		if !done {
			os.Remove(tmpImg)
			os.Remove(tmpTSV)
		}
	}()
	f, err := os.Create(tmpImg)
	if err != nil {
		return err
	}
	defer f.Close()
	bw := bufio.NewWriterSize(f, 1<<20)
	wopt := nifti.WriteOptions{Datatype: nifti.Float32, Descrip: "winnow realign"}
	switch h.Datatype {
	case nifti.Int8, nifti.Uint8, nifti.Int16:
		wopt.Datatype = nifti.Int16
		wopt.SclSlope, wopt.SclInter = h.Scaling()
	}
	tr, ok := h.TR()
	if !ok {
		tr = 0
	}
	w, err := nifti.NewWriter(bw, grid, nvols, tr, wopt)
	if err != nil {
		return err
	}
	params := make([]motion.Params, 0, nvols)
	res := make([]float32, len(vol))
	for v := 0; v < nvols; v++ {
		if v > 0 {
			if err := rd.ReadVolume(vol); err != nil {
				return readErr(err)
			}
		}
		p, err := rl.Estimate(vol)
		if err != nil {
			return &analysis.InputError{File: name, Err: err}
		}
		rl.Resample(res, vol, p)
		if err := w.WriteVolume(res); err != nil {
			return err
		}
		params = append(params, p)
	}
	// Read to the end so that a gzip checksum error is reported.
	if err := rd.ReadVolume(vol); !errors.Is(err, io.EOF) {
		if err == nil {
			err = fmt.Errorf("more volumes than the %d the header gives", nvols)
		}
		return &analysis.InputError{File: name, Err: err}
	}
	if err := w.Close(); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	fd := motion.FramewiseDisplacement(params)
	var tb strings.Builder
	if err := motion.WriteTSV(&tb, params, fd); err != nil {
		return err
	}
	if err := os.WriteFile(tmpTSV, []byte(tb.String()), 0o644); err != nil {
		return err
	}
	if err := os.Rename(tmpImg, imgPath); err != nil {
		return err
	}
	if err := os.Rename(tmpTSV, tsvPath); err != nil {
		return err
	}
	done = true
	fig := motion.Summarise(fd, *fdThr)
	fmt.Fprintf(stdout, "realigned %d volumes of %s to volume %d\n", nvols, name, *refIdx)
	fmt.Fprintln(stdout, fig.Text())
	fmt.Fprintf(stdout, "wrote %s and %s\n", imgPath, tsvPath)
	return nil
}

// openRun opens a single-file NIfTI (.nii, .nii.gz) or a .hdr/.img pair for
// streaming; the returned function closes what was opened.
func openRun(name string) (*nifti.Reader, func(), error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, func() {}, &analysis.InputError{File: name, Err: errors.Unwrap(err)}
	}
	if strings.HasSuffix(name, ".hdr") {
		imgName := strings.TrimSuffix(name, ".hdr") + ".img"
		g, err := os.Open(imgName)
		if err != nil {
			f.Close()
			return nil, func() {}, &analysis.InputError{File: imgName, Err: errors.Unwrap(err)}
		}
		r, err := nifti.NewPairReader(f, g, nifti.Limits{})
		if err != nil {
			f.Close()
			g.Close()
			return nil, func() {}, &analysis.InputError{File: name, Err: err}
		}
		return r, func() { f.Close(); g.Close() }, nil
	}
	r, err := nifti.NewReader(f, nifti.Limits{})
	if err != nil {
		f.Close()
		return nil, func() {}, &analysis.InputError{File: name, Err: err}
	}
	return r, func() { f.Close() }, nil
}
