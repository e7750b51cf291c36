//go:build !js && !wasip1

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"math"

	"github.com/chromedp/chromedp"
	"gonum.org/v1/gonum/mat"

	"winnow/core/analysis"
	"winnow/core/group"
	"winnow/core/infer"
	"winnow/core/nifti"
)

// The page's group analysis against the native permutation engine (issue 7).
const (
	pageGroupName   = "page_group_vs_native"
	pageGroupMemory = "page_group_memory_vs_maps"
	pageGroupPages  = 2 // Web Workers the page shares the sign flips over
)

// pageGroup measures window.winnow.group in headless Chromium with two Web
// Workers on the group figure's maps (written as float32 NIfTI files) against
// core/group with two workers in this process on the same values (the
// engine alone, as group_perm_seconds measures it), and the memory the page
// takes for it: the largest sum of VmRSS over every Chromium process,
// sampled every 100 ms during the run, less the same sum just before the run
// (the page loaded afresh, its worker ready, the maps already in the page as
// Files), divided by the bytes of the maps' data. It also checks that the
// page's summary equals analysis.Group's on the same files.
func (s *session) pageGroup(ctx context.Context) error {
	fail := func(why string) error {
		s.setFigure(pageGroupName, nil, "wall", "not measured: "+why)
		s.setFigure(pageGroupMemory, nil, "", "not measured: "+why)
		return nil
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		return fail(chromiumPath + " not found")
	}
	dims := s.cfg.GroupDims
	nv := dims[0] * dims[1] * dims[2]
	n := s.cfg.GroupMaps
	mapBytes := int64(n) * int64(nv) * 4

	// The page, as the page figures build it (reused when they did).
	site := filepath.Join(s.cfg.Dir, "site")
	if _, err := os.Stat(filepath.Join(site, "winnow.wasm")); err != nil {
		bc := exec.Command("go", "run", "./scripts/build", "--out", site)
		bc.Dir = s.cfg.Root
		bctx, cancel := context.WithTimeout(ctx, 15*time.Minute)
		_, _, err := runCmd(bctx, bc)
		cancel()
		if err != nil {
			return fail("the page does not build (go run ./scripts/build): " + oneLine(err.Error()))
		}
	}

	// The maps: the data of group_perm_seconds (smooth noise plus a shared
	// effect), as float32 .nii files next to the page and in memory.
	names, files, y, err := writeGroupMaps(site, dims, n, s.cfg.Run.Seed)
	if err != nil {
		return err
	}

	// The native engine: core/group, one-sample sign flips, MaxTFCE, the
	// page's seed and number of relabellings, two workers.
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	model, err := group.NewModel(mat.NewDense(n, 1, ones), [][]float64{{1}})
	if err != nil {
		return err
	}
	plan, err := model.Plan(s.cfg.GroupPerms, analysis.DefaultGroupSeed)
	if err != nil {
		return err
	}
	vox := make([]int32, nv)
	for i := range vox {
		vox[i] = int32(i)
	}
	native := func() (sample, error) {
		return timeIt(func() error {
			prob := model.Prepare(y, group.Space{Dims: dims, Voxels: vox})
			null, err := prob.Run(ctx, &plan, 0, plan.N, group.Options{Stats: group.MaxTFCE, Workers: pageGroupPages})
			if err == nil && len(null.TFCE) != plan.N {
				err = fmt.Errorf("core/group returned %d TFCE maxima, want %d", len(null.TFCE), plan.N)
			}
			return err
		})
	}

	// The build on loopback, Chromium on about:blank.
	bp, err := s.openPage(ctx, site, "chromium-profile-group", false)
	if bp != nil {
		defer bp.close()
	}
	if err != nil {
		return fail("starting Chromium: " + oneLine(err.Error()))
	}
	url, browserPID := bp.url, bp.pid
	tctx, cancelTime := context.WithTimeout(bp.tab, s.cfg.Timeout)
	defer cancelTime()
	list, _ := json.Marshal(names)

	type pageRun struct {
		MS      float64 `json:"ms"`
		Workers int     `json:"workers"`
		Summary string  `json:"summary"`
		Steps   string  `json:"steps"`
	}
	var ratio, mem, pageMS, natS, natCPU, pageCPU []float64
	var peakMB, baseMB, hwmMB []float64
	var lastGrown string
	var lastSummary, lastSteps, rethSummary string
	var rethMS []float64
	for i := 0; i < s.cfg.LongRuns; i++ {
		// A fresh page each run: its workers' WebAssembly memories (which
		// never shrink) start from the boot state.
		if err := chromedp.Do(tctx, chromedp.Navigate(url)); err != nil {
			return fail("navigating to the page: " + oneLine(err.Error()))
		}
		if _, err := evalJS[string](tctx, `window.winnow.ready.then(r => String(r.version))`); err != nil {
			return fail("the page's window.winnow.ready did not resolve: " + oneLine(err.Error()))
		}
		if _, err := evalJS[bool](tctx, fmt.Sprintf(`(async () => {
		  window.__benchMaps = await Promise.all(%s.map(async (n) => {
		    const r = await fetch(n);
		    if (!r.ok) throw new Error(n + ": " + r.status);
		    return new File([await r.blob()], n);
		  }));
		  return true;
		})()`, list)); err != nil {
			return fail("loading the maps into the page: " + oneLine(err.Error()))
		}
		time.Sleep(500 * time.Millisecond) // let the fetches' buffers settle
		base, _, ok := treeMem(browserPID)
		if !ok {
			return fail("cannot read the Chromium processes' memory from /proc")
		}
		c0, _ := treeCPU(browserPID)
		stop := sampleMem(browserPID, base)
		pr, err := evalJS[pageRun](tctx, fmt.Sprintf(`(async () => {
		  const t0 = performance.now();
		  const s = await window.winnow.group({maps: window.__benchMaps, correct: "tfce", perms: %d, workers: %d});
		  return {ms: performance.now() - t0, workers: window.winnow.timings.groupWorkers, summary: JSON.stringify(s),
		    steps: JSON.stringify(window.winnow.timings.groupSteps || null)};
		})()`, s.cfg.GroupPerms, pageGroupPages))
		peak, grown := stop()
		c1, _ := treeCPU(browserPID)
		if err != nil {
			return fail("window.winnow.group: " + oneLine(err.Error()))
		}
		if pr.Workers != pageGroupPages {
			return fail(fmt.Sprintf("the page ran on %d workers, want %d", pr.Workers, pageGroupPages))
		}
		_, hwm, _ := treeMem(browserPID)
		lastGrown = grown
		lastSummary, lastSteps = pr.Summary, stepsNote(pr.Steps)
		// The shown result re-thresholded at a new alpha from its recorded null.
		rr, err := evalJS[pageRun](tctx, `window.winnow.rethreshold({alpha: 0.01}).then(r => ({ms: r.ms, summary: JSON.stringify(r.summary)}))`)
		if err != nil {
			rethMS, rethSummary = nil, "window.winnow.rethreshold: "+oneLine(err.Error())
		} else {
			rethMS, rethSummary = append(rethMS, rr.MS), rr.Summary
		}
		nat, err := native()
		if err != nil {
			return err
		}
		ratio = append(ratio, pr.MS/1000/nat.Wall.Seconds())
		pageMS, natS, natCPU = append(pageMS, pr.MS), append(natS, nat.Wall.Seconds()), append(natCPU, nat.CPU.Seconds())
		pageCPU = append(pageCPU, (c1 - c0).Seconds())
		mem = append(mem, float64(peak-base)/float64(mapBytes))
		peakMB, baseMB, hwmMB = append(peakMB, float64(peak)/1e6), append(baseMB, float64(base)/1e6), append(hwmMB, float64(hwm)/1e6)
		s.cfg.logf("page group run %d: %.1f s in the page, %.1f s native; memory %.0f MB over %.0f MB before (processes grew: %s); %s", i+1, pr.MS/1000, nat.Wall.Seconds(), float64(peak-base)/1e6, float64(base)/1e6, grown, lastSteps)
	}

	// The page's result against the pipeline's on the same files.
	agree := "the page's summary equals analysis.Group's (2 workers) on the same files"
	var in analysis.GroupInputs
	for i, b := range files {
		in.Maps = append(in.Maps, analysis.Input{Name: names[i], R: bytes.NewReader(b), Size: int64(len(b))})
	}
	ref, err := analysis.Group(ctx, in, analysis.GroupOptions{Correct: infer.MethodTFCE, Perms: s.cfg.GroupPerms, Workers: pageGroupPages})
	if err != nil {
		agree = "analysis.Group failed: " + oneLine(err.Error())
	} else if d := summaryDiff(lastSummary, ref); strings.HasPrefix(d, "numbers agree") {
		agree += ": " + d
	} else if d != "" {
		agree = "SUMMARIES DIFFER: " + d
	}
	reth := "re-threshold not measured: " + rethSummary
	if len(rethMS) > 0 && ref != nil {
		rm, _, _, _ := stats(rethMS)
		reth = fmt.Sprintf("window.winnow.rethreshold to alpha 0.01 (from the recorded null, no new permutations) %.0f ms until shown", rm)
		if r01, err := ref.Rethreshold(infer.MethodTFCE, 0.01, 0); err != nil {
			reth += ", native Rethreshold failed: " + oneLine(err.Error())
		} else if d := summaryDiff(rethSummary, r01); d != "" && !strings.HasPrefix(d, "numbers agree") {
			reth += ", SUMMARY DIFFERS from the native one: " + d
		} else {
			reth += ", summary equal to the native re-threshold's"
		}
	}

	pm, _, _, _ := stats(pageMS)
	nm, _, _, _ := stats(natS)
	nc, _, _, _ := stats(natCPU)
	pc, _, _, _ := stats(pageCPU)
	runsNote := ""
	if len(ratio) == 1 {
		runsNote = " One run only (long)."
	}
	s.setFigure(pageGroupName, ratio, "wall", fmt.Sprintf(
		"window.winnow.group in headless Chromium on %d workers (%d float32 .nii maps of %dx%dx%d as Files in a freshly loaded page; tfce, one-sample sign flips, %d relabellings, default seed; from the call until the views show the result, the start of any helper worker included) ÷ core/group Model.Prepare + Problem.Run with MaxTFCE on the same values, same plan, %d workers, in this process; wall clock, runs interleaved; medians %.1f s vs %.1f s; CPU: every Chromium process %.1f s, native %.1f s (ratio %.2f); %s; last run's steps: %s; %s.%s",
		pageGroupPages, n, dims[0], dims[1], dims[2], s.cfg.GroupPerms, pageGroupPages, pm/1000, nm, pc, nc, pc/nc, agree, lastSteps, reth, runsNote))
	bm, _, _, _ := stats(baseMB)
	km, _, _, _ := stats(peakMB)
	hm, _, _, _ := stats(hwmMB)
	s.setFigure(pageGroupMemory, mem, "", fmt.Sprintf(
		"(largest sum of VmRSS over every Chromium process, /proc, sampled every 100 ms during window.winnow.group) − (the same sum just before the call, page loaded afresh, maps in the page) ÷ %d bytes (%d maps × %d voxels × 4, the float32 data); medians: peak %.0f MB, before %.0f MB; sum of the processes' VmHWM after the run %.0f MB; last run, processes' growth to their own largest VmRSS: %s.%s",
		mapBytes, n, nv, km, bm, hm, lastGrown, runsNote))
	return nil
}

