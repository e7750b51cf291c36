//go:build !js && !wasip1

package main

import (
	"context"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"time"

	"github.com/chromedp/chromedp"

	"winnow/core/analysis"
)

const chromiumPath = "/usr/bin/chromium"

// page measures the browser kit: the demo run through window.winnow.analyze
// in headless Chromium against the native CLI on the same files, and a
// re-threshold through window.winnow.rethreshold.
func (s *session) page(ctx context.Context) error {
	const fitName, rethName = "page_fit_vs_native", "page_rethreshold_ms"
	fail := func(why string) error {
		s.setFigure(fitName, nil, "wall", "not measured: "+why)
		s.setFigure(rethName, nil, "wall", "not measured: "+why)
		return nil
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		return fail(chromiumPath + " not found")
	}
	if s.cli == "" {
		s.buildCLI()
		if s.cliErr != nil {
			return fail("building the winnow CLI: " + oneLine(s.cliErr.Error()))
		}
	}
	// The page, built by the project's own build command (a subprocess, so a
	// kit that does not build leaves the other figures alone).
	site := filepath.Join(s.cfg.Dir, "site")
	bc := exec.Command("go", "run", "./scripts/build", "--out", site)
	bc.Dir = s.cfg.Root
	bctx, cancel := context.WithTimeout(ctx, 15*time.Minute)
	_, _, err := runCmd(bctx, bc)
	cancel()
	if err != nil {
		return fail("the page does not build (go run ./scripts/build): " + oneLine(err.Error()))
	}
	for _, f := range []string{"index.html", "winnow.wasm", "worker.js", "app.js"} {
		if _, err := os.Stat(filepath.Join(site, f)); err != nil {
			return fail("the page build lacks " + f)
		}
	}

	// The demo files, next to the page (fetched by the benchmark's script,
	// not by the page) and in a directory for the native run.
	files, err := analysis.DemoFiles(1)
	if err != nil {
		return err
	}
	spec := analysis.DemoContrast(1)
	demo := filepath.Join(s.cfg.Dir, "demo")
	if err := os.MkdirAll(demo, 0o755); err != nil {
		return err
	}
	for _, n := range []string{"bold.nii.gz", "events.tsv", "confounds.tsv"} {
		if err := os.WriteFile(filepath.Join(demo, n), files[n], 0o644); err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(site, "bench-"+n), files[n], 0o644); err != nil {
			return err
		}
	}

	bp, err := s.openPage(ctx, site, "chromium-profile", true)
	if bp != nil {
		defer bp.close()
	}
	if err != nil {
		return fail("navigating to the page: " + oneLine(err.Error()))
	}
	browserPID := bp.pid
	// pageCPU is the CPU time of every Chromium process so far.
	pageCPU := func() (time.Duration, bool) {
		if browserPID < 0 {
			return 0, false
		}
		return treeCPU(browserPID)
	}
	tctx, cancelTime := context.WithTimeout(bp.tab, s.cfg.Timeout)
	defer cancelTime()
	version, err := evalJS[string](tctx, `window.winnow.ready.then(r => String(r.version))`)
	if err != nil {
		return fail("the page's window.winnow.ready did not resolve: " + oneLine(err.Error()))
	}
	if _, err := evalJS[bool](tctx, `(async () => {
	  const get = (n) => fetch(n).then(r => { if (!r.ok) throw new Error(n + ": " + r.status); return r.blob(); });
	  window.__bench = {
	    bold: new File([await get("bench-bold.nii.gz")], "bold.nii.gz"),
	    events: await (await get("bench-events.tsv")).text(),
	    confounds: await (await get("bench-confounds.tsv")).text(),
	  };
	  return true;
	})()`); err != nil {
		return fail("loading the demo files into the page: " + oneLine(err.Error()))
	}

	type pageRun struct {
		MS     float64 `json:"ms"`
		Voxels int     `json:"voxels"`
	}
	analyze := fmt.Sprintf(`(async () => {
	  const b = window.__bench;
	  const t0 = performance.now();
	  const s = await window.winnow.analyze({bold: b.bold, events: b.events, confounds: b.confounds,
	    contrasts: [%q], correct: "fwe-rft", alpha: 0.05, smooth: 0, highpass: 128, noise: "ar1"});
	  return {ms: performance.now() - t0, voxels: s.mask_voxels};
	})()`, spec)
	var ratio, wallRatio, pageMS, nativeS, pageCPUs, nativeCPUs []float64
	var pageVox, nativeVox int
	for i := 0; i < s.cfg.Runs; i++ {
		out := filepath.Join(demo, fmt.Sprintf("fit-%d", i))
		c := exec.Command(s.cli, "fit", "--bold", filepath.Join(demo, "bold.nii.gz"), "--events", filepath.Join(demo, "events.tsv"),
			"--confounds", filepath.Join(demo, "confounds.tsv"), "--contrast", spec, "--out", out)
		nat, _, err := runCmd(tctx, c)
		if err != nil {
			return fail("native fit of the demo: " + oneLine(err.Error()))
		}
		if i == 0 {
			nativeVox, _ = summaryVoxels(out)
		}
		c0, ok0 := pageCPU()
		pr, err := evalJS[pageRun](tctx, analyze)
		if err != nil {
			return fail("window.winnow.analyze on the demo: " + oneLine(err.Error()))
		}
		c1, ok1 := pageCPU()
		pageVox = pr.Voxels
		wr := pr.MS / 1000 / nat.Wall.Seconds()
		wallRatio = append(wallRatio, wr)
		pageMS, nativeS = append(pageMS, pr.MS), append(nativeS, nat.Wall.Seconds())
		if ok0 && ok1 && nat.CPU > 0 && c1 > c0 {
			pageCPUs, nativeCPUs = append(pageCPUs, (c1-c0).Seconds()), append(nativeCPUs, nat.CPU.Seconds())
		}
	}
	// The page is several processes and threads working in parallel (page,
	// worker, compositor), so its CPU total overstates what a user waits
	// for: the figure is wall clock, with the CPU totals in the note.
	clock := "wall"
	ratio = wallRatio
	pm, _, _, _ := stats(pageMS)
	nm, _, _, _ := stats(nativeS)
	cpuNote := ""
	if len(pageCPUs) > 0 {
		pc, _, _, _ := stats(pageCPUs)
		nc, _, _, _ := stats(nativeCPUs)
		cpuNote = fmt.Sprintf("; CPU: every Chromium process (from /proc) %.2f s vs the native process %.2f s, ratio %.2f", pc, nc, pc/nc)
	}
	agree := "same mask size"
	if pageVox != nativeVox {
		agree = fmt.Sprintf("MASK SIZES DIFFER: page %d, native %d", pageVox, nativeVox)
	}
	s.setFigure(fitName, ratio, clock, fmt.Sprintf(
		"window.winnow.analyze on the demo files in headless Chromium (winnow %s; File and text already in the page; until the views show the result) ÷ the native `winnow fit` subprocess on the same files and contrast, wall clock, runs interleaved; medians %.0f ms vs %.2f s%s; %s (%d voxels)",
		version, pm, nm, cpuNote, agree, nativeVox))

	// The large synthetic run through the page: fit_wasm_vs_numpy, and the
	// result the re-threshold below works on (about 200k voxels).
	shown := fmt.Sprintf("the shown demo result (%d voxels)", pageVox)
	if v, ok := s.pageLargeRun(tctx, site, pageCPU); ok {
		shown = fmt.Sprintf("the shown result of the large synthetic run (%d voxels)", v)
	}

	// Re-threshold: the page exposes window.winnow.rethreshold.
	if hasHook, err := evalJS[bool](tctx, `typeof window.winnow.rethreshold === "function"`); err != nil || !hasHook {
		s.setFigure(rethName, nil, "wall", "not measured: the page has no window.winnow.rethreshold hook")
		return nil
	}
	methods := []string{"fdr-bh", "bonferroni", "fwe-rft", "holm", "cluster-rft", "none"}
	var ms, cpuMS []float64
	for i := 0; i < s.cfg.Runs; i++ {
		m := methods[i%len(methods)]
		c0, ok0 := pageCPU()
		v, err := evalJS[float64](tctx, fmt.Sprintf(`(async () => {
		  const t0 = performance.now();
		  await window.winnow.rethreshold({correct: %q, alpha: 0.05});
		  return performance.now() - t0;
		})()`, m))
		if err != nil {
			s.setFigure(rethName, nil, "wall", "not measured: window.winnow.rethreshold: "+oneLine(err.Error()))
			return nil
		}
		c1, ok1 := pageCPU()
		ms = append(ms, v)
		if ok0 && ok1 {
			cpuMS = append(cpuMS, float64((c1-c0).Microseconds())/1000)
		}
	}
	vals, clock, other := ms, "wall", ""
	if len(cpuMS) == len(ms) {
		cm, _, _, _ := stats(cpuMS)
		other = fmt.Sprintf("; wall clock in the page (performance.now()); CPU of every Chromium process over the call, median %.0f ms (/proc, 10 ms ticks)", cm)
	}
	s.setFigure(rethName, vals, clock, fmt.Sprintf(
		"window.winnow.rethreshold on %s (methods %s in turn), from the call until the views show the new result%s",
		shown, strings.Join(methods[:min(s.cfg.Runs, len(methods))], ", "), other))
	return nil
}

