//go:build !js && !wasip1

// Command bench measures winnow's performance figures on synthetic inputs it
// generates itself (seeded, in a temporary directory) and prints them as a
// table; with --json it also writes them as JSON, with --markdown as the
// README's performance table.
//
//	go run ./scripts/bench [--quick] [--json FILE] [--markdown] [--clock cpu|wall]
//	                       [--skip NAME,...] [--keep] [--seed N]
//	go run ./scripts/bench --from FILE [--markdown]   # re-print a saved JSON
//
// The figure names and the JSON keys are a contract (interface.md,
// "Benchmarks"). Each figure is a ratio of two measurements made in the same
// run (or a time in the unit it names), repeated several times; the value is
// the median over the runs, with min and max beside it. A figure that cannot
// be measured on this machine (no Node, numpy or Chromium, a package not
// built yet) has a null value and a note saying why.
//
// Times: on a shared machine the wall clock mostly measures the other
// tenants, so by default a ratio of two workloads is made of the CPU time
// (user + system) of the processes doing the work (--clock cpu); the
// wall-clock ratio is given in the figure's note. The accumulate kernel's
// throughput comes from the difference of the CPU times of two benchmark
// processes with different iteration counts, so start-up and compilation
// cancel. Figures that are wall time by nature (the page in Chromium, which
// is several processes working in parallel, and the multi-worker group
// permutations) say so in their "clock" field and give CPU totals in the
// note.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"
)

func main() { os.Exit(run(os.Args[1:], os.Stdout, os.Stderr)) }

// config is one benchmark session.
type config struct {
	Mode        string // "quick", "full" or "smoke"
	Run         runSpec
	Runs        int     // repetitions of each figure
	LongRuns    int     // repetitions of the very long ones (wasm end to end, group)
	GLMBench    string  // sub-benchmark of BenchmarkAccumulate
	GLMWork     float64 // voxel-volumes of the longer of the two benchmark processes' difference
	TFCEDims    [3]int
	GroupMaps   int
	GroupDims   [3]int
	GroupPerms  int // permutations actually run
	GroupTarget int // permutations the figure is stated for (time scaled linearly)
	Clock       string
	Skip        map[string]string // figure name -> reason
	Root        string            // module root
	Dir         string            // scratch directory
	Log         io.Writer
	JSONPath    string
	Timeout     time.Duration // per subprocess
}

func fullConfig() config {
	return config{
		Mode:     "full",
		Run:      runSpec{Dims: [3]int{96, 96, 60}, VoxelMM: [3]float64{2.5, 2.5, 2.5}, Volumes: 600, TR: 1.0},
		Runs:     3,
		LongRuns: 1,
		GLMBench: "voxels=200k", GLMWork: 48e6,
		TFCEDims:  [3]int{74, 74, 37},
		GroupMaps: 20, GroupDims: [3]int{74, 74, 37}, GroupPerms: 5000, GroupTarget: 5000,
		Timeout: 40 * time.Minute,
	}
}

func quickConfig() config {
	c := fullConfig()
	c.Mode = "quick"
	c.Run = runSpec{Dims: [3]int{64, 64, 36}, VoxelMM: [3]float64{3, 3, 3.5}, Volumes: 200, TR: 2.0}
	c.LongRuns = 3
	c.GLMBench, c.GLMWork = "voxels=200k", 24e6
	c.GroupPerms = 250
	c.Timeout = 10 * time.Minute
	return c
}

// smokeConfig is tiny: the in-process figures only, for the package's test.
func smokeConfig() config {
	c := quickConfig()
	c.Mode = "smoke"
	c.Run = runSpec{Dims: [3]int{20, 20, 12}, VoxelMM: [3]float64{3, 3, 3}, Volumes: 40, TR: 2.0}
	c.Runs, c.LongRuns = 1, 1
	c.TFCEDims = [3]int{20, 20, 12}
	c.GroupMaps, c.GroupDims, c.GroupPerms, c.GroupTarget = 4, [3]int{12, 12, 8}, 20, 20
	return c
}

