//go:build !js && !wasip1

package main

import (
	"bufio"
	"context"
	_ "embed"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"time"

	"github.com/klauspost/compress/gzip"

	"gonum.org/v1/gonum/mat"

	"winnow/core/cluster"
	"winnow/core/group"
	"winnow/core/nifti"
)

//go:embed fit_numpy.py
var numpyScript []byte

// figureSpec is a figure's fixed identity: name, unit and target.
type figureSpec struct{ name, unit, target string }

// figureSpecs lists the figures in report order (interface.md).
var figureSpecs = []figureSpec{
	{"ingest_vs_gunzip", "x", "<= 1.1"},
	{"fit_wasm_vs_native", "x", ">= 0.5"},
	{"fit_end_to_end_vs_gunzip", "x", "<= 1.5"},
	{"fit_rss_vs_data", "x", "<= 0.35"},
	{"fit_native_vs_numpy", "x", ">= 2"},
	{"fit_wasm_vs_numpy", "x", ">= 1"},
	{"tfce_exact_speedup", "x", ">= 5"},
	{"group_perm_seconds", "s", "<= 30"},
	{groupMemory, "x", "<= 4"},
	{"page_fit_vs_native", "x", "<= 2"},
	{"page_rethreshold_ms", "ms", "<= 50"},
	{pageGroupName, "x", "<= 3"},
	{pageGroupMemory, "x", "<= 4"},
	{nullCheckName, "x", "<= 1"},
}

func figureNames() []string {
	var n []string
	for _, f := range figureSpecs {
		n = append(n, f.name)
	}
	return n
}

func knownFigure(name string) bool {
	for _, f := range figureSpecs {
		if f.name == name {
			return true
		}
	}
	return false
}

// session carries the state shared between figures.
type session struct {
	cfg  config
	rep  *Report
	run  *synthRun
	figs map[string]*Figure

	cli, cliWasm     string   // built binaries ("" when the build failed)
	cliErr           error    // why the CLI did not build
	gunzip           []sample // paired with fits
	fits             []sample // native CLI fit of the synthetic run
	fitDirs          []string
	numpy            []sample
	numpyErr         error
	wasmVsNative     *float64 // kernel ratio, for the fallback estimate
	wasmFits         []sample
	pythonPath       string
	fitSummaryVoxels int
}

// measureAll runs every figure that is not skipped and returns the report.
func measureAll(ctx context.Context, cfg config) (*Report, error) {
	t0 := time.Now()
	mi := machineInfo()
	s := &session{cfg: cfg, figs: map[string]*Figure{}}
	s.rep = &Report{
		Machine: mi.String(), MachineInfo: mi,
		Date:  time.Now().UTC().Format("2006-01-02 15:04 UTC"),
		Mode:  cfg.Mode,
		Clock: cfg.Clock,
	}
	for _, fsp := range figureSpecs {
		f := &Figure{Name: fsp.name, Unit: fsp.unit, Target: fsp.target}
		s.figs[fsp.name] = f
		s.rep.Figures = append(s.rep.Figures, *f)
	}
	s.pythonPath, s.rep.MachineInfo.Python, s.rep.MachineInfo.NumPy = findNumpy()

	// The synthetic run feeds the ingest and fit figures; skip making it
	// when none of them is wanted.
	needRun := false
	for _, n := range []string{"ingest_vs_gunzip", "fit_end_to_end_vs_gunzip", "fit_rss_vs_data", "fit_native_vs_numpy", "fit_wasm_vs_numpy", nullCheckName} {
		if _, skip := cfg.Skip[n]; !skip {
			needRun = true
		}
	}
	s.run = &synthRun{Spec: cfg.Run, Contrast: contrast}
	if needRun {
		cfg.logf("generating the synthetic run %dx%dx%d x %d in %s", cfg.Run.Dims[0], cfg.Run.Dims[1], cfg.Run.Dims[2], cfg.Run.Volumes, cfg.Dir)
		gt := time.Now()
		runDir := filepath.Join(cfg.Dir, "run")
		if err := os.MkdirAll(runDir, 0o755); err != nil {
			return nil, err
		}
		sr, err := generateRun(runDir, cfg.Run)
		if err != nil {
			return nil, err
		}
		sr.GenerateSecs = time.Since(gt).Seconds()
		s.run = sr
		cfg.logf("generated %.0f MB (%.0f MB compressed) in %.1f s", float64(cfg.Run.DataBytes())/1e6, float64(sr.CompressedB)/1e6, sr.GenerateSecs)
	}
	s.fillInputs()
	s.save()

	steps := []struct {
		names []string
		f     func(context.Context) error
	}{
		{[]string{"ingest_vs_gunzip"}, s.ingest},
		{[]string{"tfce_exact_speedup"}, s.tfce},
		{[]string{"fit_wasm_vs_native"}, s.kernelWasm},
		{[]string{"fit_end_to_end_vs_gunzip", "fit_rss_vs_data", "fit_native_vs_numpy"}, s.fitNative},
		{[]string{"fit_wasm_vs_numpy"}, s.fitWasm},
		{[]string{nullCheckName}, s.nullCheck},
		{[]string{"group_perm_seconds", groupMemory}, s.group},
		{[]string{"page_fit_vs_native", "page_rethreshold_ms"}, s.page},
		{[]string{pageGroupName, pageGroupMemory}, s.pageGroup},
	}
	for _, st := range steps {
		all := true
		for _, n := range st.names {
			if _, ok := cfg.Skip[n]; !ok {
				all = false
			}
		}
		if all {
			for _, n := range st.names {
				s.figs[n].Note = cfg.Skip[n]
			}
			s.save()
			continue
		}
		cfg.logf("measuring %s", strings.Join(st.names, ", "))
		if err := st.f(ctx); err != nil {
			for _, n := range st.names {
				if f := s.figs[n]; f.Value == nil && f.Note == "" {
					f.Note = "not measured: " + oneLine(err.Error())
				}
			}
		}
		for _, n := range st.names {
			if r, ok := cfg.Skip[n]; ok {
				*s.figs[n] = Figure{Name: n, Unit: s.figs[n].Unit, Target: s.figs[n].Target, Note: r}
			}
		}
		s.save()
	}
	s.rep.Seconds = time.Since(t0).Seconds()
	s.save()
	return s.rep, nil
}

