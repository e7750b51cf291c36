package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"

	"winnow/core/analysis"
	"winnow/core/glm"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/nullcheck"
)

const usage = `usage: winnow COMMAND [flags]

commands:
  demo  --out DIR [--seed N] [--force]   write the built-in synthetic scenario
  info  FILE [--json]                    summarise a NIfTI header
  fit   --bold F --events F --contrast SPEC ... --out DIR [flags]
                                         first-level model of one run
  realign --bold F --out DIR             rigid-body motion correction and motion.tsv
  group --maps F,F,... [--design F] [--contrast SPEC ...] --out DIR [flags]
                                         second-level model over subjects' effect maps
  merge --out DIR SHARD_DIR...           join the shards of a sharded group run

Run 'winnow COMMAND -h' for a command's flags.
`

// usageError is a mistake in the command line itself (exit 2 with usage).
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return 2
	}
	var err error
	switch cmd, rest := args[0], args[1:]; cmd {
	case "demo":
		err = runDemo(rest, stdout, stderr)
	case "info":
		err = runInfo(rest, stdout, stderr)
	case "fit":
		err = runFit(rest, stdout, stderr)
	case "realign":
		err = runRealign(rest, stdout, stderr)
	case "group":
		err = runGroup(rest, stdout, stderr)
	case "merge":
		err = runMerge(rest, stdout, stderr)
	case "-h", "-help", "--help", "help":
		fmt.Fprint(stdout, usage)
		return 0
	default:
		fmt.Fprintf(stderr, "winnow: unknown command %q\n%s", cmd, usage)
		return 2
	}
	return exitStatus(err, stderr)
}

func exitStatus(err error, stderr io.Writer) int {
	if err == nil {
		return 0
	}
	if errors.Is(err, flag.ErrHelp) {
		return 0
	}
	var ue usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "winnow: %s\n%s", ue.msg, usage)
		return 2
	}
	var ie *analysis.InputError
	if errors.As(err, &ie) {
		fmt.Fprintf(stderr, "winnow: %s\n", oneLine(ie.Error()))
		return 2
	}
	fmt.Fprintf(stderr, "winnow: %s\n", oneLine(err.Error()))
	return 1
}

func oneLine(s string) string { return strings.ReplaceAll(s, "\n", "; ") }

// newFlags makes a flag set that reports its own errors as usage errors.
func newFlags(name string, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	return fs
}

// parse parses flags; flag errors become usage errors (the flag package has
// already printed the detail and the command's defaults).
func parse(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usageError{fmt.Sprintf("%s: %v", fs.Name(), err)}
	}
	return nil
}

// inputFiles opens the command's input files and closes them at the end.
type inputFiles struct{ closers []io.Closer }

// open opens a file as a pipeline input; a missing file is an input error.
func (fs *inputFiles) open(name string) (*analysis.Input, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, &analysis.InputError{File: name, Err: errors.Unwrap(err)}
	}
	fs.closers = append(fs.closers, f)
	size := int64(-1)
	if st, err := f.Stat(); err == nil {
		size = st.Size()
	}
	return &analysis.Input{Name: name, R: f, Size: size}, nil
}

// optional opens name, or returns nil when no name was given.
func (fs *inputFiles) optional(name string) (*analysis.Input, error) {
	if name == "" {
		return nil, nil
	}
	return fs.open(name)
}

func (fs *inputFiles) close() {
	for _, c := range fs.closers {
		c.Close()
	}
}

// listFlag collects a repeatable string flag.
type listFlag []string

func (l *listFlag) String() string     { return strings.Join(*l, "; ") }
func (l *listFlag) Set(v string) error { *l = append(*l, v); return nil }