// pageLargeRun analyses the large synthetic run (the fit figures' input) with
// window.winnow.analyze: the WebAssembly fit as the page runs it (the
// browser's own gunzip, the worker's wasm), timed against the numpy baseline
// of fit_native_vs_numpy. It sets fit_wasm_vs_numpy (the page replaces the
// Node estimate of fitWasm, which stays in the note) and reports the result's
// mask size and whether the run was analysed.
func (s *session) pageLargeRun(ctx context.Context, site string, pageCPU func() (time.Duration, bool)) (int, bool) {
	const name = "fit_wasm_vs_numpy"
	if _, skip := s.cfg.Skip[name]; skip || len(s.numpy) == 0 || s.run == nil || s.run.Bold == "" {
		return 0, false
	}
	for _, f := range [][2]string{{s.run.Events, "bench-large-events.tsv"}, {s.run.Confounds, "bench-large-confounds.tsv"}} {
		b, err := os.ReadFile(f[0])
		if err == nil {
			err = os.WriteFile(filepath.Join(site, f[1]), b, 0o644)
		}
		if err != nil {
			s.cfg.logf("page large run: %v", err)
			return 0, false
		}
	}
	// The run enters the page as a File picked from disk, as a user's would.
	if _, err := evalJS[bool](ctx, `(() => {
	  let el = document.getElementById("bench-large-file");
	  if (!el) {
	    el = Object.assign(document.createElement("input"), {type: "file", id: "bench-large-file"});
	    el.style.display = "none";
	    document.body.appendChild(el);
	  }
	  return true;
	})()`); err != nil {
		s.cfg.logf("page large run: %v", err)
		return 0, false
	}
	if _, err := chromedp.Run(ctx, chromedp.SetUploadFiles(chromedp.CSS("#bench-large-file"), []string{s.run.Bold})); err != nil {
		s.cfg.logf("page large run: choosing the file: %v", err)
		return 0, false
	}
	type pageRun struct {
		MS     float64 `json:"ms"`
		Voxels int     `json:"voxels"`
	}
	analyze := fmt.Sprintf(`(async () => {
	  const text = (n) => fetch(n).then(r => { if (!r.ok) throw new Error(n + ": " + r.status); return r.text(); });
	  const bold = document.getElementById("bench-large-file").files[0];
	  const events = await text("bench-large-events.tsv"), confounds = await text("bench-large-confounds.tsv");
	  const t0 = performance.now();
	  const s = await window.winnow.analyze({bold, events, confounds,
	    contrasts: [%q], correct: "fwe-rft", alpha: 0.05, smooth: 0, highpass: 128, noise: "ar1"});
	  return {ms: performance.now() - t0, voxels: s.mask_voxels};
	})()`, s.run.Contrast)
	var wall, cpu []float64
	var pageS, pageCPUs []float64
	vox := 0
	runs := min(s.cfg.LongRuns, len(s.numpy))
	for i := 0; i < runs; i++ {
		c0, ok0 := pageCPU()
		pr, err := evalJS[pageRun](ctx, analyze)
		if err != nil {
			s.setFigure(name, nil, "wall", "not measured: window.winnow.analyze on the large run: "+oneLine(err.Error()))
			return 0, false
		}
		c1, ok1 := pageCPU()
		vox = pr.Voxels
		n := s.numpy[i]
		wall = append(wall, n.Wall.Seconds()/(pr.MS/1000))
		pageS = append(pageS, pr.MS/1000)
		if ok0 && ok1 && c1 > c0 {
			cpu = append(cpu, n.CPU.Seconds()/(c1-c0).Seconds())
			pageCPUs = append(pageCPUs, (c1 - c0).Seconds())
		}
	}
	agree := "same mask size as the native fit"
	if vox != s.fitSummaryVoxels {
		agree = fmt.Sprintf("MASK SIZES DIFFER: page %d, native %d", vox, s.fitSummaryVoxels)
	}
	cpuNote := "CPU of the Chromium processes not available"
	if len(cpu) > 0 {
		cm, _, _, _ := stats(cpu)
		pc, _, _, _ := stats(pageCPUs)
		cpuNote = fmt.Sprintf("CPU of every Chromium process %.2f s, CPU ratio %.2f", pc, cm)
	}
	node := ""
	if f := s.figs[name]; f.Value != nil {
		node = fmt.Sprintf(" The same CLI compiled for js/wasm under Node (klauspost gunzip inside wasm): %.2f (%s).", *f.Value, f.Clock)
	}
	pm, _, _, _ := stats(pageS)
	nm, _, _, _ := stats(func() []float64 {
		var v []float64
		for _, n := range s.numpy[:runs] {
			v = append(v, n.Wall.Seconds())
		}
		return v
	}())
	// Wall clock, as page_fit_vs_native: the page is several processes and
	// threads at once, so its CPU total overstates what a user waits for.
	s.setFigure(name, wall, "wall", fmt.Sprintf(
		"speed ratio: fit_numpy.py ÷ window.winnow.analyze on the large synthetic run in headless Chromium (the .nii.gz chosen as a File, the browser's gunzip, the WebAssembly fit in the page's workers; until the views show the result), paired with numpy runs 1..%d; medians %.2f s (numpy) vs %.2f s (page), wall clock; %s; %s (%d voxels).%s",
		runs, nm, pm, cpuNote, agree, vox, node))
	return vox, true
}

