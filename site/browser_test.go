package site_test

// Browser tests: build the site once, serve it with the same handler as
// scripts/serve, drive headless Chromium through chromedp, and check that the
// wasm starts, the demo runs end to end, the views draw, nothing is requested
// from another origin, and window.winnow.analyze agrees with the native
// pipeline on the same files. Without /usr/bin/chromium the tests are skipped
// (or fail when WINNOW_REQUIRE_BROWSER=1, as in CI).

import (
	"bytes"
	"context"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/network"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"

	"winnow/core/analysis"
	"winnow/core/infer"
	"winnow/core/nifti"
	"winnow/core/report"
	"winnow/scripts/sitebuild"
)

const chromium = "/usr/bin/chromium"

// tolFloat32 is the relative tolerance between the wasm and native runs of
// the same pipeline: the summary's numbers pass through float32 maps, and the
// Go spec lets compilers fuse multiply-adds differently per platform.
const tolFloat32 = 1e-5

var (
	buildOnce sync.Once
	built     *sitebuild.Result
	buildErr  error
	buildDir  string
)

func TestMain(m *testing.M) {
	code := m.Run()
	if buildDir != "" {
		os.RemoveAll(buildDir)
	}
	os.Exit(code)
}

func needBrowser(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(chromium); err != nil {
		msg := fmt.Sprintf("BROWSER TESTS NOT RUN: %s not found (%v). Install it with `apt-get install chromium`.", chromium, err)
		if os.Getenv("WINNOW_REQUIRE_BROWSER") == "1" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
}

func site(t *testing.T) *sitebuild.Result {
	t.Helper()
	buildOnce.Do(func() {
		buildDir, buildErr = os.MkdirTemp("", "winnow-site-test-")
		if buildErr != nil {
			return
		}
		built, buildErr = sitebuild.Build(sitebuild.Options{Root: "..", Out: buildDir})
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return built
}

// browser records what a tab does that the tests must check.
type browser struct {
	ctx      context.Context
	mu       sync.Mutex
	requests []string
	problems []string // console errors, exceptions, error log entries
}

func (b *browser) listen(ev any) {
	b.mu.Lock()
	defer b.mu.Unlock()
	switch e := ev.(type) {
	case *network.EventRequestWillBeSent:
		b.requests = append(b.requests, e.Request.URL)
	case *runtime.EventConsoleAPICalled:
		if e.Type == runtime.ConsoleAPICalledTypeError || e.Type == runtime.ConsoleAPICalledTypeAssert {
			var parts []string
			for _, a := range e.Args {
				parts = append(parts, string(a.Value)+a.Description)
			}
			b.problems = append(b.problems, "console."+string(e.Type)+": "+strings.Join(parts, " "))
		}
	case *runtime.EventExceptionThrown:
		d := e.ExceptionDetails
		text := d.Text
		if d.Exception != nil {
			text += " " + d.Exception.Description
		}
		b.problems = append(b.problems, "exception: "+text)
	case *log.EventEntryAdded:
		if e.Entry.Level == log.EntryLevelError {
			b.problems = append(b.problems, "log ("+string(e.Entry.Source)+"): "+e.Entry.Text+" "+e.Entry.URL)
		}
	}
}

// newBrowser starts a headless Chromium with a fresh profile.
func newBrowser(t *testing.T, timeout time.Duration) *browser {
	t.Helper()
	needBrowser(t)
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromium),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1440, 1000),
	}
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	b := &browser{}
	ctx, cancelTab := chromedp.NewContext(actx, chromedp.WithListener(b.listen))
	ctx, cancelTime := context.WithTimeout(ctx, timeout)
	t.Cleanup(func() {
		cancelTime()
		cancelTab()
		cancelAlloc()
	})
	b.ctx = ctx
	return b
}

func (b *browser) check(t *testing.T, allowed ...string) {
	t.Helper()
	b.mu.Lock()
	defer b.mu.Unlock()
	for _, p := range b.problems {
		t.Errorf("page reported: %s", p)
	}
	for _, u := range b.requests {
		ok := false
		for _, a := range allowed {
			if strings.HasPrefix(u, a) {
				ok = true
			}
		}
		if !ok {
			t.Errorf("request outside the page's origin: %s", u)
		}
	}
	if len(b.requests) == 0 {
		t.Error("no network event was seen at all; the listener is not working")
	}
}

func eval[T any](t *testing.T, b *browser, expr string) T {
	t.Helper()
	v, err := chromedp.Run(b.ctx, chromedp.Evaluate[T](expr, chromedp.EvalAwaitPromise))
	if err != nil {
		t.Fatalf("evaluating %.80q: %v", expr, err)
	}
	return v
}

// waitDone resolves when the page's state is "done" and fails on "error".
const waitDone = `new Promise((resolve, reject) => {
  const t0 = Date.now();
  (function check() {
    const s = document.body.dataset.state;
    if (s === "done") return resolve(true);
    if (s === "error") return reject(new Error(document.getElementById("error").textContent));
    if (Date.now() - t0 > 200000) return reject(new Error("timed out in state " + s));
    setTimeout(check, 100);
  })();
})`