func runDemo(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", stderr)
	out := fs.String("out", "", "output folder (required)")
	seed := fs.Uint64("seed", 1, "random seed of the scenario")
	force := fs.Bool("force", false, "write into a non-empty folder")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("demo: unexpected argument %q", fs.Arg(0))}
	}
	if *out == "" {
		return usageError{"demo: --out DIR is required"}
	}
	if entries, err := os.ReadDir(*out); err == nil && len(entries) > 0 && !*force {
		return &analysis.InputError{File: "--out " + *out, Err: errors.New("the folder is not empty; want a new or empty folder, or --force")}
	}
	files, err := analysis.DemoFiles(*seed)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return err
	}
	for _, name := range []string{"bold.nii.gz", "events.tsv", "confounds.tsv", "truth.nii.gz", "README.txt"} {
		if err := writeFileAtomic(filepath.Join(*out, name), files[name]); err != nil {
			return err
		}
	}
	fmt.Fprintf(stdout, "wrote the demo scenario to %s (contrast: %s)\n", *out, analysis.DemoContrast(*seed))
	return nil
}

func writeFileAtomic(path string, b []byte) error {
	tmp := path + ".partial"
	if err := os.WriteFile(tmp, b, 0o644); err != nil {
		os.Remove(tmp)
		return err
	}
	return os.Rename(tmp, path)
}

func runInfo(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("info", stderr)
	asJSON := fs.Bool("json", false, "print JSON")
	// Accept the flag before or after the file name.
	var files []string
	for len(args) > 0 {
		if err := parse(fs, args); err != nil {
			return err
		}
		if fs.NArg() == 0 {
			break
		}
		files = append(files, fs.Arg(0))
		args = fs.Args()[1:]
	}
	if len(files) != 1 {
		return usageError{"info: want exactly one FILE"}
	}
	name := files[0]
	h, err := readHeader(name)
	if err != nil {
		return err
	}
	info := nifti.Describe(h)
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(info)
	}
	fmt.Fprintf(stdout, "%s\n%s", name, info.Text())
	return nil
}

// readHeader opens a single-file NIfTI (.nii, .nii.gz) or a .hdr/.img pair.
func readHeader(name string) (*nifti.Header, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, &analysis.InputError{File: name, Err: errors.Unwrap(err)}
	}
	defer f.Close()
	if strings.HasSuffix(name, ".hdr") {
		h, err := nifti.ReadHeader(f)
		if err != nil {
			return nil, &analysis.InputError{File: name, Err: err}
		}
		return h, nil
	}
	r, err := nifti.NewReader(f, nifti.Limits{})
	if err != nil {
		return nil, &analysis.InputError{File: name, Err: err}
	}
	return r.Header(), nil
}