// save copies the figures into the report and rewrites the JSON file, so a
// long run that is interrupted keeps what it measured.
func (s *session) save() {
	for i, f := range s.rep.Figures {
		s.rep.Figures[i] = *s.figs[f.Name]
	}
	s.rep.MachineInfo.LoadEnd = loadAvg()
	if s.cfg.JSONPath != "" {
		if err := writeJSON(s.cfg.JSONPath, s.rep); err != nil {
			s.cfg.logf("writing %s: %v", s.cfg.JSONPath, err)
		}
	}
}

func (s *session) fillInputs() {
	c, sr := s.cfg, s.run
	n := func(d [3]int) int { return d[0] * d[1] * d[2] }
	s.rep.Inputs = Inputs{
		Seed: c.Run.Seed,
		Run: RunInputs{
			Dims:    [4]int{c.Run.Dims[0], c.Run.Dims[1], c.Run.Dims[2], c.Run.Volumes},
			VoxelMM: c.Run.VoxelMM, TR: c.Run.TR, Datatype: "int16",
			DataBytes: c.Run.DataBytes(), CompressedBytes: sr.CompressedB, HeadFraction: sr.HeadFraction,
			Design:   fmt.Sprintf("blocks of %g s, 2 conditions (%s, %s), 6 confound columns", sr.BlockSec, condA, condB),
			Contrast: sr.Contrast,
		},
		TFCEDims: c.TFCEDims, TFCEVoxels: n(c.TFCEDims),
		GroupMaps: c.GroupMaps, GroupDims: c.GroupDims, GroupVoxels: n(c.GroupDims),
		GroupPerms: c.GroupPerms, GroupPermsScale: c.GroupTarget,
		GLMBench: fmt.Sprintf("BenchmarkAccumulate/%s of core/glm (20 regressors), about %.0fM voxel-volumes per timed difference", c.GLMBench, c.GLMWork/1e6),
		PageData: "the built-in demo run (analysis.DemoFiles(1)) and its contrast",
	}
	if sr.CompressedB == 0 {
		s.rep.Inputs.Run.Design = "not generated (no figure in this session needed it)"
	}
}

// setFigure stores per-run values: the value is their median.
func (s *session) setFigure(name string, vals []float64, clock, note string) {
	f := s.figs[name]
	f.Clock, f.Note = clock, note
	med, lo, hi, ok := stats(vals)
	if !ok {
		f.Value, f.Median, f.Min, f.Max, f.Meets = nil, nil, nil, nil, nil
		f.Runs = 0
		if f.Note == "" {
			f.Note = "no finite measurement"
		}
		return
	}
	f.Value, f.Median, f.Min, f.Max = &med, ptr(med), &lo, &hi
	f.Runs = len(vals)
	f.Samples = vals
	m, err := meetsTarget(f.Target, med)
	if err == nil {
		f.Meets = &m
	}
}

func ptr[T any](v T) *T { return &v }

func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }

// ---- ingest_vs_gunzip ---------------------------------------------------

func gunzipFile(path string) (sample, error) {
	return timeIt(func() error {
		f, err := os.Open(path)
		if err != nil {
			return err
		}
		defer f.Close()
		zr, err := gzip.NewReader(f)
		if err != nil {
			return err
		}
		_, err = io.Copy(io.Discard, zr)
		return err
	})
}