// writeGroupMaps writes the group figures' n maps (smooth noise plus a shared
// effect, the values of group_perm_seconds rounded to float32) as float32
// .nii files bench-group-NN.nii in dir, and returns their names, bytes and
// values (n×V, map i at y[i*V:(i+1)*V]).
func writeGroupMaps(dir string, dims [3]int, n int, seed uint64) ([]string, [][]byte, []float64, error) {
	nv := dims[0] * dims[1] * dims[2]
	common := smoothMap(dims, 1.5, seed)
	grid := nifti.Grid{Dims: dims, VoxelMM: [3]float64{2, 2, 2}, SformCode: 1, QformCode: 1}
	for a := range 3 {
		grid.Affine[a][a] = 2
		grid.Affine[a][3] = -float64(dims[a])
	}
	grid.Affine[3][3] = 1
	names := make([]string, n)
	files := make([][]byte, n)
	y := make([]float64, n*nv)
	for i := 0; i < n; i++ {
		noise := smoothMap(dims, 1.5, seed+uint64(i)+1)
		m := make([]float32, nv)
		for v := range m {
			m[v] = float32(0.3*float64(common[v]) + float64(noise[v]))
			y[i*nv+v] = float64(m[v])
		}
		var buf bytes.Buffer
		if err := nifti.WriteMap(&buf, grid, m, nifti.WriteOptions{Uncompressed: true, Descrip: "winnow bench group map"}); err != nil {
			return nil, nil, nil, err
		}
		names[i] = fmt.Sprintf("bench-group-%02d.nii", i+1)
		files[i] = buf.Bytes()
		if err := os.WriteFile(filepath.Join(dir, names[i]), files[i], 0o644); err != nil {
			return nil, nil, nil, err
		}
	}
	return names, files, y, nil
}