// serveSite serves the page build in dir on loopback with the page's
// isolation headers; it returns the page's URL and a function that stops
// the server.
func serveSite(dir string) (string, func(), error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return "", nil, err
	}
	fsrv := http.FileServer(http.Dir(dir))
	srv := &http.Server{ReadHeaderTimeout: 10 * time.Second, Handler: http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Cross-Origin-Opener-Policy", "same-origin")
		w.Header().Set("Cross-Origin-Embedder-Policy", "require-corp")
		w.Header().Set("Cache-Control", "no-store")
		fsrv.ServeHTTP(w, r)
	})}
	go srv.Serve(ln)
	return "http://" + ln.Addr().String() + "/", func() { srv.Close() }, nil
}

// benchPage is a headless Chromium with one tab, on a loopback server of a
// site build.
type benchPage struct {
	url   string          // the site's address
	tab   context.Context // the tab, without a timeout (give each action one)
	pid   int             // the browser process, -1 if unknown
	close func()
}

// openPage serves site (serveSite), starts Chromium with its profile in the
// named folder of the scratch directory and navigates its tab to the site
// (toSite) or to about:blank. The first action starts the browser, so its
// context has no timeout (a timeout there would end the browser). On an
// error from that navigation the page is returned too, for its close.
func (s *session) openPage(ctx context.Context, site, profile string, toSite bool) (*benchPage, error) {
	url, stop, err := serveSite(site)
	if err != nil {
		return nil, err
	}
	actx, cancelAlloc := chromedp.NewExecAllocator(ctx, chromiumOptions(filepath.Join(s.cfg.Dir, profile))...)
	tab, cancelTab := chromedp.NewContext(actx)
	bp := &benchPage{url: url, tab: tab, pid: -1, close: func() { cancelTab(); cancelAlloc(); stop() }}
	first := "about:blank"
	if toSite {
		first = url
	}
	if err := chromedp.Do(tab, chromedp.Navigate(first)); err != nil {
		return bp, err
	}
	if c := chromedp.FromContext(tab); c != nil && c.Browser != nil {
		if p := c.Browser.Process(); p != nil {
			bp.pid = p.Pid
		}
	}
	return bp, nil
}

// chromiumOptions are the settings of the headless Chromium the page
// figures drive, with its profile in the folder profile.
func chromiumOptions(profile string) []chromedp.ExecAllocatorOption {
	return []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromiumPath),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(profile),
		chromedp.WindowSize(1440, 1000),
	}
}

// evalJS evaluates a script in the page, awaiting a promise it returns.
func evalJS[T any](ctx context.Context, expr string) (T, error) {
	return chromedp.Run(ctx, chromedp.Evaluate[T](expr, chromedp.EvalAwaitPromise))
}