func runFit(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("fit", stderr)
	bold := fs.String("bold", "", "4D run, NIfTI .nii or .nii.gz (required)")
	evf := fs.String("events", "", "events table, BIDS-style TSV (required)")
	conf := fs.String("confounds", "", "confounds table, TSV or CSV, one row per volume")
	maskf := fs.String("mask", "", "analysis mask on the run's grid [automatic]")
	out := fs.String("out", "", "output folder (required)")
	var contrasts, modulate listFlag
	fs.Var(&contrasts, "contrast", "contrast NAME=EXPR (repeatable; comma-separated rows make an F contrast)")
	fs.Var(&modulate, "modulate", "events column used as a parametric modulator (repeatable)")
	tr := fs.Float64("tr", 0, "repetition time in seconds [from the header]")
	smoothMM := fs.Float64("smooth", 0, "Gaussian smoothing FWHM in mm")
	highpass := fs.Float64("highpass", analysis.DefaultHighpassSec, "high-pass cutoff period in seconds (0: off)")
	noise := fs.String("noise", "ar1", "noise model: ar1 or ols")
	correct := fs.String("correct", "fwe-rft", "correction: "+strings.Join(firstLevel(), ", "))
	alpha := fs.Float64("alpha", analysis.DefaultAlpha, "familywise error or FDR level")
	clusterP := fs.Float64("cluster-p", analysis.DefaultClusterP, "cluster-forming p (cluster methods)")
	derivs := fs.Bool("hrf-derivs", false, "add temporal and dispersion derivatives of the HRF")
	realign := fs.Bool("realign", false, "realign every volume to the first, in the same pass; writes motion.tsv")
	nullCheck := fs.Int("null-check", 0, "chance designs fitted beside the real one to measure the settings' familywise error (40 is a good choice; 0: off)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("fit: unexpected argument %q", fs.Arg(0))}
	}
	for _, req := range []struct{ name, val string }{{"bold", *bold}, {"events", *evf}, {"out", *out}} {
		if req.val == "" {
			return usageError{fmt.Sprintf("fit: --%s is required", req.name)}
		}
	}
	if *nullCheck < 0 {
		return &analysis.InputError{File: "--null-check", Err: fmt.Errorf("%d; want 0 (off) or a number of chance designs such as 40", *nullCheck)}
	}
	opt := analysis.FitOptions{
		Contrasts:   contrasts,
		TR:          *tr,
		SmoothMM:    *smoothMM,
		HighpassSec: highpass,
		Alpha:       *alpha,
		ClusterP:    *clusterP,
		HRFDerivs:   *derivs,
		Modulate:    modulate,
		Realign:     *realign,
		NullCheck:   *nullCheck,
	}
	switch *noise {
	case "ar1":
		opt.Noise = glm.NoiseAR1
	case "ols":
		opt.Noise = glm.NoiseOLS
	default:
		return &analysis.InputError{File: "--noise", Err: fmt.Errorf("%q; want ar1 or ols", *noise)}
	}
	m, err := infer.ParseMethod(*correct)
	if err != nil {
		return &analysis.InputError{File: "--correct", Err: err}
	}
	opt.Correct = m

	var files inputFiles
	defer files.close()
	var in analysis.FitInputs
	b, err := files.open(*bold)
	if err != nil {
		return err
	}
	in.Bold = *b
	e, err := files.open(*evf)
	if err != nil {
		return err
	}
	in.Events = *e
	if in.Confounds, err = files.optional(*conf); err != nil {
		return err
	}
	if in.Mask, err = files.optional(*maskf); err != nil {
		return err
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	res, err := analysis.Fit(ctx, in, opt)
	if err != nil {
		return err
	}
	if err := res.WriteDir(*out); err != nil {
		return err
	}
	for _, w := range res.Summary.Warnings {
		fmt.Fprintf(stderr, "winnow: warning: %s\n", w)
	}
	printSummary(stdout, res, *out)
	return nil
}

func firstLevel() []string {
	var names []string
	for _, m := range infer.Methods() {
		if m.FirstLevel() {
			names = append(names, m.String())
		}
	}
	return names
}

func printSummary(w io.Writer, res *analysis.FitResult, dir string) {
	s := res.Summary
	fmt.Fprintf(w, "fitted %d voxels, df %.1f, smoothness FWHM %.1f x %.1f x %.1f mm, %.1f resels\n",
		s.MaskVoxels, s.DF, s.FWHMmm[0], s.FWHMmm[1], s.FWHMmm[2], s.Resels)
	for _, c := range s.Contrasts {
		label := c.Correction
		if !c.Corrected {
			label += " (uncorrected)"
		}
		thr := "none can pass"
		if c.StatThreshold != nil {
			thr = fmt.Sprintf("%s > %.3f", c.Kind, *c.StatThreshold)
		}
		fmt.Fprintf(w, "%s [%s, alpha %g, %s]: %d voxels in %d clusters\n", c.Name, label, c.Alpha, thr, c.SurvivingVoxels, len(c.Clusters))
	}
	if s.NullCheck != nil {
		fmt.Fprintf(w, "null check: %s\n", nullcheck.Sentence(*s.NullCheck))
	}
	fmt.Fprintf(w, "wrote %s\n", filepath.Join(dir, "summary.json"))
}