func ingestFile(path string) (sample, int, error) {
	vols := 0
	smp, err := timeIt(func() error {
		f, err := os.Open(path)
		if err != nil {
			return err
		}
		defer f.Close()
		r, err := nifti.NewReader(f, nifti.Limits{})
		if err != nil {
			return err
		}
		vol := make([]float32, r.Header().VolumeVoxels())
		for {
			err := r.ReadVolume(vol)
			if errors.Is(err, io.EOF) {
				return nil
			}
			if err != nil {
				return err
			}
			vols++
		}
	})
	return smp, vols, err
}

func (s *session) ingest(context.Context) error {
	var ratio, wall []float64
	var g, in sample
	for i := 0; i < s.cfg.Runs; i++ {
		var err error
		if g, err = gunzipFile(s.run.Bold); err != nil {
			return err
		}
		var n int
		if in, n, err = ingestFile(s.run.Bold); err != nil {
			return err
		}
		if n != s.cfg.Run.Volumes {
			return fmt.Errorf("read %d volumes, want %d", n, s.cfg.Run.Volumes)
		}
		ratio = append(ratio, in.secs(s.cfg.Clock)/g.secs(s.cfg.Clock))
		wall = append(wall, in.Wall.Seconds()/g.Wall.Seconds())
	}
	wm, _, _, _ := stats(wall)
	s.setFigure("ingest_vs_gunzip", ratio, s.cfg.Clock, fmt.Sprintf(
		"nifti.Reader.ReadVolume over every volume (int16 to float32) ÷ klauspost gzip to io.Discard, same file, in this process; last run %.2f s vs %.2f s (%s); wall-clock ratio %.2f",
		in.secs(s.cfg.Clock), g.secs(s.cfg.Clock), s.cfg.Clock, wm))
	return nil
}

// ---- tfce_exact_speedup -------------------------------------------------

func (s *session) tfce(context.Context) error {
	dims := s.cfg.TFCEDims
	img := smoothMap(dims, 2, s.cfg.Run.Seed)
	var ratio, wall []float64
	var ex, st sample
	var maxE, maxS float64
	// Repeat each transform within a run so that a run lasts at least
	// about 0.3 s of its clock (the exact TFCE takes tens of milliseconds).
	var e, sp []float64
	e1, _ := timeIt(func() error { e = cluster.TFCE(img, dims, cluster.Corners, 0.5, 2); return nil })
	s1, _ := timeIt(func() error { sp = cluster.TFCEStepped(img, dims, cluster.Corners, 0.5, 2, 0.1); return nil })
	maxE, maxS = maxOf(e), maxOf(sp)
	reps := func(one sample) int { return max(1, int(math.Ceil(0.3/math.Max(one.secs(s.cfg.Clock), 1e-4)))) }
	kE, kS := reps(e1), reps(s1)
	for i := 0; i < s.cfg.Runs; i++ {
		ex, _ = timeIt(func() error {
			for range kE {
				cluster.TFCE(img, dims, cluster.Corners, 0.5, 2)
			}
			return nil
		})
		st, _ = timeIt(func() error {
			for range kS {
				cluster.TFCEStepped(img, dims, cluster.Corners, 0.5, 2, 0.1)
			}
			return nil
		})
		ex.Wall, ex.CPU = ex.Wall/time.Duration(kE), ex.CPU/time.Duration(kE)
		st.Wall, st.CPU = st.Wall/time.Duration(kS), st.CPU/time.Duration(kS)
		ratio = append(ratio, st.secs(s.cfg.Clock)/ex.secs(s.cfg.Clock))
		wall = append(wall, st.Wall.Seconds()/ex.Wall.Seconds())
	}
	wm, _, _, _ := stats(wall)
	s.setFigure("tfce_exact_speedup", ratio, s.cfg.Clock, fmt.Sprintf(
		"stepped TFCE (dh 0.1) ÷ exact TFCE, E 0.5, H 2, 26-connectivity, on a %d-voxel smooth noise map (sigma 2 voxels) with 4 blobs; each run times %d exact and %d stepped transforms; last run %.3f s vs %.3f s per transform (%s); max TFCE exact %.4g, stepped %.4g; wall-clock ratio %.2f",
		len(img), kE, kS, st.secs(s.cfg.Clock), ex.secs(s.cfg.Clock), s.cfg.Clock, maxE, maxS, wm))
	return nil
}

func maxOf(x []float64) float64 {
	m := math.Inf(-1)
	for _, v := range x {
		m = math.Max(m, v)
	}
	return m
}

// ---- fit_wasm_vs_native -------------------------------------------------