// stepsNote condenses window.winnow.timings.groupSteps: when each step of
// the page ended (s from the call) and, per worker, when its stages began.
func stepsNote(js string) string {
	var st struct {
		LentReader                          bool
		HelpersReady, Shards, Result, Shown float64
		Workers                             []map[string]float64
		Worker                              map[string]float64
	}
	if err := json.Unmarshal([]byte(js), &st); err != nil {
		return "not recorded"
	}
	stages := func(m map[string]float64) string {
		var keys []string
		for k := range m {
			if !strings.HasPrefix(k, "MB at: ") {
				keys = append(keys, k)
			}
		}
		slices.SortFunc(keys, func(a, b string) int { return int(math.Copysign(1, m[a]-m[b])) })
		var parts []string
		for _, k := range keys {
			stage := strings.TrimPrefix(k, "start: ")
			p := fmt.Sprintf("%s %.1f s", stage, m[k]/1000)
			if mb, ok := m["MB at: "+stage]; ok {
				p += fmt.Sprintf(" (Go memory %.0f MB)", mb)
			}
			parts = append(parts, p)
		}
		if mb, ok := m["MB at: end"]; ok {
			parts = append(parts, fmt.Sprintf("Go memory at the end %.0f MB", mb))
		}
		return strings.Join(parts, ", ")
	}
	out := ""
	if st.LentReader {
		out = "shard 2 in the idle reader worker; "
	}
	out += fmt.Sprintf("helpers ready %.1f s, shards back %.1f s, merged result %.1f s, shown %.1f s", st.HelpersReady/1000, st.Shards/1000, st.Result/1000, st.Shown/1000)
	for i, w := range st.Workers {
		out += fmt.Sprintf("; shard %d (from its start): %s", i+1, stages(w))
	}
	if st.Worker != nil {
		out += "; merge (from its start): " + stages(st.Worker)
	}
	return out
}