func run(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("bench", flag.ContinueOnError)
	fs.SetOutput(stderr)
	quick := fs.Bool("quick", false, "smaller inputs (64x64x36 x 200), fewer permutations; a few minutes")
	jsonPath := fs.String("json", "", "also write the figures as JSON to `FILE`")
	markdown := fs.Bool("markdown", false, "print the README performance table (Markdown) instead of the plain table")
	from := fs.String("from", "", "print a saved JSON `FILE` (from --json) instead of measuring")
	clock := fs.String("clock", "cpu", "time of single-threaded ratios: cpu (user+system of the process, for shared machines) or wall")
	skip := fs.String("skip", "", "comma-separated figure names not to measure")
	keep := fs.Bool("keep", false, "keep the scratch directory with the generated inputs")
	seed := fs.Uint64("seed", 1, "seed of the synthetic inputs")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: go run ./scripts/bench [--quick] [--json FILE] [--markdown] [--clock cpu|wall] [--skip NAME,...] [--keep] [--seed N]\n       go run ./scripts/bench --from FILE [--markdown]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "bench: unexpected argument %q\n", fs.Arg(0))
		return 2
	}
	if *from != "" {
		r, err := readJSON(*from)
		if err != nil {
			fmt.Fprintln(stderr, "bench:", err)
			return 1
		}
		if *markdown {
			writeMarkdown(stdout, r)
		} else {
			writeTable(stdout, r)
		}
		return 0
	}
	if *clock != "cpu" && *clock != "wall" {
		fmt.Fprintf(stderr, "bench: --clock %q; want cpu or wall\n", *clock)
		return 2
	}
	cfg := fullConfig()
	if *quick {
		cfg = quickConfig()
	}
	cfg.Clock = *clock
	cfg.Run.Seed = *seed
	cfg.Log = stderr
	cfg.JSONPath = *jsonPath
	cfg.Skip = map[string]string{}
	for _, name := range strings.Split(*skip, ",") {
		if name = strings.TrimSpace(name); name == "" {
			continue
		}
		if !knownFigure(name) {
			fmt.Fprintf(stderr, "bench: --skip %q is not a figure name; want one of %s\n", name, strings.Join(figureNames(), ", "))
			return 2
		}
		cfg.Skip[name] = "skipped with --skip"
	}
	root, err := moduleRoot()
	if err != nil {
		fmt.Fprintln(stderr, "bench:", err)
		return 1
	}
	cfg.Root = root
	dir, err := os.MkdirTemp("", "winnow-bench-")
	if err != nil {
		fmt.Fprintln(stderr, "bench:", err)
		return 1
	}
	cfg.Dir = dir
	if *keep {
		fmt.Fprintf(stderr, "bench: scratch directory %s is kept\n", dir)
	} else {
		defer os.RemoveAll(dir)
	}
	rep, err := measureAll(context.Background(), cfg)
	if err != nil {
		fmt.Fprintln(stderr, "bench:", err)
		return 1
	}
	if *markdown {
		writeMarkdown(stdout, rep)
	} else {
		writeTable(stdout, rep)
	}
	return 0
}

// moduleRoot is the nearest directory at or above the working directory
// that holds go.mod.
func moduleRoot() (string, error) {
	d, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		if _, err := os.Stat(filepath.Join(d, "go.mod")); err == nil {
			return d, nil
		}
		p := filepath.Dir(d)
		if p == d {
			return "", errors.New("no go.mod at or above the working directory; run from inside the winnow module")
		}
		d = p
	}
}

func (c *config) logf(format string, args ...any) {
	if c.Log != nil {
		fmt.Fprintf(c.Log, "%s bench: %s\n", time.Now().UTC().Format("15:04:05"), fmt.Sprintf(format, args...))
	}
}