func goEnv(root, key string) (string, error) {
	cmd := exec.Command("go", "env", key)
	cmd.Dir = root
	out, err := cmd.Output()
	if err != nil {
		return "", fmt.Errorf("go env %s: %v", key, err)
	}
	return strings.TrimSpace(string(out)), nil
}

// wasmExec is the Go distribution's runner for js/wasm programs under Node.
func (s *session) wasmExec() (string, error) {
	if _, err := exec.LookPath("node"); err != nil {
		return "", errors.New("node is not on PATH")
	}
	goroot, err := goEnv(s.cfg.Root, "GOROOT")
	if err != nil {
		return "", err
	}
	p := filepath.Join(goroot, "lib", "wasm", "go_js_wasm_exec")
	if _, err := os.Stat(p); err != nil {
		p = filepath.Join(goroot, "misc", "wasm", "go_js_wasm_exec")
		if _, err := os.Stat(p); err != nil {
			return "", fmt.Errorf("go_js_wasm_exec not found under %s", goroot)
		}
	}
	return p, nil
}

func (s *session) goBuild(wasm bool, args ...string) error {
	cmd := exec.Command("go", args...)
	cmd.Dir = s.cfg.Root
	cmd.Env = os.Environ()
	if wasm {
		cmd.Env = append(cmd.Env, "GOOS=js", "GOARCH=wasm")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 15*time.Minute)
	defer cancel()
	_, _, err := runCmd(ctx, cmd)
	return err
}

// benchRun runs one benchmark for a fixed number of iterations and returns
// the process's measurement and the value it reported in unit.
func benchRun(cmd *exec.Cmd, unit string) (sample, float64, error) {
	smp, out, err := runCmd(nil, cmd)
	if err != nil {
		return smp, 0, err
	}
	sc := bufio.NewScanner(strings.NewReader(string(out)))
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		for i := 1; i < len(f); i++ {
			if f[i] == unit {
				v, err := strconv.ParseFloat(f[i-1], 64)
				return smp, v, err
			}
		}
	}
	return smp, 0, fmt.Errorf("no %q in the benchmark output: %.300q", unit, out)
}

// kernelVoxels is the in-mask voxel count of a BenchmarkAccumulate sub-benchmark
// (core/glm/bench_test.go: 40x40x32 and 64x64x49 grids).
func kernelVoxels(sub string) int {
	if sub == "voxels=50k" {
		return 40 * 40 * 32
	}
	return 64 * 64 * 49
}

// kernelWasm measures the accumulate kernel natively and under Node.
//
// With --clock cpu each run executes the benchmark twice per platform with a
// fixed iteration count (-test.benchtime=Nx), n1 and n2 iterations, and takes
// the throughput from the difference of the two processes' CPU times:
// voxels·(n2 − n1) / (cpu2 − cpu1). Start-up, wasm compilation and the
// benchmark's set-up cancel out, and the other tenants of a shared machine do
// not enter. With --clock wall the benchmark's own metric (voxel-volumes/s,
// wall clock) of the longer run is used. Both are in the note.
func (s *session) kernelWasm(context.Context) error {
	exe, err := s.wasmExec()
	if err != nil {
		return err
	}
	nat := filepath.Join(s.cfg.Dir, "glm.test")
	wsm := filepath.Join(s.cfg.Dir, "glm.wasm")
	if err := s.goBuild(false, "test", "-c", "-o", nat, "./core/glm"); err != nil {
		return err
	}
	if err := s.goBuild(true, "test", "-c", "-o", wsm, "./core/glm"); err != nil {
		return err
	}
	vox := kernelVoxels(s.cfg.GLMBench)
	n1 := 8
	n2 := n1 + max(16, int(s.cfg.GLMWork/float64(vox)))
	args := func(n int) []string {
		return []string{"-test.run=^$", "-test.bench=^BenchmarkAccumulate$/^" + s.cfg.GLMBench + "$",
			fmt.Sprintf("-test.benchtime=%dx", n), "-test.count=1"}
	}
	// throughput returns (cpu-based, wall metric) voxel-volumes/s.
	throughput := func(wasm bool) (float64, float64, error) {
		var cpu [2]time.Duration
		var metric float64
		for k, n := range []int{n1, n2} {
			var c *exec.Cmd
			if wasm {
				c = exec.Command(exe, append([]string{wsm}, args(n)...)...)
			} else {
				c = exec.Command(nat, args(n)...)
			}
			c.Dir = filepath.Join(s.cfg.Root, "core", "glm")
			smp, m, err := benchRun(c, "voxel-volumes/s")
			if err != nil {
				return 0, 0, err
			}
			cpu[k], metric = smp.CPU, m
		}
		d := (cpu[1] - cpu[0]).Seconds()
		if d <= 0 {
			return math.NaN(), metric, nil
		}
		return float64(vox) * float64(n2-n1) / d, metric, nil
	}
	// CPU time per unit of work still varies with what shares the core, and
	// now and then one pair is off by a factor near 1.5: five runs give the
	// median some footing.
	runs := s.cfg.Runs
	if runs >= 3 {
		runs = 5
	}
	var ratio, wallRatio, nv, wv, nw, ww []float64
	for i := 0; i < runs; i++ {
		nc, nm, err := throughput(false)
		if err != nil {
			return err
		}
		wc, wm, err := throughput(true)
		if err != nil {
			return err
		}
		nv, wv, nw, ww = append(nv, nc), append(wv, wc), append(nw, nm), append(ww, wm)
		wallRatio = append(wallRatio, wm/nm)
		if s.cfg.Clock == "cpu" {
			ratio = append(ratio, wc/nc)
		} else {
			ratio = append(ratio, wm/nm)
		}
	}
	mn, _, _, _ := stats(nv)
	mw, _, _, _ := stats(wv)
	mnw, _, _, _ := stats(nw)
	mww, _, _, _ := stats(ww)
	wr, _, _, _ := stats(wallRatio)
	how := fmt.Sprintf("CPU time: voxels x (%d - %d) iterations / difference of the CPU times of a %d- and a %d-iteration process", n2, n1, n2, n1)
	if s.cfg.Clock == "wall" {
		how = "the benchmark's own wall-clock metric"
	}
	s.setFigure("fit_wasm_vs_native", ratio, s.cfg.Clock, fmt.Sprintf(
		"BenchmarkAccumulate/%s of core/glm (20 regressors, %d voxels): throughput of the test binary built for js/wasm and run under Node (go_js_wasm_exec) ÷ the native test binary, runs interleaved; %s; medians %.3g (wasm) vs %.3g (native) voxel-volumes/s; the benchmark's wall metric gives %.3g vs %.3g, ratio %.2f",
		s.cfg.GLMBench, vox, how, mw, mn, mww, mnw, wr))
	if f := s.figs["fit_wasm_vs_native"]; f.Value != nil {
		s.wasmVsNative = f.Value
	}
	return nil
}