// summaryDiff compares the page's summary (JSON text) with a result's, as
// decoded JSON values; "" when equal.
func summaryDiff(page string, ref *analysis.GroupResult) string {
	var a, b map[string]any
	if err := json.Unmarshal([]byte(page), &a); err != nil {
		return "the page's summary: " + err.Error()
	}
	rb, err := json.Marshal(ref.Summary)
	if err != nil {
		return err.Error()
	}
	if err := json.Unmarshal(rb, &b); err != nil {
		return err.Error()
	}
	worst := 0.0
	if d := firstDiff("summary", a, b, &worst); d != "" {
		return d
	}
	if worst > 0 {
		return fmt.Sprintf("numbers agree to %.1g relative (float rounding of the platforms' math functions)", worst)
	}
	return ""
}

// summaryTol is the relative difference allowed between a number of the
// page's summary and the native one: WebAssembly and amd64 builds of Go's
// math functions may round differently in the last bits (the page tests
// allow float32 precision; this is tighter).
const summaryTol = 1e-9

// firstDiff names the first place where two decoded JSON values differ, with
// both values; "" when they agree (numbers to summaryTol relative, the worst
// relative difference kept in worst).
func firstDiff(path string, a, b any, worst *float64) string {
	if reflect.DeepEqual(a, b) {
		return ""
	}
	switch bv := b.(type) {
	case float64:
		if av, ok := a.(float64); ok {
			d := math.Abs(av-bv) / math.Max(math.Abs(bv), 1e-300)
			*worst = math.Max(*worst, d)
			if d <= summaryTol {
				return ""
			}
		}
	case map[string]any:
		av, ok := a.(map[string]any)
		if !ok {
			break
		}
		keys := make([]string, 0, len(bv))
		for k := range bv {
			keys = append(keys, k)
		}
		for k := range av {
			if _, ok := bv[k]; !ok {
				keys = append(keys, k)
			}
		}
		slices.Sort(keys)
		for _, k := range keys {
			if d := firstDiff(path+"."+k, av[k], bv[k], worst); d != "" {
				return d
			}
		}
		return ""
	case []any:
		av, ok := a.([]any)
		if !ok || len(av) != len(bv) {
			break
		}
		for i := range bv {
			if d := firstDiff(fmt.Sprintf("%s[%d]", path, i), av[i], bv[i], worst); d != "" {
				return d
			}
		}
		return ""
	}
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	return fmt.Sprintf("%s: page %.200s, native %.200s", path, ja, jb)
}

