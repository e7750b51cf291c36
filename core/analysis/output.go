package analysis

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"winnow/core/nifti"
	"winnow/core/phantom"
)

// WriteDir writes the maps, design.tsv, report.html and summary.json into
// dir. Each file
// is written under a temporary name and renamed when complete; summary.json
// comes last, and an older summary.json is removed first, so a run that fails
// half-way never leaves a directory that looks complete.
func (r *FitResult) WriteDir(dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	if err := os.Remove(filepath.Join(dir, "summary.json")); err != nil && !os.IsNotExist(err) {
		return err
	}
	// The maps are compressed on every core; each file's bytes do not depend on it.
	err := parallelEach(len(r.Maps), func(i int) error {
		m := r.Maps[i]
		return writeAtomic(filepath.Join(dir, m.File), func(w io.Writer) error {
			return nifti.WriteMap(w, r.Grid, m.Data, m.Write)
		})
	})
	if err != nil {
		return err
	}
	if err := writeAtomic(filepath.Join(dir, "design.tsv"), r.Design.WriteTSV); err != nil {
		return err
	}
	if r.MotionTSV != nil {
		err := writeAtomic(filepath.Join(dir, "motion.tsv"), func(w io.Writer) error {
			_, err := w.Write(r.MotionTSV)
			return err
		})
		if err != nil {
			return err
		}
	}
	if err := writeAtomic(filepath.Join(dir, "report.html"), r.WriteReport); err != nil {
		return err
	}
	return writeAtomic(filepath.Join(dir, "summary.json"), r.WriteSummary)
}

// WriteSummary writes the summary as indented JSON.
func (r *FitResult) WriteSummary(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(r.Summary)
}

// writeAtomic writes path via a temporary file in the same directory.
func writeAtomic(path string, write func(io.Writer) error) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".partial-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	err = f.Chmod(0o644)
	if err == nil {
		err = write(f)
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", filepath.Base(path), err)
	}
	return nil
}

// DemoFiles generates the built-in synthetic scenario's files in memory:
// bold.nii.gz, events.tsv, confounds.tsv, truth.nii.gz and README.txt.
func DemoFiles(seed uint64) (map[string][]byte, error) {
	s := phantom.New(seed)
	g := phantomGrid(s)
	var bold bytes.Buffer
	w, err := nifti.NewWriter(&bold, g, s.Volumes, s.TR, nifti.WriteOptions{Datatype: nifti.Int16, Descrip: "winnow demo (synthetic)"})
	if err != nil {
		return nil, err
	}
	st := s.Stream()
	vol := make([]float32, g.Voxels())
	for {
		err := st.Next(vol)
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		if err := w.WriteVolume(vol); err != nil {
			return nil, err
		}
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	var truth bytes.Buffer
	if err := nifti.WriteMap(&truth, g, s.Truth, nifti.WriteOptions{Datatype: nifti.Uint8, Descrip: "winnow demo ground truth"}); err != nil {
		return nil, err
	}
	return map[string][]byte{
		"bold.nii.gz":   bold.Bytes(),
		"events.tsv":    s.EventsTSV,
		"confounds.tsv": s.ConfoundsTSV,
		"truth.nii.gz":  truth.Bytes(),
		"README.txt":    s.ReadmeTXT,
	}, nil
}

// DemoContrast is the contrast the demo's planted activation answers.
func DemoContrast(seed uint64) string { return phantom.New(seed).Contrast }

func phantomGrid(s *phantom.Scenario) nifti.Grid {
	return nifti.Grid{
		Dims:      s.Dims,
		VoxelMM:   s.VoxelMM,
		Affine:    s.Affine,
		SformCode: s.SformCode,
		QformCode: s.QformCode,
	}
}

// DemoInputs opens the demo files as fit inputs, with the demo's contrast.
func DemoInputs(files map[string][]byte) FitInputs {
	conf := bytesInput("confounds.tsv", files["confounds.tsv"])
	return FitInputs{
		Bold:      bytesInput("bold.nii.gz", files["bold.nii.gz"]),
		Events:    bytesInput("events.tsv", files["events.tsv"]),
		Confounds: &conf,
	}
}