// ---- the fit figures ----------------------------------------------------

func (s *session) buildCLI() {
	s.cli = filepath.Join(s.cfg.Dir, "winnow")
	if runtime.GOOS == "windows" {
		s.cli += ".exe"
	}
	if err := s.goBuild(false, "build", "-o", s.cli, "./core/cmd/winnow"); err != nil {
		s.cli, s.cliErr = "", err
	}
}

func (s *session) fitArgs(out string) []string {
	return []string{"fit", "--bold", s.run.Bold, "--events", s.run.Events, "--confounds", s.run.Confounds,
		"--contrast", s.run.Contrast, "--out", out}
}

// summaryVoxels reads mask_voxels from a fit's summary.json.
func summaryVoxels(dir string) (int, error) {
	b, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		return 0, err
	}
	var sum struct {
		MaskVoxels int `json:"mask_voxels"`
	}
	if err := json.Unmarshal(b, &sum); err != nil {
		return 0, err
	}
	return sum.MaskVoxels, nil
}

func (s *session) fitNative(ctx context.Context) error {
	s.buildCLI()
	if s.cliErr != nil {
		return fmt.Errorf("building the winnow CLI: %v", s.cliErr)
	}
	wantNumpy := s.cfg.Skip["fit_native_vs_numpy"] == "" || s.cfg.Skip["fit_wasm_vs_numpy"] == ""
	script := filepath.Join(s.cfg.Dir, "fit_numpy.py")
	if err := os.WriteFile(script, numpyScript, 0o644); err != nil {
		return err
	}
	if s.pythonPath == "" {
		s.numpyErr = errors.New("no python3 with numpy found (tried /usr/bin/python3, then python3 on PATH)")
	}
	var e2e, e2eWall, rss, vsNumpy, vsNumpyWall []float64
	var numpyVox int
	for i := 0; i < s.cfg.Runs; i++ {
		g, err := gunzipFile(s.run.Bold)
		if err != nil {
			return err
		}
		out := filepath.Join(s.cfg.Dir, fmt.Sprintf("fit-%d", i))
		c := exec.Command(s.cli, s.fitArgs(out)...)
		tctx, cancel := context.WithTimeout(ctx, s.cfg.Timeout)
		f, _, err := runCmd(tctx, c)
		cancel()
		if err != nil {
			return err
		}
		if i == 0 {
			if s.fitSummaryVoxels, err = summaryVoxels(out); err != nil {
				return fmt.Errorf("the fit's summary.json: %v", err)
			}
		}
		s.gunzip, s.fits, s.fitDirs = append(s.gunzip, g), append(s.fits, f), append(s.fitDirs, out)
		e2e = append(e2e, f.secs(s.cfg.Clock)/g.secs(s.cfg.Clock))
		e2eWall = append(e2eWall, f.Wall.Seconds()/g.Wall.Seconds())
		if f.MaxRSS > 0 {
			rss = append(rss, float64(f.MaxRSS)/float64(s.cfg.Run.DataBytes()))
		}
		if wantNumpy && s.numpyErr == nil {
			n, vox, err := s.runNumpy(ctx, script, filepath.Join(s.fitDirs[0], "design.tsv"))
			if err != nil {
				s.numpyErr = err
			} else {
				s.numpy = append(s.numpy, n)
				numpyVox = vox
				vsNumpy = append(vsNumpy, n.secs(s.cfg.Clock)/f.secs(s.cfg.Clock))
				vsNumpyWall = append(vsNumpyWall, n.Wall.Seconds()/f.Wall.Seconds())
			}
		}
		s.save()
	}
	last := s.fits[len(s.fits)-1]
	lg := s.gunzip[len(s.gunzip)-1]
	// Wall clock: the fit decodes in one goroutine while another accumulates
	// and solves on the other cores, so what a user waits for is the wall
	// time; the single-threaded gunzip's wall and CPU times agree. The CPU
	// ratio (all the fit's threads) stays in the note.
	cm, _, _, _ := stats(e2e)
	s.setFigure("fit_end_to_end_vs_gunzip", e2eWall, "wall", fmt.Sprintf(
		"`winnow fit` (native CLI subprocess: read, automatic mask, AR(1) GLS, one t contrast, fwe-rft, maps and summary written; %d mask voxels) ÷ klauspost gzip of the same file in this process, wall clock (the fit overlaps decoding and accumulation on %d cores); last run wall %.2f s vs %.2f s; CPU %.2f s vs %.2f s (%s), CPU ratio %.2f",
		s.fitSummaryVoxels, runtime.NumCPU(), last.Wall.Seconds(), lg.Wall.Seconds(), last.secs(s.cfg.Clock), lg.secs(s.cfg.Clock), s.cfg.Clock, cm))
	if len(rss) > 0 {
		s.setFigure("fit_rss_vs_data", rss, "", fmt.Sprintf(
			"peak RSS of the fit subprocess (getrusage ru_maxrss) ÷ %d bytes of decompressed image data; last run %.0f MB",
			s.cfg.Run.DataBytes(), float64(last.MaxRSS)/1e6))
	} else {
		s.setFigure("fit_rss_vs_data", nil, "", "peak RSS is not reported on this platform")
	}
	switch {
	case s.cfg.Skip["fit_native_vs_numpy"] != "":
	case s.numpyErr != nil:
		s.setFigure("fit_native_vs_numpy", nil, s.cfg.Clock, "not measured: "+oneLine(s.numpyErr.Error()))
	default:
		nm, _, _, _ := stats(vsNumpyWall)
		ln := s.numpy[len(s.numpy)-1]
		s.setFigure("fit_native_vs_numpy", vsNumpy, s.cfg.Clock, fmt.Sprintf(
			"speed ratio: scripts/bench/fit_numpy.py (%s, numpy %s, one BLAS thread: gzip + frombuffer, mask, float64 OLS with the fit's own design.tsv, residual lag-1 autocorrelation; %d voxels) ÷ `winnow fit` (native CLI); last run %.2f s vs %.2f s (%s); wall-clock ratio %.2f",
			s.pythonPath, s.rep.MachineInfo.NumPy, numpyVox, ln.secs(s.cfg.Clock), last.secs(s.cfg.Clock), s.cfg.Clock, nm))
	}
	return nil
}

