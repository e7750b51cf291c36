//go:build !js && !wasip1

package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"os/exec"
	"runtime"
	"strconv"
	"strings"
	"text/tabwriter"
)

// Figure is one row of the results (interface.md, "Benchmarks").
type Figure struct {
	Name    string    `json:"name"`
	Value   *float64  `json:"value"` // the median of the runs; null when not measured
	Unit    string    `json:"unit"`
	Target  string    `json:"target"`
	Meets   *bool     `json:"meets"`
	Median  *float64  `json:"median"`
	Min     *float64  `json:"min"`
	Max     *float64  `json:"max"`
	Runs    int       `json:"runs"`
	Samples []float64 `json:"samples,omitempty"`
	Clock   string    `json:"clock,omitempty"` // "cpu" or "wall": which time the value is made of
	Note    string    `json:"note"`
}

// Machine describes where the figures were measured.
type Machine struct {
	CPU       string  `json:"cpu"`
	Cores     int     `json:"cores"`
	MemoryGiB float64 `json:"memory_gib"`
	OS        string  `json:"os"`
	Go        string  `json:"go"`
	Node      string  `json:"node"`
	Chromium  string  `json:"chromium"`
	Python    string  `json:"python"`
	NumPy     string  `json:"numpy"`
	LoadStart string  `json:"load_avg_start"` // /proc/loadavg 1, 5, 15 min when the run began
	LoadEnd   string  `json:"load_avg_end"`
}

// Report is the whole JSON document.
type Report struct {
	Machine     string   `json:"machine"`
	MachineInfo Machine  `json:"machine_info"`
	Date        string   `json:"date"`
	Mode        string   `json:"mode"`  // "quick", "full" or "smoke"
	Clock       string   `json:"clock"` // default clock of the ratios
	Inputs      Inputs   `json:"inputs"`
	Figures     []Figure `json:"figures"`
	Seconds     float64  `json:"seconds"` // wall time of the whole benchmark run
}

// Inputs are the synthetic data the figures ran on.
type Inputs struct {
	Seed            uint64    `json:"seed"`
	Run             RunInputs `json:"run"`
	TFCEDims        [3]int    `json:"tfce_dims"`
	TFCEVoxels      int       `json:"tfce_voxels"`
	GroupMaps       int       `json:"group_maps"`
	GroupDims       [3]int    `json:"group_dims"`
	GroupVoxels     int       `json:"group_voxels"`
	GroupPerms      int       `json:"group_perms"`
	GroupPermsScale int       `json:"group_perms_scaled_to"`
	GLMBench        string    `json:"glm_bench"`
	PageData        string    `json:"page_data"`
	Extra           []string  `json:"notes,omitempty"`
}

// RunInputs describes the synthetic 4D run.
type RunInputs struct {
	Dims            [4]int     `json:"dims"`
	VoxelMM         [3]float64 `json:"voxel_mm"`
	TR              float64    `json:"tr_s"`
	Datatype        string     `json:"datatype"`
	DataBytes       int64      `json:"data_bytes"`
	CompressedBytes int64      `json:"compressed_bytes"`
	HeadFraction    float64    `json:"head_fraction"`
	Design          string     `json:"design"`
	Contrast        string     `json:"contrast"`
}

func machineInfo() Machine {
	m := Machine{Cores: runtime.NumCPU(), OS: runtime.GOOS + "/" + runtime.GOARCH, Go: runtime.Version()}
	if f, err := os.Open("/proc/cpuinfo"); err == nil {
		sc := bufio.NewScanner(f)
		for sc.Scan() {
			if k, v, ok := strings.Cut(sc.Text(), ":"); ok && strings.TrimSpace(k) == "model name" {
				m.CPU = strings.TrimSpace(v)
				break
			}
		}
		f.Close()
	}
	if m.CPU == "" {
		m.CPU = "unknown CPU"
	}
	if b, err := os.ReadFile("/proc/meminfo"); err == nil {
		for _, line := range strings.Split(string(b), "\n") {
			if strings.HasPrefix(line, "MemTotal:") {
				f := strings.Fields(line)
				if len(f) >= 2 {
					kb, _ := strconv.ParseFloat(f[1], 64)
					m.MemoryGiB = kb / (1 << 20)
				}
			}
		}
	}
	m.Node = cmdVersion("node", "--version")
	m.Chromium = cmdVersion(chromiumPath, "--version")
	m.LoadStart = loadAvg()
	return m
}

func (m Machine) String() string {
	s := fmt.Sprintf("%s, %d cores, %.1f GiB, %s, %s", m.CPU, m.Cores, m.MemoryGiB, m.OS, m.Go)
	if m.Node != "" {
		s += ", node " + m.Node
	}
	return s
}

func cmdVersion(name string, args ...string) string {
	p, err := exec.LookPath(name)
	if err != nil {
		return ""
	}
	out, err := exec.Command(p, args...).Output()
	if err != nil {
		return ""
	}
	return strings.TrimSpace(strings.SplitN(string(out), "\n", 2)[0])
}

func loadAvg() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return ""
	}
	f := strings.Fields(string(b))
	if len(f) < 3 {
		return ""
	}
	return strings.Join(f[:3], " ")
}