// sampleMem samples the summed VmRSS of root's process tree every 100 ms
// until the returned function is called; that function returns the largest
// sum seen (at least floor) and a note of the processes whose VmRSS grew
// most from the first sample to their own largest (by Chromium process type).
func sampleMem(root int, floor int64) func() (int64, string) {
	var mu sync.Mutex
	peak := floor
	first := map[int64]int64{}
	most := map[int64]int64{}
	done := make(chan struct{})
	finished := make(chan struct{})
	take := func() {
		per := map[int64]int64{}
		if r, _, ok := treeMemOf(root, per); ok {
			mu.Lock()
			peak = max(peak, r)
			for pid, x := range per {
				if _, seen := first[pid]; !seen {
					first[pid] = x
				}
				most[pid] = max(most[pid], x)
			}
			mu.Unlock()
		}
	}
	take()
	go func() {
		defer close(finished)
		t := time.NewTicker(100 * time.Millisecond)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				take()
			}
		}
	}()
	return func() (int64, string) {
		take()
		close(done)
		<-finished
		mu.Lock()
		defer mu.Unlock()
		type grew struct {
			pid  int64
			by   int64
			kind string
		}
		var g []grew
		for pid, x := range most {
			if d := x - first[pid]; d > 1<<20 {
				g = append(g, grew{pid, d, processKind(pid)})
			}
		}
		slices.SortFunc(g, func(a, b grew) int { return int(b.by - a.by) })
		var parts []string
		for _, e := range g {
			parts = append(parts, fmt.Sprintf("%s +%.0f MB", e.kind, float64(e.by)/1e6))
		}
		return peak, strings.Join(parts, ", ")
	}
}

// processKind is a Chromium process's --type (and utility sub-type) from
// its command line, "browser" without one.
func processKind(pid int64) string {
	b, err := os.ReadFile("/proc/" + strconv.FormatInt(pid, 10) + "/cmdline")
	if err != nil {
		return "gone"
	}
	kind, sub := "browser", ""
	// Chromium may rewrite its command line as one string: split at spaces too.
	for _, a := range strings.FieldsFunc(string(b), func(r rune) bool { return r == 0 || r == ' ' }) {
		if v, ok := strings.CutPrefix(a, "--type="); ok {
			kind = v
		}
		if v, ok := strings.CutPrefix(a, "--utility-sub-type="); ok {
			sub = v
		}
	}
	if sub != "" {
		kind += " (" + sub + ")"
	}
	return kind
}