// findNumpy returns a python3 that imports numpy, with its versions.
func findNumpy() (path, pyVersion, npVersion string) {
	cands := []string{"/usr/bin/python3"}
	if p, err := exec.LookPath("python3"); err == nil {
		cands = append(cands, p)
	}
	for _, c := range cands {
		out, err := exec.Command(c, "-c", "import sys, numpy; print(sys.version.split()[0], numpy.__version__)").Output()
		if err != nil {
			continue
		}
		f := strings.Fields(string(out))
		if len(f) == 2 {
			return c, f[0], f[1]
		}
	}
	return "", "", ""
}

func (s *session) runNumpy(ctx context.Context, script, designTSV string) (sample, int, error) {
	c := exec.Command(s.pythonPath, script, "--bold", s.run.Bold, "--design", designTSV)
	c.Env = append(os.Environ(), "OPENBLAS_NUM_THREADS=1", "OMP_NUM_THREADS=1", "MKL_NUM_THREADS=1")
	tctx, cancel := context.WithTimeout(ctx, s.cfg.Timeout)
	defer cancel()
	smp, out, err := runCmd(tctx, c)
	if err != nil {
		return smp, 0, err
	}
	var res struct {
		Voxels int `json:"voxels"`
	}
	if err := json.Unmarshal(out, &res); err != nil || res.Voxels == 0 {
		return smp, 0, fmt.Errorf("fit_numpy.py printed %.200q, want a JSON object with voxels > 0", out)
	}
	return smp, res.Voxels, nil
}

