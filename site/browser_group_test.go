package site_test

import (
	"context"
	"encoding/json"
	"fmt"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"winnow/core/analysis"
	"winnow/scripts/sitebuild"
)

type nullCheckInfo struct {
	Designs  int
	Text     string
	Class    string
	Hidden   bool
	Warnings []string
}

const nullCheckState = `(() => {
  const el = document.getElementById("nullcheck");
  const s = window.winnow.summary();
  return {designs: s.null_check ? s.null_check.designs : 0, text: el.textContent, class: el.className,
          hidden: el.hidden, warnings: s.warnings || []};
})()`

// TestNullCheckAndGroup runs, in one page, the demo with the null-check
// switch on, a rethreshold to other settings, and the group demo on one and
// on two workers.
func TestNullCheckAndGroup(t *testing.T) {
	needBrowser(t)
	res := site(t)
	srv := httptest.NewServer(sitebuild.Handler(res.Dir, res.Policy))
	defer srv.Close()
	b := newBrowser(t, 4*time.Minute)
	if err := chromedp.Do(b.ctx, chromedp.Navigate(srv.URL+"/")); err != nil {
		t.Fatal(err)
	}
	eval[string](t, b, `window.winnow.ready.then(r => r.version)`)
	shotDir, err := os.MkdirTemp("", "winnow-screens-")
	if err != nil {
		t.Fatal(err)
	}
	shoot := func(name string) {
		shot, err := chromedp.Run(b.ctx, chromedp.FullScreenshot(100))
		if err != nil {
			t.Fatal(err)
		}
		p := filepath.Join(shotDir, name)
		if err := os.WriteFile(p, shot, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("screenshot: %s", p)
	}

	// 1. The null check: the switch, then the demo (its settings come from the form),
	// uncorrected: at alpha 0.05 per voxel over thousands of voxels nearly every chance
	// design has a finding, so the interval's lower bound lies above alpha and the
	// warning must be highlighted (nullcheck.Warning's rule).
	eval[bool](t, b, `(document.getElementById("correct").value = "none", true)`)
	t0 := time.Now()
	if err := chromedp.Do(b.ctx, chromedp.WaitEnabled(chromedp.ID("demo")), chromedp.Click(chromedp.ID("null-check")), chromedp.Click(chromedp.ID("demo"))); err != nil {
		t.Fatal(err)
	}
	eval[bool](t, b, waitDone)
	t.Logf("demo with the null check (40 chance designs) fitted and drawn in %v", time.Since(t0).Round(time.Millisecond))
	nc := eval[nullCheckInfo](t, b, nullCheckState)
	// The sentence of core/nullcheck.Sentence, for the 40 designs the switch asks for.
	if nc.Designs != 40 || nc.Hidden || !strings.Contains(nc.Text, "of 40 chance designs produced") {
		t.Errorf("null check after the demo: %+v; want 40 designs and the sentence shown", nc)
	}
	if !strings.Contains(nc.Class, "alert") || !strings.Contains(nc.Text, "do not control the familywise error") {
		t.Errorf("uncorrected null check: %+v; want the warning, highlighted", nc)
	}
	t.Logf("null check shown: %q (class %q)", nc.Text, nc.Class)
	shoot("nullcheck.png")
	// Other settings: the summary's null_check becomes null and the page says so.
	eval[bool](t, b, `window.winnow.rethreshold({correct: "fdr-bh", alpha: 0.05}).then(() => true)`)
	nc = eval[nullCheckInfo](t, b, nullCheckState)
	if nc.Designs != 0 || nc.Hidden || !strings.Contains(nc.Class, "stale") || !strings.Contains(nc.Text, "not with the settings shown") {
		t.Errorf("null check after a rethreshold to fdr-bh: %+v; want null and the note", nc)
	}

	// 2. The group demo through its button (default workers), then through the API on
	// one and two workers: the summaries must be equal (the sharding contract).
	if err := chromedp.Do(b.ctx, chromedp.Click(chromedp.ID("mode-group")), chromedp.WaitEnabled(chromedp.ID("g-demo")), chromedp.Click(chromedp.ID("g-demo"))); err != nil {
		t.Fatal(err)
	}
	eval[bool](t, b, waitDone)
	t.Logf("group demo via the button: %s", eval[string](t, b, `document.getElementById("status").textContent`))
	rows := eval[int](t, b, `document.querySelectorAll("#clusters tbody tr[data-index]").length`)
	if rows == 0 {
		t.Error("no cluster row after the group demo; its planted effect should survive fwe-perm")
	}
	ns := eval[canvasCount](t, b, plotStats("nulldist"))
	if ns.W == 0 || ns.Drawn < ns.W*ns.H/50 {
		t.Errorf("null distribution canvas looks blank: %+v", ns)
	}
	gnc := eval[nullCheckInfo](t, b, nullCheckState)
	// At group level the null sets are the sign-flipped maps (a one-sample test), not
	// chance designs (GroupResult.NullCheckText).
	if gnc.Hidden || !strings.Contains(gnc.Text, "sign-flipped null sets") || strings.Contains(gnc.Text, "chance design") {
		t.Errorf("group null check not shown in the group's words: %+v", gnc)
	}
	shoot("group.png")

	type run struct {
		Summary  string
		Ms       float64
		N        int
		Lent     bool
		Cores    int
		GroupTab bool
	}
	// The same maps as uploaded files (served next to the page; the test's script
	// fetches them, not the page), with one of them as the background.
	names, files, err := analysis.DemoGroupFiles(1)
	if err != nil {
		t.Fatal(err)
	}
	for i, n := range names {
		if err := os.WriteFile(filepath.Join(res.Dir, n), files[i], 0o644); err != nil {
			t.Fatal(err)
		}
	}
	list, _ := json.Marshal(names)
	one := eval[run](t, b, `window.winnow.group({demo: true, workers: 1}).then(s => ({summary: JSON.stringify(s), ms: window.winnow.timings.groupMs, n: window.winnow.timings.groupWorkers}))`)
	two := eval[run](t, b, fmt.Sprintf(`(async () => {
	  const maps = await Promise.all(%s.map(async (n) => new File([await (await fetch(n)).blob()], n)));
	  const s = await window.winnow.group({maps, background: maps[0], workers: 2});
	  return {summary: JSON.stringify(s), ms: window.winnow.timings.groupMs, n: window.winnow.timings.groupWorkers,
	    lent: window.winnow.timings.groupSteps.lentReader, cores: navigator.hardwareConcurrency || 1,
	    groupTab: document.getElementById("mode-group").getAttribute("aria-selected") === "true" && !document.getElementById("group-settings").hidden};
	})()`, list))
	t.Logf("group demo in the page: %.0f ms on %d worker (generated), %.0f ms on %d workers (uploaded maps)", one.Ms, one.N, two.Ms, two.N)
	shoot("group-uploaded.png")
	if one.N != 1 || two.N != 2 {
		t.Errorf("workers used: %d and %d, want 1 and 2", one.N, two.N)
	}
	// With two or more logical processors the idle reader worker runs shard 2
	// instead of a newly booted helper.
	// A group result started from script shows the Group tab's form beside it.
	if !two.GroupTab {
		t.Errorf("after window.winnow.group the Single run form is shown; want the Group tab")
	}
	if two.Cores >= 2 && !two.Lent {
		t.Errorf("the two-worker run booted a helper; want the idle reader worker to run shard 2")
	}
	// Sharding contract (interface.md, group --shard/merge): the merged shards give
	// exactly the result of one run.
	// The inputs (names, sizes, SHA-256) are the same files, so the whole summary must match.
	if one.Summary != two.Summary {
		t.Errorf("summary on 2 workers differs from 1 worker:\n%s\nvs\n%s", two.Summary, one.Summary)
	}
	// The page and the command line's pipeline agree on the same data.
	tn := time.Now()
	native, err := analysis.Group(context.Background(), analysis.DemoGroupInputs(names, files), analysis.GroupOptions{Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("group demo natively (1 worker): %v", time.Since(tn).Round(time.Millisecond))
	compareSummaries(t, one.Summary, native.Summary)

	// 3. Re-thresholding the shown group result (merged from two workers) at a new alpha,
	// without new permutations, gives what a new run at that alpha gives (identity: the
	// permutation null does not depend on alpha), through the API and the alpha control.
	re := eval[run](t, b, `window.winnow.rethreshold({alpha: 0.01}).then(r => ({summary: JSON.stringify(r.summary), ms: r.ms, n: 0}))`)
	t.Logf("group rethreshold to alpha 0.01 in the page: %.0f ms", re.Ms)
	native01, err := analysis.Group(context.Background(), analysis.DemoGroupInputs(names, files), analysis.GroupOptions{Workers: 1, Alpha: 0.01})
	if err != nil {
		t.Fatal(err)
	}
	compareSummaries(t, re.Summary, native01.Summary)
	type formState struct {
		Summary, Status, Correct, Alpha string
	}
	const byControl = `new Promise((resolve, reject) => {
	  const el = document.getElementById("%s");
	  el.value = "%s";
	  el.dispatchEvent(new Event("change"));
	  const t0 = Date.now();
	  (function check() {
	    const err = document.getElementById("error");
	    const s = window.winnow.summary();
	    if (!err.hidden && err.textContent) return resolve({summary: "", status: err.textContent});
	    if (document.body.dataset.state === "done" && %s) return resolve({summary: JSON.stringify(s),
	      status: document.getElementById("status").textContent,
	      correct: document.getElementById("g-correct").value, alpha: document.getElementById("g-alpha").value});
	    if (Date.now() - t0 > 60000) return reject(new Error("the control did not re-threshold"));
	    setTimeout(check, 50);
	  })();
	})`
	ctl := eval[formState](t, b, fmt.Sprintf(byControl, "g-alpha", "0.1", `s.contrasts[0].alpha === 0.1`))
	native10, err := analysis.Group(context.Background(), analysis.DemoGroupInputs(names, files), analysis.GroupOptions{Workers: 1, Alpha: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	if ctl.Summary == "" {
		t.Fatalf("alpha control: %s", ctl.Status)
	}
	compareSummaries(t, ctl.Summary, native10.Summary)
	if !strings.Contains(ctl.Status, "without new permutations") || ctl.Correct != "fwe-perm" || ctl.Alpha != "0.1" {
		t.Errorf("after the alpha control: status %q, form %s at %s; want the re-threshold said and the form showing fwe-perm at 0.1", ctl.Status, ctl.Correct, ctl.Alpha)
	}
	// cluster-perm at another cluster-forming p needs the largest cluster of every
	// relabelling at that p: the page says to run again instead of re-thresholding.
	eval[bool](t, b, `window.winnow.group({demo: true, workers: 1, correct: "cluster-perm", perms: 200, clusterP: 0.01}).then(() => true)`)
	ref := eval[formState](t, b, fmt.Sprintf(byControl, "g-cluster-p", "0.001", `false`))
	if !strings.Contains(ref.Status, "cluster-forming p 0.001") || !strings.Contains(ref.Status, "run the group analysis again") {
		t.Errorf("cluster-perm at a new cluster-forming p: %q; want the page to say it needs a new run", ref.Status)
	}
	if s := eval[string](t, b, `JSON.stringify(window.winnow.summary().contrasts[0].cluster_p)`); s != "0.01" {
		t.Errorf("after the refused re-threshold the shown cluster_p is %s, want 0.01 (the result unchanged)", s)
	}
	b.check(t, srv.URL)
}