// canvasStats counts, over the slice canvas, pixels that are not the panel
// backing colour and pixels that are coloured (overlay), via getImageData.
const canvasStats = `(() => {
  const c = document.getElementById("slices");
  const d = c.getContext("2d").getImageData(0, 0, c.width, c.height).data;
  let drawn = 0, coloured = 0;
  for (let i = 0; i < d.length; i += 4) {
    const r = d[i], g = d[i + 1], b = d[i + 2];
    if (Math.abs(r - 0x14) + Math.abs(g - 0x17) + Math.abs(b - 0x1b) > 12) drawn++;
    if (Math.max(r, g, b) - Math.min(r, g, b) > 60) coloured++;
  }
  return {w: c.width, h: c.height, drawn, coloured};
})()`

type canvasCount struct{ W, H, Drawn, Coloured int }

// plotStats counts pixels of a plot canvas that are not white (drawn).
func plotStats(id string) string {
	return fmt.Sprintf(`(() => {
  const c = document.getElementById(%q);
  const d = c.getContext("2d").getImageData(0, 0, c.width, c.height).data;
  let drawn = 0;
  for (let i = 0; i < d.length; i += 4) if (d[i] + d[i + 1] + d[i + 2] < 3 * 245) drawn++;
  return {w: c.width, h: c.height, drawn, coloured: 0};
})()`, id)
}

type seriesInfo struct {
	N, M   int
	Finite bool
	IJK    []int
}

type exportInfo struct {
	Name          string
	Size, Fetched int
	Head          string
}

type rethresholdInfo struct {
	Ms float64
	N  int
}

var (
	demoOnce  sync.Once
	demoFiles map[string][]byte
	demoErr   error
)

func mustDemo(t *testing.T) map[string][]byte {
	t.Helper()
	demoOnce.Do(func() { demoFiles, demoErr = analysis.DemoFiles(1) })
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoFiles
}