// fitWasm runs the same CLI compiled to js/wasm under Node on the same
// files: a real WebAssembly end-to-end fit.
func (s *session) fitWasm(ctx context.Context) error {
	if len(s.numpy) == 0 {
		err := s.numpyErr
		if err == nil {
			err = errors.New("the numpy run did not happen (see fit_native_vs_numpy)")
		}
		s.setFigure("fit_wasm_vs_numpy", nil, s.cfg.Clock, "not measured: "+oneLine(err.Error()))
		return nil
	}
	exe, err := s.wasmExec()
	if err == nil {
		s.cliWasm = filepath.Join(s.cfg.Dir, "winnow.wasm")
		err = s.goBuild(true, "build", "-o", s.cliWasm, "./core/cmd/winnow")
	}
	var ratio, wall []float64
	if err == nil {
		for i := 0; i < s.cfg.LongRuns && i < len(s.numpy); i++ {
			out := filepath.Join(s.cfg.Dir, fmt.Sprintf("fit-wasm-%d", i))
			c := exec.Command(exe, append([]string{s.cliWasm}, s.fitArgs(out)...)...)
			tctx, cancel := context.WithTimeout(ctx, s.cfg.Timeout)
			w, _, e := runCmd(tctx, c)
			cancel()
			if e != nil {
				err = e
				break
			}
			s.wasmFits = append(s.wasmFits, w)
			ratio = append(ratio, s.numpy[i].secs(s.cfg.Clock)/w.secs(s.cfg.Clock))
			wall = append(wall, s.numpy[i].Wall.Seconds()/w.Wall.Seconds())
		}
	}
	if err == nil && len(ratio) > 0 {
		wm, _, _, _ := stats(wall)
		lw := s.wasmFits[len(s.wasmFits)-1]
		runsNote := ""
		if s.cfg.LongRuns == 1 {
			runsNote = " One run only (long)."
		}
		s.setFigure("fit_wasm_vs_numpy", ratio, s.cfg.Clock, fmt.Sprintf(
			"speed ratio: fit_numpy.py ÷ `winnow fit` compiled for js/wasm and run end to end under Node (go_js_wasm_exec, same files, same flags), paired with numpy runs 1..%d; last wasm run %.2f s (%s), wall %.2f s; wall-clock ratio %.2f.%s",
			len(ratio), lw.secs(s.cfg.Clock), s.cfg.Clock, lw.Wall.Seconds(), wm, runsNote))
		return nil
	}
	// Fallback: the native fit scaled by the kernel's wasm/native ratio.
	if s.wasmVsNative == nil || len(s.fits) == 0 {
		s.setFigure("fit_wasm_vs_numpy", nil, s.cfg.Clock, "not measured: the wasm end-to-end run failed ("+oneLine(fmt.Sprint(err))+") and fit_wasm_vs_native is not available for an estimate")
		return nil
	}
	k := *s.wasmVsNative
	for i := range s.numpy {
		if i < len(s.fits) {
			ratio = append(ratio, s.numpy[i].secs(s.cfg.Clock)/(s.fits[i].secs(s.cfg.Clock)/k))
		}
	}
	s.setFigure("fit_wasm_vs_numpy", ratio, s.cfg.Clock, fmt.Sprintf(
		"estimate: numpy time ÷ (native fit time ÷ fit_wasm_vs_native %.2f), because the wasm end-to-end run failed: %s", k, oneLine(fmt.Sprint(err))))
	return nil
}

// ---- group_perm_seconds, group_memory_vs_maps -------------------------------