// fmtNum prints a figure's number compactly.
func fmtNum(p *float64) string {
	if p == nil {
		return "n/a"
	}
	v := *p
	switch a := abs(v); {
	case a >= 100:
		return strconv.FormatFloat(v, 'f', 0, 64)
	case a >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	case a >= 0.1:
		return strconv.FormatFloat(v, 'f', 2, 64)
	default:
		return strconv.FormatFloat(v, 'g', 3, 64)
	}
}

func abs(v float64) float64 {
	if v < 0 {
		return -v
	}
	return v
}

func meetsText(m *bool) string {
	switch {
	case m == nil:
		return "-"
	case *m:
		return "yes"
	default:
		return "NO"
	}
}

// writeTable prints the plain-text table.
func writeTable(w io.Writer, r *Report) {
	fmt.Fprintf(w, "winnow benchmarks (%s), %s\nmachine: %s\nload average at start %s, at end %s\n",
		r.Mode, r.Date, r.Machine, r.MachineInfo.LoadStart, r.MachineInfo.LoadEnd)
	fmt.Fprintf(w, "inputs: %s\n\n", inputsText(r))
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "name\tvalue\tunit\ttarget\tmeets\tmedian/min/max\truns\tclock")
	for _, f := range r.Figures {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s/%s/%s\t%d\t%s\n", f.Name, fmtNum(f.Value), f.Unit, f.Target,
			meetsText(f.Meets), fmtNum(f.Median), fmtNum(f.Min), fmtNum(f.Max), f.Runs, f.Clock)
	}
	tw.Flush()
	fmt.Fprintln(w)
	for _, f := range r.Figures {
		if f.Note != "" {
			fmt.Fprintf(w, "%s: %s\n", f.Name, f.Note)
		}
	}
}

func inputsText(r *Report) string {
	in := r.Inputs
	ri := in.Run
	s := fmt.Sprintf("run %dx%dx%d x %d volumes int16 (%.0f MB decompressed, %.0f MB .nii.gz), voxel %gx%gx%g mm, TR %g s, %s; contrast %q",
		ri.Dims[0], ri.Dims[1], ri.Dims[2], ri.Dims[3], float64(ri.DataBytes)/1e6, float64(ri.CompressedBytes)/1e6,
		ri.VoxelMM[0], ri.VoxelMM[1], ri.VoxelMM[2], ri.TR, ri.Design, ri.Contrast)
	s += fmt.Sprintf("; TFCE map %dx%dx%d (%d voxels)", in.TFCEDims[0], in.TFCEDims[1], in.TFCEDims[2], in.TFCEVoxels)
	s += fmt.Sprintf("; group %d maps of %dx%dx%d (%d voxels), %d sign flips", in.GroupMaps, in.GroupDims[0], in.GroupDims[1], in.GroupDims[2], in.GroupVoxels, in.GroupPerms)
	if in.GroupPermsScale != in.GroupPerms && in.GroupPermsScale > 0 {
		s += fmt.Sprintf(" (time scaled to %d)", in.GroupPermsScale)
	}
	s += "; glm kernel: " + in.GLMBench + "; page: " + in.PageData
	return s
}

// writeMarkdown prints the README performance table.
func writeMarkdown(w io.Writer, r *Report) {
	fmt.Fprintf(w, "Measured %s with `go run ./scripts/bench%s` on %s (load average %s at the start).\n\n",
		r.Date, map[bool]string{true: " --quick", false: ""}[r.Mode == "quick"], r.Machine, r.MachineInfo.LoadStart)
	fmt.Fprintf(w, "Inputs: %s.\n\n", inputsText(r))
	if r.Clock == "cpu" {
		fmt.Fprintln(w, "Where the clock column says cpu, the ratio is made of CPU time (user + system) of the processes doing the work, because the machine was shared; the wall-clock ratios are in the notes.")
		fmt.Fprintln(w)
	}
	fmt.Fprintln(w, "| figure | value | target | meets | median / min / max (runs) | clock |")
	fmt.Fprintln(w, "| --- | --- | --- | --- | --- | --- |")
	for _, f := range r.Figures {
		val := fmtNum(f.Value)
		if f.Value != nil && f.Unit != "" {
			val += " " + f.Unit
		}
		mm := "-"
		if f.Value != nil {
			mm = fmt.Sprintf("%s / %s / %s (%d)", fmtNum(f.Median), fmtNum(f.Min), fmtNum(f.Max), f.Runs)
		}
		clock := f.Clock
		if clock == "" {
			clock = "-"
		}
		fmt.Fprintf(w, "| `%s` | %s | %s | %s | %s | %s |\n", f.Name, val, f.Target, meetsText(f.Meets), mm, clock)
	}
	fmt.Fprintln(w)
	for _, f := range r.Figures {
		if f.Note != "" {
			fmt.Fprintf(w, "- `%s`: %s\n", f.Name, f.Note)
		}
	}
}

func writeJSON(path string, r *Report) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, append(b, '\n'), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}

func readJSON(path string) (*Report, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var r Report
	if err := json.Unmarshal(b, &r); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return &r, nil
}