func TestServedDemo(t *testing.T) {
	needBrowser(t)
	res := site(t)
	files, err := analysis.DemoFiles(1)
	if err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewServer(sitebuild.Handler(res.Dir, res.Policy))
	defer srv.Close()

	b := newBrowser(t, 4*time.Minute)
	t0 := time.Now()
	if err := chromedp.Do(b.ctx, chromedp.Navigate(srv.URL+"/")); err != nil {
		t.Fatal(err)
	}
	version := eval[string](t, b, `window.winnow.ready.then(r => r.version)`)
	t.Logf("wasm ready after %v (winnow %s)", time.Since(t0).Round(time.Millisecond), version)

	// A text file as the run: one clear line, and the page stays usable
	// (the demo below runs afterwards).
	bad := eval[string](t, b, `window.winnow.analyze({
	    bold: new File(["onset\tduration\ttrial_type\n"], "notes.txt"), events: "onset\tduration\ttrial_type\n0\t1\ta\n",
	    contrasts: ["a=a"]}).then(() => "resolved", (e) => e.message)`)
	shown := eval[string](t, b, `document.getElementById("error").textContent`)
	if bad == "resolved" || !strings.HasPrefix(shown, "notes.txt: nifti") || strings.Contains(shown, "\n") || len(shown) > 200 {
		t.Errorf("text file as the run: rejection %q, page shows %q; want one line naming notes.txt", bad, shown)
	}
	t.Logf("text file as the run: %s", shown)
	if st := eval[string](t, b, `document.body.dataset.state`); st != "error" {
		t.Errorf("state %q after a bad file, want error", st)
	}

	// The demo, through the page's button.
	t1 := time.Now()
	if err := chromedp.Do(b.ctx, chromedp.WaitEnabled(chromedp.ID("demo")), chromedp.Click(chromedp.ID("demo"))); err != nil {
		t.Fatal(err)
	}
	eval[bool](t, b, waitDone)
	t.Logf("demo fitted and drawn in %v", time.Since(t1).Round(time.Millisecond))
	rows := eval[int](t, b, `document.querySelectorAll("#clusters tbody tr[data-index]").length`)
	if rows == 0 {
		t.Error("no cluster row after the demo; its planted activation should survive fwe-rft")
	}
	cs := eval[canvasCount](t, b, canvasStats)
	if cs.W == 0 || cs.Drawn < cs.W*cs.H/20 {
		t.Errorf("slice canvas looks blank: %+v", cs)
	}
	if cs.Coloured == 0 {
		t.Errorf("slice canvas shows no overlay colour: %+v", cs)
	}
	// The histogram is drawn; the series at the first peak arrives.
	if hs := eval[canvasCount](t, b, plotStats("histogram")); hs.Drawn < hs.W*hs.H/50 {
		t.Errorf("histogram canvas looks blank: %+v", hs)
	}
	ser := eval[seriesInfo](t, b, `window.winnow.series().then(s => s && {n: s.observed.length, m: s.fitted.length,
	  finite: Array.from(s.observed).concat(Array.from(s.fitted)).every(Number.isFinite), ijk: s.ijk})`)
	if ser.N != 160 || ser.M != 160 || !ser.Finite {
		t.Errorf("series at the peak: %+v, want 160 finite observed and fitted values (the demo has 160 volumes)", ser)
	}
	if ss := eval[canvasCount](t, b, plotStats("series")); ss.Drawn < ss.W*ss.H/50 {
		t.Errorf("series canvas looks blank: %+v", ss)
	}
	// The truth outline toggle: turning it off changes the slice pixels,
	// turning it on again restores them exactly.
	toggled := eval[[]int](t, b, `(() => {
	  const c = document.getElementById("slices"), x = document.getElementById("show-truth");
	  const grab = () => c.getContext("2d").getImageData(0, 0, c.width, c.height).data;
	  const diff = (a, b) => { let n = 0; for (let i = 0; i < a.length; i++) if (a[i] !== b[i]) n++; return n; };
	  const a = grab(); x.click(); const b = grab(); x.click(); const c2 = grab();
	  return [diff(a, b), diff(a, c2), x.checked ? 1 : 0];
	})()`)
	if toggled[0] == 0 || toggled[1] != 0 || toggled[2] != 1 {
		t.Errorf("outline toggle: %d values changed when off, %d differ after on again, checked %d", toggled[0], toggled[1], toggled[2])
	}
	fitMs := eval[float64](t, b, `window.winnow.timings.fitMs`)
	t0n := time.Now()
	if _, err := analysis.Fit(context.Background(), analysis.DemoInputs(mustDemo(t)), analysis.FitOptions{Contrasts: []string{analysis.DemoContrast(1)}}); err != nil {
		t.Fatal(err)
	}
	nativeMs := float64(time.Since(t0n).Microseconds()) / 1000
	t.Logf("FIGURE page demo (generate + fit + draw) %.0f ms; native generate + fit %.0f ms; ratio %.2f", fitMs, nativeMs, fitMs/nativeMs)

	// Exports: every kind makes a non-empty file with the right first bytes.
	for _, ex := range []struct{ key, head string }{
		{"summary", "{"}, {"clusters", "contrast\tcluster\tvoxels"}, {"report", "<!"}, {"design", ""},
		{"map:count-watch_z.nii.gz", "\x1f\x8b"}, {"map:mask.nii.gz", "\x1f\x8b"},
		{"png:slices", "\x89PNG"}, {"png:histogram", "\x89PNG"}, {"png:series", "\x89PNG"}, {"png:design", "\x89PNG"},
	} {
		got := eval[exportInfo](t, b, fmt.Sprintf(`window.winnow.exportFile(%q).then(async (f) => {
		  const buf = new Uint8Array(await (await fetch(f.url)).arrayBuffer());
		  return {name: f.name, size: f.size, fetched: buf.length, head: Array.from(buf.slice(0, 24), (x) => x.toString(16).padStart(2, "0")).join("")}; })`, ex.key))
		if got.Size == 0 || got.Fetched != got.Size || !strings.HasPrefix(got.Head, hex.EncodeToString([]byte(ex.head))) {
			t.Errorf("export %s: %+v, want a non-empty file starting %q", ex.key, got, ex.head)
		}
	}

	// Clicking a cluster row moves the crosshair to its peak.
	peak := eval[string](t, b, `(() => { const r = document.querySelectorAll("#clusters tbody tr[data-index]");
	  r[r.length - 1].click(); return document.getElementById("readout").textContent; })()`)
	if !strings.HasPrefix(peak, "ijk ") {
		t.Errorf("readout after a row click: %q", peak)
	}

	eval[bool](t, b, `window.winnow.series().then(() => true)`) // the clicked peak's series, for the picture
	shot, err := chromedp.Run(b.ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	shotDir, err := os.MkdirTemp("", "winnow-screens-")
	if err != nil {
		t.Fatal(err)
	}
	shotPath := filepath.Join(shotDir, "demo.png")
	if err := os.WriteFile(shotPath, shot, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot: %s", shotPath)

	// Rethreshold without refitting: uncorrected p < 0.001 (z > 3.09) is
	// looser than the FWE threshold (z >= 4.66 here), so at least as many
	// voxels survive (monotonicity of thresholding).
	before := eval[int](t, b, `window.winnow.summary().contrasts[0].surviving_voxels`)
	rowsBefore := eval[int](t, b, `document.querySelectorAll("#clusters tbody tr[data-index]").length`)
	colBefore := eval[int](t, b, canvasStats+".coloured")
	rt := eval[rethresholdInfo](t, b, `window.winnow.rethreshold({correct: "none", alpha: 0.001}).then(r => ({ms: r.ms, n: r.summary.contrasts[0].surviving_voxels}))`)
	after := rt.N
	if after < before {
		t.Errorf("surviving voxels: %d under none at 0.001, %d under fwe-rft at 0.05", after, before)
	}
	// The table and the map follow the new threshold.
	rowsAfter := eval[int](t, b, `document.querySelectorAll("#clusters tbody tr[data-index]").length`)
	colAfter := eval[int](t, b, canvasStats+".coloured")
	if after > before && (rowsAfter < rowsBefore || colAfter <= colBefore) {
		t.Errorf("after the looser threshold: rows %d -> %d, coloured pixels %d -> %d", rowsBefore, rowsAfter, colBefore, colAfter)
	}
	t.Logf("FIGURE rethreshold of the demo (%d voxels) %.1f ms to redraw", eval[int](t, b, `window.winnow.summary().mask_voxels`), rt.Ms)
	shot, err = chromedp.Run(b.ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	shotPath = filepath.Join(shotDir, "demo-uncorrected.png")
	if err := os.WriteFile(shotPath, shot, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot after rethreshold: %s", shotPath)
	eval[int](t, b, `window.winnow.rethreshold({correct: "fwe-rft", alpha: 0.05}).then(() => 0)`)

	// The page's demo against the native run of the same pipeline on the
	// same files (identity: one pipeline, two platforms).
	native, err := analysis.Fit(context.Background(), analysis.DemoInputs(files),
		analysis.FitOptions{Contrasts: []string{analysis.DemoContrast(1)}})
	if err != nil {
		t.Fatal(err)
	}
	compareSummaries(t, eval[string](t, b, `JSON.stringify(window.winnow.summary())`), native.Summary)

	// window.winnow.analyze on a small run served next to the page (the
	// test's script fetches it, not the page), against the native run.
	bold, events := smallRun(t)
	os.WriteFile(filepath.Join(res.Dir, "testrun-bold.nii.gz"), bold, 0o644)
	os.WriteFile(filepath.Join(res.Dir, "testrun-events.tsv"), events, 0o644)
	spec := "a-b=a - b"
	t2 := time.Now()
	pageJSON := eval[string](t, b, fmt.Sprintf(`(async () => {
	  const get = (n) => fetch(n).then(r => r.blob());
	  const s = await window.winnow.analyze({
	    bold: new File([await get("testrun-bold.nii.gz")], "bold.nii.gz"),
	    events: await (await get("testrun-events.tsv")).text(),
	    contrasts: [%q], correct: "fdr-bh", alpha: 0.05, smooth: 0, highpass: 128, noise: "ar1",
	  });
	  return JSON.stringify(s);
	})()`, spec))
	t.Logf("analyze() on the small run resolved in %v", time.Since(t2).Round(time.Millisecond))
	native, err = analysis.Fit(context.Background(), analysis.FitInputs{
		Bold:   analysis.Input{Name: "bold.nii.gz", R: bytes.NewReader(bold), Size: int64(len(bold))},
		Events: analysis.Input{Name: "events.tsv", R: bytes.NewReader(events), Size: int64(len(events))},
	}, analysis.FitOptions{Contrasts: []string{spec}, Correct: infer.MethodFDRBH})
	if err != nil {
		t.Fatal(err)
	}
	compareSummaries(t, pageJSON, native.Summary)
	if n := eval[int](t, b, `document.querySelectorAll("#clusters tbody tr[data-index]").length`); n == 0 {
		t.Error("no cluster row after analyze() on the small run, whose block effect is planted at 10 times the noise")
	}

	// The same run realigned: the summary carries motion figures, the page
	// draws the framewise displacement, and the page agrees with native.
	pageJSON = eval[string](t, b, fmt.Sprintf(`(async () => {
	  const get = (n) => fetch(n).then(r => r.blob());
	  const s = await window.winnow.analyze({
	    bold: new File([await get("testrun-bold.nii.gz")], "bold.nii.gz"),
	    events: await (await get("testrun-events.tsv")).text(), realign: true,
	    contrasts: [%q], correct: "fdr-bh",
	  });
	  return JSON.stringify(s);
	})()`, spec))
	native, err = analysis.Fit(context.Background(), analysis.FitInputs{
		Bold:   analysis.Input{Name: "bold.nii.gz", R: bytes.NewReader(bold), Size: int64(len(bold))},
		Events: analysis.Input{Name: "events.tsv", R: bytes.NewReader(events), Size: int64(len(events))},
	}, analysis.FitOptions{Contrasts: []string{spec}, Correct: infer.MethodFDRBH, Realign: true})
	if err != nil {
		t.Fatal(err)
	}
	compareSummaries(t, pageJSON, native.Summary)
	if native.Summary.Motion == nil {
		t.Error("native realigned summary has no motion block")
	}
	// The form shows the settings of a run started from script (so "Apply"
	// and Fit start from what is shown).
	form := eval[string](t, b, `[document.getElementById("realign").checked, document.getElementById("correct").value,
	    document.getElementById("contrasts").value].join("|")`)
	if want := "true|fdr-bh|" + spec; form != want {
		t.Errorf("form after analyze({realign: true, correct: fdr-bh}) shows %q, want %q", form, want)
	}
	if hidden := eval[bool](t, b, `document.getElementById("motion-box").hidden`); hidden {
		t.Error("motion plot hidden after a realigned fit")
	} else if ms := eval[canvasCount](t, b, plotStats("motion")); ms.Drawn < ms.W*ms.H/50 {
		t.Errorf("motion canvas looks blank: %+v", ms)
	}
	shot, err = chromedp.Run(b.ctx, chromedp.FullScreenshot(100))
	if err == nil {
		shotPath = filepath.Join(shotDir, "small-realigned.png")
		os.WriteFile(shotPath, shot, 0o644)
		t.Logf("screenshot of the realigned small run: %s", shotPath)
	}

	b.check(t, srv.URL+"/", "data:", "blob:")
}

func compareSummaries(t *testing.T, pageJSON string, native *report.Summary) {
	t.Helper()
	var page, want map[string]any
	if err := json.Unmarshal([]byte(pageJSON), &page); err != nil {
		t.Fatalf("page summary: %v", err)
	}
	nativeJSON, err := json.Marshal(native)
	if err != nil {
		t.Fatal(err)
	}
	json.Unmarshal(nativeJSON, &want)
	compareJSON(t, "summary", page, want)
}

// smallRun makes a 12 x 12 x 8 run of 90 volumes (TR 2 s): a bright
// ellipsoid with Gaussian noise (sd 10) and, in one corner of it, a box-car
// effect of 100 during the blocks of condition "a". Each 60 s cycle holds a
// 20 s block of "a" from 0 s and one of "b" from 30 s, with rest between, so
// neither condition is the complement of the other. Generated here so the
// test needs no fixture.
func smallRun(t *testing.T) (bold, events []byte) {
	t.Helper()
	const nx, ny, nz, nv, tr = 12, 12, 8, 90, 2.0
	g := nifti.Grid{
		Dims:      [3]int{nx, ny, nz},
		VoxelMM:   [3]float64{3, 3, 3},
		Affine:    [4][4]float64{{3, 0, 0, -16.5}, {0, 3, 0, -16.5}, {0, 0, 3, -10.5}, {0, 0, 0, 1}},
		SformCode: 2, QformCode: 2,
	}
	var buf bytes.Buffer
	w, err := nifti.NewWriter(&buf, g, nv, tr, nifti.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	vol := make([]float32, nx*ny*nz)
	for v := 0; v < nv; v++ {
		on := math.Mod(float64(v)*tr, 60) < 20 // inside a block of "a"
		for k := 0; k < nz; k++ {
			for j := 0; j < ny; j++ {
				for i := 0; i < nx; i++ {
					x, y, z := (float64(i)-5.5)/5, (float64(j)-5.5)/5, (float64(k)-3.5)/3.5
					val := 0.0
					if x*x+y*y+z*z <= 1 {
						val = 1000 + 10*rng.NormFloat64()
						if on && i >= 6 && i <= 8 && j >= 6 && j <= 8 && k >= 3 && k <= 5 {
							val += 100
						}
					}
					vol[i+nx*(j+ny*k)] = float32(val)
				}
			}
		}
		if err := w.WriteVolume(vol); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	ev := "onset\tduration\ttrial_type\n"
	for s := 0; s < nv*tr; s += 60 {
		ev += fmt.Sprintf("%d\t20\ta\n%d\t20\tb\n", s, s+30)
	}
	return buf.Bytes(), []byte(ev)
}

// compareJSON compares two decoded summaries: numbers within tolFloat32
// (relative, with an absolute floor of 1e-9), everything else exactly.
// Provenance (hashes of the inputs) and timing keys may differ in naming
// only where the page had no file name; they are compared too.
func compareJSON(t *testing.T, path string, got, want any) {
	t.Helper()
	switch w := want.(type) {
	case map[string]any:
		g, ok := got.(map[string]any)
		if !ok {
			t.Errorf("%s: got %T, want an object", path, got)
			return
		}
		for k, wv := range w {
			gv, ok := g[k]
			if !ok {
				t.Errorf("%s.%s: missing in the page's summary", path, k)
				continue
			}
			compareJSON(t, path+"."+k, gv, wv)
		}
	case []any:
		g, ok := got.([]any)
		if !ok || len(g) != len(w) {
			t.Errorf("%s: got %v, want %v", path, got, want)
			return
		}
		for i := range w {
			compareJSON(t, fmt.Sprintf("%s[%d]", path, i), g[i], w[i])
		}
	case float64:
		g, ok := got.(float64)
		if !ok || math.Abs(g-w) > tolFloat32*math.Max(math.Abs(w), 1e-4) {
			t.Errorf("%s: got %v, want %v (tolFloat32)", path, got, w)
		}
	default:
		if fmt.Sprint(got) != fmt.Sprint(want) {
			t.Errorf("%s: got %v, want %v", path, got, want)
		}
	}
}

// The single offline file starts its wasm when opened from file:// with no
// server at all.
func TestOfflineFile(t *testing.T) {
	needBrowser(t)
	res := site(t)
	b := newBrowser(t, 60*time.Second)
	url := "file://" + filepath.ToSlash(filepath.Join(res.Dir, "winnow-offline.html"))
	t0 := time.Now()
	if err := chromedp.Do(b.ctx, chromedp.Navigate(url)); err != nil {
		t.Fatal(err)
	}
	version := eval[string](t, b, `window.winnow.ready.then(r => r.version)`)
	t.Logf("offline page: wasm ready after %v (winnow %s)", time.Since(t0).Round(time.Millisecond), version)
	state := eval[string](t, b, `document.body.dataset.state`)
	if state != "ready" {
		t.Errorf("state %q, want ready", state)
	}
	// Start the demo, cancel it once the fit reads volumes, and expect the
	// page to come back ready: through the worker's own cancel, or (on a
	// machine too loaded to reach the next check within 5 s) a restarted
	// worker.
	status := eval[string](t, b, `(async () => {
	  const until = (f) => new Promise((res, rej) => { const t0 = Date.now();
	    (function w() { if (f()) res(); else if (Date.now() - t0 > 60000) rej(new Error("timed out")); else setTimeout(w, 20); })(); });
	  document.getElementById("demo").click();
	  await until(() => document.getElementById("progress-text").textContent.startsWith("reading"));
	  await new Promise((r) => setTimeout(r, 300));
	  document.getElementById("cancel").click();
	  await until(() => document.body.dataset.state === "ready" && !document.getElementById("demo").disabled);
	  return document.getElementById("status").textContent;
	})()`)
	if !strings.HasPrefix(status, "Canceled") {
		t.Errorf("status after cancel %q, want Canceled...", status)
	}
	t.Logf("after cancel: %s", status)
	b.check(t, "file://", "data:", "blob:")
}

// largeRun makes an 80 x 80 x 40 run of 40 volumes (int16, TR 2 s) whose
// automatic mask holds about 200 000 voxels: a bright ellipsoid reaching
// past the grid's faces, noise of sd 20 and a box-car effect of 40 in a
// 10-voxel cube during "a".
func largeRun(t *testing.T) (bold, events []byte) {
	t.Helper()
	const nx, ny, nz, nv, tr = 80, 80, 40, 40, 2.0
	g := nifti.Grid{
		Dims:      [3]int{nx, ny, nz},
		VoxelMM:   [3]float64{3, 3, 3},
		Affine:    [4][4]float64{{3, 0, 0, -118.5}, {0, 3, 0, -118.5}, {0, 0, 3, -58.5}, {0, 0, 0, 1}},
		SformCode: 2, QformCode: 2,
	}
	var buf bytes.Buffer
	w, err := nifti.NewWriter(&buf, g, nv, tr, nifti.WriteOptions{Datatype: nifti.Int16})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	vol := make([]float32, nx*ny*nz)
	for v := 0; v < nv; v++ {
		on := math.Mod(float64(v)*tr, 40) < 16
		for k := 0; k < nz; k++ {
			for j := 0; j < ny; j++ {
				for i := 0; i < nx; i++ {
					x, y, z := (float64(i)-39.5)/46, (float64(j)-39.5)/46, (float64(k)-19.5)/23
					val := 0.0
					if x*x+y*y+z*z <= 1 {
						val = 1000 + 20*rng.NormFloat64()
						if on && i >= 30 && i < 40 && j >= 30 && j < 40 && k >= 15 && k < 25 {
							val += 40
						}
					}
					vol[i+nx*(j+ny*k)] = float32(math.Round(val))
				}
			}
		}
		if err := w.WriteVolume(vol); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	ev := "onset\ttrial_type\tduration\n"
	for s := 0; s < nv*tr; s += 40 {
		ev += fmt.Sprintf("%d\ta\t16\n%d\tb\t10\n", s, s+20)
	}
	return buf.Bytes(), []byte(ev)
}

// The benchmark hooks on a ~200k-voxel result: re-threshold timings (target
// page_rethreshold_ms <= 50) and gzip inflation in the worker through the
// browser's DecompressionStream and through the Go decoder.
func TestLargeRunTimings(t *testing.T) {
	needBrowser(t)
	if testing.Short() {
		t.Skip("large generated run")
	}
	res := site(t)
	bold, events := largeRun(t)
	os.WriteFile(filepath.Join(res.Dir, "large-bold.nii.gz"), bold, 0o644)
	os.WriteFile(filepath.Join(res.Dir, "large-events.tsv"), events, 0o644)
	srv := httptest.NewServer(sitebuild.Handler(res.Dir, res.Policy))
	defer srv.Close()

	spec := "a-b=a - b"
	t0 := time.Now()
	native, err := analysis.Fit(context.Background(), analysis.FitInputs{
		Bold:   analysis.Input{Name: "bold.nii.gz", R: bytes.NewReader(bold), Size: int64(len(bold))},
		Events: analysis.Input{Name: "events.tsv", R: bytes.NewReader(events), Size: int64(len(events))},
	}, analysis.FitOptions{Contrasts: []string{spec}})
	if err != nil {
		t.Fatal(err)
	}
	nativeFit := time.Since(t0)
	var nativeRT []string
	for _, m := range []infer.Method{infer.MethodNone, infer.MethodFWERFT, infer.MethodFDRBH, infer.MethodClusterRFT} {
		t1 := time.Now()
		if err := native.Rethreshold(m, 0.05, 0.001); err != nil {
			t.Fatal(err)
		}
		nativeRT = append(nativeRT, fmt.Sprintf("%s %.1f ms", m, float64(time.Since(t1).Microseconds())/1000))
	}
	t.Logf("native: %d mask voxels, fit %v; Rethreshold %s", native.Summary.MaskVoxels, nativeFit.Round(time.Millisecond), strings.Join(nativeRT, ", "))
	if err := native.Rethreshold(infer.MethodFWERFT, analysis.DefaultAlpha, analysis.DefaultClusterP); err != nil { // back to the fit's own settings
		t.Fatal(err)
	}

	b := newBrowser(t, 3*time.Minute)
	if err := chromedp.Do(b.ctx, chromedp.Navigate(srv.URL+"/")); err != nil {
		t.Fatal(err)
	}
	eval[string](t, b, `window.winnow.ready.then(r => r.version)`)
	// The run inflated by the Go decoder, then by DecompressionStream (the
	// page's default): both summaries equal the native one, provenance
	// (size and SHA-256 of the file as given) included.
	var n int
	for _, inflate := range []string{"wasm", "stream"} {
		js := eval[string](t, b, fmt.Sprintf(`(async () => {
		  const get = (n) => fetch(n).then(r => r.blob());
		  const s = await window.winnow.analyze({bold: new File([await get("large-bold.nii.gz")], "bold.nii.gz"),
		    events: await (await get("large-events.tsv")).text(), contrasts: [%q], inflate: %q});
		  return JSON.stringify(s); })()`, spec, inflate))
		compareSummaries(t, js, native.Summary)
		n = native.Summary.MaskVoxels
		fitMs := eval[float64](t, b, `window.winnow.timings.fitMs`)
		t.Logf("FIGURE page analyze() of the large run (%d voxels, %d bytes gzip), inflated by %s: %.0f ms; native fit %v; ratio %.2f",
			n, len(bold), inflate, fitMs, nativeFit.Round(time.Millisecond), fitMs/float64(nativeFit.Milliseconds()))
		if inflate == "wasm" {
			// Let its series finish: it shares the worker's thread.
			eval[bool](t, b, `window.winnow.series().then(() => true)`)
		}
	}
	if n < 150000 {
		t.Errorf("mask of %d voxels; the run is built for about 200 000", n)
	}
	// Let the series at the peak (one more pass over the file) finish first:
	// it shares the worker's one thread with a rethreshold.
	t2 := time.Now()
	ser := eval[seriesInfo](t, b, `window.winnow.series().then(s => s ? {n: s.observed.length, m: s.fitted.length, finite: true, ijk: s.ijk} : {n: 0})`)
	t.Logf("series at the peak arrived within %v: %+v", time.Since(t2).Round(time.Millisecond), ser)
	if ser.N != 40 {
		t.Errorf("series of %d values, want 40", ser.N)
	}
	var figs []string
	for _, c := range []string{"none", "fwe-rft", "fdr-bh", "cluster-rft", "none"} {
		r := eval[rethresholdTiming](t, b, fmt.Sprintf(`window.winnow.rethreshold({correct: %q, alpha: 0.05}).then(r => ({ms: r.ms, workerMs: r.workerMs, paintedMs: r.paintedMs, go: r.go}))`, c))
		figs = append(figs, fmt.Sprintf("%s %.0f ms (worker reply %.0f, painted %.0f; in Go %v)", c, r.Ms, r.WorkerMs, r.PaintedMs, r.Go))
		if r.Ms <= 0 || r.WorkerMs > r.Ms {
			t.Errorf("rethreshold %s timings %+v", c, r)
		}
	}
	t.Logf("FIGURE page rethreshold, %d voxels: %s", n, strings.Join(figs, "; "))
	if hs := eval[canvasCount](t, b, plotStats("histogram")); hs.Drawn < hs.W*hs.H/50 {
		t.Errorf("histogram canvas looks blank: %+v", hs)
	}

	// gzip inflation of the same file in the worker, each way twice (the
	// second figure counts).
	for _, how := range []string{"stream", "wasm", "stream", "wasm"} {
		g := eval[gunzipInfo](t, b, fmt.Sprintf(`fetch("large-bold.nii.gz").then(r => r.blob()).then(b => window.winnow.gunzipTiming(b, %q))`, how))
		if g.Bytes != 352+80*80*40*40*2 {
			t.Errorf("%s inflated %d bytes, want %d", how, g.Bytes, 352+80*80*40*40*2)
		}
		t.Logf("FIGURE gunzip in the worker via %s: %d bytes in %.0f ms = %.0f MB/s (decompressed)", how, g.Bytes, g.Ms, float64(g.Bytes)/1e3/g.Ms)
	}
	b.check(t, srv.URL+"/", "data:", "blob:")
}

type rethresholdTiming struct {
	Ms, WorkerMs, PaintedMs float64
	Go                      map[string]float64
}

type gunzipInfo struct {
	Bytes int
	Ms    float64
}

// The parallel read (a second worker inflates the run and posts it to the
// fit worker, protocol.js: inflate, boldPort) must give exactly what one
// worker gives: the same summary and the same map bytes, both equal to the
// native pipeline's on the same files (one pipeline, two platforms). The
// run holds 20 MiB of decompressed data, so the pipe's 1 MiB chunks and its
// window of 8 are exercised. Progress is reported during the parallel
// read, and a cancel ends the fit and the reader worker's job: the page
// fits again afterwards.
func TestParallelRead(t *testing.T) {
	needBrowser(t)
	if testing.Short() {
		t.Skip("large generated run")
	}
	res := site(t)
	bold, events := largeRun(t)
	os.WriteFile(filepath.Join(res.Dir, "par-bold.nii.gz"), bold, 0o644)
	os.WriteFile(filepath.Join(res.Dir, "par-events.tsv"), events, 0o644)
	// A copy cut short inside the gzip stream, for the error path.
	os.WriteFile(filepath.Join(res.Dir, "par-cut.nii.gz"), bold[:len(bold)*2/3], 0o644)
	srv := httptest.NewServer(sitebuild.Handler(res.Dir, res.Policy))
	defer srv.Close()
	spec := "a-b=a - b"
	native, err := analysis.Fit(context.Background(), analysis.FitInputs{
		Bold:   analysis.Input{Name: "bold.nii.gz", R: bytes.NewReader(bold), Size: int64(len(bold))},
		Events: analysis.Input{Name: "events.tsv", R: bytes.NewReader(events), Size: int64(len(events))},
	}, analysis.FitOptions{Contrasts: []string{spec}})
	if err != nil {
		t.Fatal(err)
	}

	b := newBrowser(t, 4*time.Minute)
	if err := chromedp.Do(b.ctx, chromedp.Navigate(srv.URL+"/")); err != nil {
		t.Fatal(err)
	}
	eval[string](t, b, `window.winnow.ready.then(r => r.version)`)
	eval[bool](t, b, `(async () => {
	  const get = (n) => fetch(n).then(r => r.blob());
	  window.__par = {bold: new File([await get("par-bold.nii.gz")], "bold.nii.gz"), cut: new File([await get("par-cut.nii.gz")], "bold.nii.gz"),
	    events: await (await get("par-events.tsv")).text()};
	  return true; })()`)

	type fitOut struct {
		Summary, MapSHA string
		Workers         int
		Progress        []string
		Ms              float64
	}
	// fit runs analyze with the given workers, noting the progress texts
	// shown meanwhile, and hashes the exported z map (SHA-256 in the page).
	fit := func(workers int) fitOut {
		return eval[fitOut](t, b, fmt.Sprintf(`(async () => {
		  const seen = new Set(), el = document.getElementById("progress-text");
		  const poll = setInterval(() => seen.add(el.textContent), 10);
		  const p = window.__par, t0 = performance.now();
		  let s;
		  try {
		    s = await window.winnow.analyze({bold: p.bold, events: p.events, contrasts: [%q], workers: %d});
		  } finally { clearInterval(poll); }
		  const ms = performance.now() - t0;
		  const f = await window.winnow.exportFile("map:a-b_z.nii.gz");
		  const buf = await (await fetch(f.url)).arrayBuffer();
		  const sha = Array.from(new Uint8Array(await crypto.subtle.digest("SHA-256", buf)), (x) => x.toString(16).padStart(2, "0")).join("");
		  return {summary: JSON.stringify(s), mapSHA: sha, workers: window.winnow.timings.fitWorkers, progress: Array.from(seen), ms};
		})()`, spec, workers))
	}
	one := fit(1)
	two := fit(2)
	t.Logf("FIGURE analyze() of the large run (%d bytes gzip): one worker %.0f ms, two workers %.0f ms", len(bold), one.Ms, two.Ms)
	if one.Workers != 1 || two.Workers != 2 {
		t.Fatalf("workers used: %d and %d, want 1 and 2 (a gzip run, DecompressionStream present)", one.Workers, two.Workers)
	}
	// Identical results: the page's one-worker path is the reference.
	if one.Summary != two.Summary {
		t.Errorf("summaries differ between one and two workers:\n one %.400s\n two %.400s", one.Summary, two.Summary)
	}
	if one.MapSHA != two.MapSHA || len(one.MapSHA) != 64 {
		t.Errorf("z map bytes differ: SHA-256 %s with one worker, %s with two", one.MapSHA, two.MapSHA)
	}
	// Both against the native pipeline, provenance (size and SHA-256 of
	// the compressed file, measured by the reader worker) included.
	compareSummaries(t, two.Summary, native.Summary)
	reading := false
	for _, p := range two.Progress {
		if strings.HasPrefix(p, "reading and accumulating: ") && !strings.HasSuffix(p, " 40 of 40") {
			reading = true
		}
	}
	if !reading {
		t.Errorf("progress texts during the parallel read %q, want a partial \"reading and accumulating: N of 40\"", two.Progress)
	}
	// A two-worker group run borrows the idle reader worker for its second
	// shard and starts a fresh reader after it: the next fit reads in
	// parallel again, with the same result.
	lent := eval[bool](t, b, `window.winnow.group({demo: true, workers: 2, perms: 100}).then(() => window.winnow.timings.groupSteps.lentReader)`)
	afterGroup := fit(2)
	if !lent || afterGroup.Workers != 2 || afterGroup.MapSHA != two.MapSHA {
		t.Errorf("after a group run: reader lent %v, the next fit on %d workers (want 2), z map SHA-256 %s (want %s)", lent, afterGroup.Workers, afterGroup.MapSHA, two.MapSHA)
	}

	// A run cut short: one line naming the file, through the reader worker.
	cut := eval[string](t, b, fmt.Sprintf(`window.winnow.analyze({bold: window.__par.cut, events: window.__par.events, contrasts: [%q], workers: 2})
	  .then(() => "resolved", (e) => e.message)`, spec))
	if !strings.HasPrefix(cut, "bold.nii.gz: ") || strings.Contains(cut, "\n") || len(cut) > 300 {
		t.Errorf("truncated run through the reader worker: %q, want one line naming bold.nii.gz", cut)
	}
	t.Logf("truncated run: %s", cut)

	// Cancel during the parallel read: the fit ends well within the five
	// seconds after which the page would restart the worker, and the next
	// parallel fit (same reader worker) gives the same result again.
	canceled := eval[string](t, b, fmt.Sprintf(`(async () => {
	  const until = (f) => new Promise((res, rej) => { const t0 = Date.now();
	    (function w() { if (f()) res(); else if (Date.now() - t0 > 60000) rej(new Error("timed out")); else setTimeout(w, 10); })(); });
	  const p = window.__par;
	  document.getElementById("progress-text").textContent = ""; // the last fit's text
	  const run = window.winnow.analyze({bold: p.bold, events: p.events, contrasts: [%q], workers: 2}).then(() => "resolved", (e) => e.message);
	  await until(() => document.getElementById("progress-text").textContent.startsWith("reading"));
	  const t0 = performance.now();
	  document.getElementById("cancel").click();
	  const out = await run;
	  return out + " after " + Math.round(performance.now() - t0) + " ms; " + document.getElementById("status").textContent;
	})()`, spec))
	var ms int
	if _, err := fmt.Sscanf(canceled, "canceled after %d ms; Canceled.", &ms); err != nil || ms >= 4000 {
		t.Errorf("cancel during the parallel read: %q, want \"canceled after N ms; Canceled.\" with N < 4000", canceled)
	}
	t.Logf("cancel: %s", canceled)
	again := fit(2)
	if again.Summary != one.Summary || again.MapSHA != one.MapSHA {
		t.Errorf("the parallel fit after a cancel differs from the one-worker fit")
	}
	b.check(t, srv.URL+"/", "data:", "blob:")
}