// groupMemoryCLI runs `winnow group` (tfce, one-sample sign flips, the
// figure's relabellings, 2 workers) on the group figures' maps as float32
// .nii files and divides its peak RSS by the bytes of the maps' data.
func (s *session) groupMemoryCLI(ctx context.Context) error {
	s.buildCLI()
	if s.cliErr != nil {
		s.setFigure(groupMemory, nil, "", "not measured: building the winnow CLI: "+oneLine(s.cliErr.Error()))
		return nil
	}
	dims, n := s.cfg.GroupDims, s.cfg.GroupMaps
	mapBytes := int64(n) * int64(dims[0]*dims[1]*dims[2]) * 4
	dir := filepath.Join(s.cfg.Dir, "group-maps")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	names, _, _, err := writeGroupMaps(dir, dims, n, s.cfg.Run.Seed)
	if err != nil {
		return err
	}
	paths := make([]string, n)
	for i, nm := range names {
		paths[i] = filepath.Join(dir, nm)
	}
	var ratio []float64
	var last sample
	for i := 0; i < s.cfg.LongRuns; i++ {
		c := exec.Command(s.cli, "group", "--maps", strings.Join(paths, ","), "--correct", "tfce",
			"--perms", strconv.Itoa(s.cfg.GroupPerms), "--workers", "2", "--out", filepath.Join(s.cfg.Dir, fmt.Sprintf("group-out-%d", i)))
		tctx, cancel := context.WithTimeout(ctx, s.cfg.Timeout)
		smp, _, err := runCmd(tctx, c)
		cancel()
		if err != nil {
			return err
		}
		if smp.MaxRSS <= 0 {
			s.setFigure(groupMemory, nil, "", "peak RSS is not reported on this platform")
			return nil
		}
		last = smp
		ratio = append(ratio, float64(smp.MaxRSS)/float64(mapBytes))
	}
	runsNote := ""
	if len(ratio) == 1 {
		runsNote = " One run only (long)."
	}
	s.setFigure(groupMemory, ratio, "", fmt.Sprintf(
		"peak RSS of `winnow group` (native CLI subprocess: %d float32 .nii maps of %dx%dx%d read, tfce, one-sample sign flips, %d relabellings, 2 workers, maps and summary written; getrusage ru_maxrss) ÷ %d bytes of the maps' float32 data; last run %.0f MB in %.1f s wall.%s",
		n, dims[0], dims[1], dims[2], s.cfg.GroupPerms, mapBytes, float64(last.MaxRSS)/1e6, last.Wall.Seconds(), runsNote))
	return nil
}

// groupMemory is the peak memory of `winnow group` against its maps (issue 7:
// peak memory at most 4 times the input maps).
const groupMemory = "group_memory_vs_maps"

func (s *session) group(ctx context.Context) error {
	if s.cfg.Skip[groupMemory] == "" {
		if err := s.groupMemoryCLI(ctx); err != nil {
			return err
		}
	}
	if s.cfg.Skip["group_perm_seconds"] != "" {
		return nil
	}
	dims := s.cfg.GroupDims
	nv := dims[0] * dims[1] * dims[2]
	n := s.cfg.GroupMaps
	// One-sample data: subject maps of smooth noise plus a shared effect, in memory.
	common := smoothMap(dims, 1.5, s.cfg.Run.Seed)
	y := make([]float64, n*nv)
	for i := 0; i < n; i++ {
		noise := smoothMap(dims, 1.5, s.cfg.Run.Seed+uint64(i)+1)
		for v := range noise {
			y[i*nv+v] = 0.3*float64(common[v]) + float64(noise[v])
		}
	}
	vox := make([]int32, nv)
	for i := range vox {
		vox[i] = int32(i)
	}
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	model, err := group.NewModel(mat.NewDense(n, 1, ones), [][]float64{{1}})
	if err != nil {
		return err
	}
	plan, err := model.Plan(s.cfg.GroupPerms, s.cfg.Run.Seed)
	if err != nil {
		return err
	}
	workers := runtime.NumCPU()
	scale := float64(s.cfg.GroupTarget) / float64(plan.N)
	var secs, cpu []float64
	var maxT float64
	for i := 0; i < s.cfg.LongRuns; i++ {
		var null *group.Null
		smp, err := timeIt(func() error {
			prob := model.Prepare(y, group.Space{Dims: dims, Voxels: vox})
			var err error
			null, err = prob.Run(ctx, &plan, 0, plan.N, group.Options{Stats: group.MaxTFCE, Workers: workers})
			return err
		})
		if err != nil {
			return err
		}
		if len(null.TFCE) != plan.N {
			return fmt.Errorf("core/group returned %d TFCE maxima, want %d", len(null.TFCE), plan.N)
		}
		maxT = maxOf(null.TFCE)
		secs = append(secs, smp.Wall.Seconds()*scale)
		cpu = append(cpu, smp.CPU.Seconds()*scale)
	}
	cm, _, _, _ := stats(cpu)
	scaleNote := ""
	if s.cfg.GroupTarget != plan.N {
		scaleNote = fmt.Sprintf(" %d sign flips run, times scaled linearly to %d.", plan.N, s.cfg.GroupTarget)
	}
	runsNote := ""
	if s.cfg.LongRuns == 1 {
		runsNote = " One run only (long)."
	}
	s.setFigure("group_perm_seconds", secs, "wall", fmt.Sprintf(
		"core/group in this process (the permutation engine alone, no file I/O): Model.Prepare + Problem.Run of a one-sample %s plan, MaxTFCE, %d workers, on %d maps of %d voxels (smooth noise plus a shared effect); wall seconds, CPU %.1f s (all workers); largest null TFCE maximum %.4g.%s%s",
		plan.Scheme, workers, n, nv, cm, maxT, scaleNote, runsNote))
	return nil
}
