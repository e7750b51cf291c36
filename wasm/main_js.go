//go:build js && wasm

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"sync"
	"syscall/js"
	"time"

	"winnow/core/analysis"
	"winnow/core/phantom"
	"winnow/core/report"
)

// The worker's state: the cancel function of each running request and the
// latest fit, which rethreshold works on.
var (
	mu   sync.Mutex
	jobs = map[int]context.CancelFunc{}
	last *analysis.FitResult
	// lastSource reopens the files of the last fit, for a voxel's series.
	lastSource func() (analysis.SeriesInputs, error)
	// hists are the histograms last sent for histOf, reused by a rethreshold.
	hists  []*analysis.Histogram
	histOf *analysis.FitResult
)

func main() {
	receive := js.FuncOf(func(this js.Value, args []js.Value) any {
		if len(args) > 0 {
			handle(args[0])
		}
		return nil
	})
	js.Global().Set("winnowReceive", receive)
	ht, hh := analysis.HRFCurve(0.1)
	t, bt := typedArray("Float64Array", float64Bytes(ht))
	h, bh := typedArray("Float64Array", float64Bytes(hh))
	post(map[string]any{"v": ProtocolVersion, "id": 0, "kind": KindReady, "version": report.Version,
		"hrf": map[string]any{"t": t, "h": h}}, []any{bt, bh})
	select {}
}

// handle decodes one message and returns at once; work runs in a goroutine.
func handle(msg js.Value) {
	id := 0
	defer func() {
		if r := recover(); r != nil {
			postError(id, fmt.Errorf("bad message: %v", r))
		}
	}()
	if msg.Type() != js.TypeObject {
		postError(0, fmt.Errorf("message is a %s, want an object", msg.Type()))
		return
	}
	id = intField(msg, "id")
	if v := intField(msg, "v"); v != ProtocolVersion {
		postError(id, fmt.Errorf("protocol version %d, want %d", v, ProtocolVersion))
		return
	}
	kind := stringField(msg, "kind")
	switch kind {
	case KindAnalyze:
		in, err := decodeInputs(msg)
		if err != nil {
			if port := msg.Get("boldPort"); present(port) && port.InstanceOf(js.Global().Get("MessagePort")) {
				newPortReader(port).Close() // the reader worker's job ends
			}
			postError(id, err)
			return
		}
		// A gzip run is inflated by the browser (DecompressionStream),
		// several times faster than the Go decoder under WebAssembly
		// (measured in site/browser_test.go), unless inflate is "wasm":
		// in a second worker that posts the bytes on boldPort (the page's
		// parallel path), else here.
		var pipe *portReader
		if port := msg.Get("boldPort"); present(port) && port.InstanceOf(js.Global().Get("MessagePort")) {
			pipe = newPortReader(port)
			in.Bold.R = pipe
			in.Bold.Provenance = pipe.Ref
		} else if bold := msg.Get("bold"); stringField(msg, "inflate") != "wasm" && isGzip(bold) {
			tee := newInflateTee(bold)
			in.Bold.R = tee
			in.Bold.Provenance = tee.Ref
		}
		s := decodeSettings(msg)
		reopen := reopener(msg)
		start(id, func(ctx context.Context, progress func(string, int, int)) (*analysis.FitResult, []float32, error) {
			if pipe != nil {
				defer pipe.Close()
			}
			opt, err := s.FitOptions()
			if err != nil {
				return nil, nil, err
			}
			opt.Progress = progress
			res, err := analysis.Fit(ctx, in, opt)
			if err == nil {
				mu.Lock()
				lastSource = reopen
				mu.Unlock()
			}
			return res, nil, err
		})
	case KindDemo:
		s := decodeSettings(msg)
		start(id, func(ctx context.Context, progress func(string, int, int)) (*analysis.FitResult, []float32, error) {
			seed := s.Seed
			progress("generating the demo scenario", 0, 1)
			files, err := analysis.DemoFiles(seed)
			if err != nil {
				return nil, nil, err
			}
			sc := phantom.New(seed)
			progress("generating the demo scenario", 1, 1)
			s.Contrasts = []string{sc.Contrast}
			opt, err := s.FitOptions()
			if err != nil {
				return nil, nil, err
			}
			opt.Progress = progress
			res, err := analysis.Fit(ctx, analysis.DemoInputs(files), opt)
			if err == nil {
				bold := files["bold.nii.gz"]
				mu.Lock()
				lastSource = func() (analysis.SeriesInputs, error) {
					return analysis.SeriesInputs{Bold: analysis.Input{Name: "bold.nii.gz", R: bytes.NewReader(bold), Size: int64(len(bold))}}, nil
				}
				mu.Unlock()
			}
			return res, sc.Truth, err
		})
	case KindRethreshold:
		s := decodeSettings(msg)
		go func() {
			defer recoverInto(id)
			mu.Lock()
			r := last
			mu.Unlock()
			if r == nil {
				postError(id, errors.New("nothing to rethreshold: no analysis has finished yet"))
				return
			}
			t0 := time.Now()
			timing := map[string]float64{}
			m, alpha, clusterP, err := s.Rethreshold()
			if err == nil {
				err = r.Rethreshold(m, alpha, clusterP)
			}
			if err != nil {
				postError(id, err)
				return
			}
			timing["rethreshold"] = msSince(t0)
			postResult(id, r, true, nil, timing)
		}()
	case KindSeries:
		ijk, err := ijkField(msg)
		if err != nil {
			postError(id, err)
			return
		}
		run(id, func(ctx context.Context) {
			mu.Lock()
			r, src := last, lastSource
			mu.Unlock()
			if r == nil || src == nil {
				postError(id, errors.New("no fitted run to read a time series from"))
				return
			}
			in, err := src()
			if err != nil {
				postError(id, err)
				return
			}
			progress := progressPoster(id)
			s, err := r.SeriesAt(ctx, in, ijk, func(done, total int) { progress("reading time series", done, total) })
			if ctx.Err() != nil {
				err = errors.New("canceled")
			}
			if err != nil {
				postError(id, err)
				return
			}
			postSeries(id, s)
		})
	case KindExport:
		what := stringField(msg, "what")
		index := intField(msg, "index")
		run(id, func(context.Context) {
			mu.Lock()
			r := last
			mu.Unlock()
			if r == nil {
				postError(id, errors.New("nothing to export: no analysis has finished yet"))
				return
			}
			name, mime, b, err := exportBytes(r, what, index)
			if err != nil {
				postError(id, err)
				return
			}
			arr, buf := typedArray("Uint8Array", b)
			post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindResult, "name": name, "type": mime, "bytes": arr}, []any{buf})
		})
	case KindInflate:
		blob, port := msg.Get("blob"), msg.Get("port")
		if !present(blob) || !blob.InstanceOf(js.Global().Get("Blob")) || !present(port) || !port.InstanceOf(js.Global().Get("MessagePort")) {
			postError(id, errors.New("inflate: want blob, a gzip Blob, and port, a MessagePort"))
			return
		}
		run(id, func(ctx context.Context) {
			n, sum, err := inflateToPort(ctx, blob, port)
			if err != nil {
				postError(id, err)
				return
			}
			post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindResult, "bytes": float64(n), "sha256": sum}, nil)
		})
	case KindGunzip:
		blob := msg.Get("blob")
		how := stringField(msg, "how")
		run(id, func(ctx context.Context) {
			n, ms, err := gunzipTiming(blob, how)
			if err != nil {
				postError(id, err)
				return
			}
			post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindResult, "bytes": n, "ms": ms}, nil)
		})
	case KindGroup, KindGroupMerge:
		gs := decodeGroupSettings(msg)
		src, err := groupSource(msg)
		if err != nil {
			postError(id, err)
			return
		}
		var shards [][]byte
		if kind == KindGroupMerge {
			v := msg.Get("shards")
			if !present(v) || !js.Global().Get("Array").Call("isArray", v).Bool() || v.Length() == 0 {
				postError(id, errors.New("shards: want an array of Uint8Array, one per shard"))
				return
			}
			for i := 0; i < v.Length(); i++ {
				e := v.Index(i)
				if !e.InstanceOf(js.Global().Get("Uint8Array")) {
					postError(id, fmt.Errorf("shards[%d]: want a Uint8Array", i))
					return
				}
				b := make([]byte, e.Length())
				js.CopyBytesToGo(b, e)
				shards = append(shards, b)
			}
		}
		runGroup(id, kind, gs, src, shards, backgroundOf(msg))
	case KindCancel:
		target := intField(msg, "target")
		mu.Lock()
		if c := jobs[target]; c != nil {
			c()
		}
		mu.Unlock()
	default:
		postError(id, fmt.Errorf("unknown message kind %q (want one of %s)", kind, strings.Join(requestKinds, ", ")))
	}
}

// start runs a fit in its own goroutine, so the handler returns and the
// worker keeps receiving messages (cancel) while it runs.
func start(id int, job func(context.Context, func(string, int, int)) (*analysis.FitResult, []float32, error)) {
	ctx, cancel := context.WithCancel(context.Background())
	mu.Lock()
	jobs[id] = cancel
	mu.Unlock()
	go func() {
		defer func() {
			mu.Lock()
			delete(jobs, id)
			mu.Unlock()
			cancel()
		}()
		defer recoverInto(id)
		res, truth, err := job(ctx, progressPoster(id))
		if ctx.Err() != nil {
			err = errors.New("canceled")
		}
		if err != nil {
			postError(id, err)
			return
		}
		mu.Lock()
		last = res
		mu.Unlock()
		postResult(id, res, false, truth, map[string]float64{})
		res.PrepareRethreshold() // while the page draws
	}()
}

// run runs a short job (series, export, timing) in its own goroutine with a
// context that a cancel message for id ends.
func run(id int, job func(context.Context)) {
	ctx, cancel := context.WithCancel(context.Background())
	mu.Lock()
	jobs[id] = cancel
	mu.Unlock()
	go func() {
		defer func() {
			mu.Lock()
			delete(jobs, id)
			mu.Unlock()
			cancel()
		}()
		defer recoverInto(id)
		job(ctx)
	}()
}

// reopener returns a function that opens the request's run (and mask) again
// from the same Blobs. Text events need no reopening: a series reads only
// the run.
func reopener(msg js.Value) func() (analysis.SeriesInputs, error) {
	bold, boldName := msg.Get("bold"), stringField(msg, "boldName")
	mask, maskName := msg.Get("mask"), stringField(msg, "maskName")
	return func() (analysis.SeriesInputs, error) {
		var in analysis.SeriesInputs
		r, size := openBlob(bold)
		if isGzip(bold) {
			r = newGunzipStream(bold)
		}
		in.Bold = analysis.Input{Name: boldName, R: r, Size: size}
		if present(mask) && mask.InstanceOf(js.Global().Get("Blob")) {
			mr, msize := openBlob(mask)
			in.Mask = &analysis.Input{Name: maskName, R: mr, Size: msize}
		}
		return in, nil
	}
}

func recoverInto(id int) {
	if r := recover(); r != nil {
		postError(id, fmt.Errorf("internal error: %v", r))
	}
}

// progressPoster returns the Progress callback of one job. It posts at most
// every 100 ms (and always on a new stage or the last step), and about every
// 200 ms it sleeps briefly: with nothing else runnable the Go scheduler then
// returns to the worker's event loop, which delivers waiting messages, such as
// a cancel, to the handler.
func progressPoster(id int) func(string, int, int) {
	var lastStage string
	var lastPost, lastYield time.Time
	return func(stage string, done, total int) {
		now := time.Now()
		if stage != lastStage || done >= total || now.Sub(lastPost) >= 100*time.Millisecond {
			post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindProgress, "stage": stage, "done": done, "total": total}, nil)
			lastStage, lastPost = stage, now
		}
		if now.Sub(lastYield) >= 200*time.Millisecond {
			time.Sleep(time.Millisecond)
			lastYield = time.Now()
		}
	}
}

func post(msg map[string]any, transfer []any) {
	if transfer == nil {
		js.Global().Call("postMessage", msg)
		return
	}
	js.Global().Call("postMessage", msg, transfer)
}

// postError posts err's text on one line.
func postError(id int, err error) {
	text := strings.Join(strings.Fields(strings.ReplaceAll(err.Error(), "\n", " ")), " ")
	post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindError, "message": text}, nil)
}

// postResult encodes a fit for the page's views; partial sends only the
// summary and the thresholded maps.
//
// timing holds step times (ms) measured before; the steps here are added
// and the whole goes out as "timing", for the benchmark notes.
func postResult(id int, r *analysis.FitResult, partial bool, truth []float32, timing map[string]float64) {
	t0 := time.Now()
	// Compact JSON: the page parses it; indenting costs a quarter of the
	// encoding time for a summary of thousands of clusters.
	summary, err := json.Marshal(r.Summary)
	if err != nil {
		postError(id, err)
		return
	}
	var transfer []any
	maps := []any{}
	for _, m := range viewMaps(r.Maps, partial) {
		arr, buf := typedArray("Float32Array", float32Bytes(m.Data))
		transfer = append(transfer, buf)
		maps = append(maps, map[string]any{"contrast": m.Contrast, "kind": m.Kind, "name": m.File, "data": arr})
	}
	timing["summary"] = msSince(t0)
	t1 := time.Now()
	histMsgs := []any{}
	mu.Lock()
	prev := hists
	if histOf != r || len(prev) != len(r.Summary.Contrasts) {
		prev = nil
	}
	mu.Unlock()
	next := make([]*analysis.Histogram, len(r.Summary.Contrasts))
	for c := range r.Summary.Contrasts {
		var h *analysis.Histogram
		var err error
		if partial && prev != nil {
			h, err = r.UpdateHistogram(prev[c])
		} else {
			h, err = r.Histogram(c, 0)
		}
		if err != nil {
			postError(id, err)
			return
		}
		next[c] = h
		hm := map[string]any{"contrast": h.Contrast, "n": h.N, "corrected": h.Corrected, "label": h.Label, "threshold": nil}
		if h.Threshold != nil {
			hm["threshold"] = *h.Threshold
		}
		for key, x := range map[string][]float64{"edges": h.Edges, "counts": h.Counts, "curveZ": h.CurveZ, "curveY": h.CurveY} {
			arr, buf := typedArray("Float64Array", float64Bytes(x))
			transfer = append(transfer, buf)
			hm[key] = arr
		}
		histMsgs = append(histMsgs, hm)
	}
	mu.Lock()
	hists, histOf = next, r
	mu.Unlock()
	timing["histograms"] = msSince(t1)
	msg := map[string]any{
		"v": ProtocolVersion, "id": id, "kind": KindResult,
		"summary": string(summary), "maps": maps, "partial": partial, "hist": histMsgs,
		"nullCheck": nullCheckMsg(r.Summary),
	}
	if !partial {
		g := r.Grid
		msg["dims"] = []any{g.Dims[0], g.Dims[1], g.Dims[2]}
		msg["voxelMM"] = []any{g.VoxelMM[0], g.VoxelMM[1], g.VoxelMM[2]}
		msg["affine"] = floats(affineRows(g.Affine))
		mask, buf := typedArray("Uint8Array", boolBytes(r.Mask))
		transfer = append(transfer, buf)
		msg["mask"] = mask
		files := []any{}
		for i, m := range r.Maps {
			files = append(files, map[string]any{"index": i, "file": m.File, "kind": m.Kind, "contrast": m.Contrast})
		}
		msg["files"] = files
		if r.Design != nil {
			rows, cols, data := denseRows(r.Design.X)
			arr, buf := typedArray("Float64Array", float64Bytes(data))
			transfer = append(transfer, buf)
			names := []any{}
			for _, n := range r.Design.Names() {
				names = append(names, n)
			}
			msg["design"] = map[string]any{"rows": rows, "cols": cols, "names": names, "data": arr}
		}
		if r.MotionTSV != nil {
			ms, err := analysis.ParseMotionTSV(r.MotionTSV)
			if err != nil {
				postError(id, err)
				return
			}
			arr, buf := typedArray("Float64Array", float64Bytes(ms.FD))
			transfer = append(transfer, buf)
			mo := map[string]any{"fd": arr}
			if m := r.Summary.Motion; m != nil {
				mo["meanFD"], mo["maxFD"] = m.MeanFDmm, m.MaxFDmm
			}
			msg["motion"] = mo
		}
		if truth != nil {
			arr, buf := typedArray("Float32Array", float32Bytes(truth))
			transfer = append(transfer, buf)
			msg["truth"] = arr
		}
	}
	timing["encode"] = msSince(t0)
	tm := map[string]any{}
	for k, v := range timing {
		tm[k] = v
	}
	msg["timing"] = tm
	post(msg, transfer)
}

func msSince(t time.Time) float64 { return float64(time.Since(t).Microseconds()) / 1000 }

// postSeries sends a voxel's series.
func postSeries(id int, s *analysis.Series) {
	var transfer []any
	out := map[string]any{"ijk": []any{s.IJK[0], s.IJK[1], s.IJK[2]}, "rho": s.Rho}
	for key, x := range map[string][]float64{"time": s.TimeSec, "observed": s.Observed, "fitted": s.Fitted} {
		arr, buf := typedArray("Float64Array", float64Bytes(x))
		transfer = append(transfer, buf)
		out[key] = arr
	}
	post(map[string]any{"v": ProtocolVersion, "id": id, "kind": KindResult, "series": out}, transfer)
}

// typedArray copies b into a new ArrayBuffer in one call and views it as
// the named typed array; the buffer is returned for the transfer list.
func typedArray(ctor string, b []byte) (arr, buf js.Value) {
	u8 := js.Global().Get("Uint8Array").New(len(b))
	js.CopyBytesToJS(u8, b)
	buf = u8.Get("buffer")
	if ctor == "Uint8Array" {
		return u8, buf
	}
	return js.Global().Get(ctor).New(buf), buf
}

func floats(x []float64) []any {
	out := make([]any, len(x))
	for i, v := range x {
		out[i] = v
	}
	return out
}

// decodeInputs turns the message's files into analysis inputs.
func decodeInputs(msg js.Value) (analysis.FitInputs, error) {
	var in analysis.FitInputs
	var err error
	if in.Bold, err = fileField(msg, "bold", "bold.nii.gz", true); err != nil {
		return in, err
	}
	if in.Events, err = fileField(msg, "events", "events.tsv", false); err != nil {
		return in, err
	}
	if in.Confounds, err = optionalField(msg, "confounds", "confounds.tsv", false); err != nil {
		return in, err
	}
	if in.Mask, err = optionalField(msg, "mask", "mask.nii.gz", true); err != nil {
		return in, err
	}
	return in, nil
}

// optionalField is fileField for an input that may be absent (nil then).
func optionalField(msg js.Value, key, defName string, blobOnly bool) (*analysis.Input, error) {
	if !present(msg.Get(key)) {
		return nil, nil
	}
	in, err := fileField(msg, key, defName, blobOnly)
	if err != nil {
		return nil, err
	}
	return &in, nil
}

// fileField reads the Blob (or, unless blobOnly, the text) in msg[key] and
// its name in msg[key+"Name"].
func fileField(msg js.Value, key, defName string, blobOnly bool) (analysis.Input, error) {
	name := stringField(msg, key+"Name")
	if name == "" {
		name = defName
	}
	v := msg.Get(key)
	switch {
	case v.Type() == js.TypeString && !blobOnly:
		s := v.String()
		return analysis.Input{Name: name, R: strings.NewReader(s), Size: int64(len(s))}, nil
	case v.Type() == js.TypeObject && v.InstanceOf(js.Global().Get("Blob")):
		r, size := openBlob(v)
		return analysis.Input{Name: name, R: r, Size: size}, nil
	case !present(v):
		return analysis.Input{}, &analysis.InputError{File: key, Err: errors.New("missing; want a file")}
	}
	want := "a File or Blob"
	if !blobOnly {
		want += " or text"
	}
	return analysis.Input{}, &analysis.InputError{File: name, Err: fmt.Errorf("is a %s, want %s", v.Type(), want)}
}

func decodeSettings(msg js.Value) Settings {
	s := Settings{
		Correct:   stringField(msg, "correct"),
		Alpha:     numberField(msg, "alpha"),
		ClusterP:  numberField(msg, "clusterP"),
		SmoothMM:  numberField(msg, "smooth"),
		Noise:     stringField(msg, "noise"),
		TR:        numberField(msg, "tr"),
		HRFDerivs: msg.Get("hrfDerivs").Truthy(),
		Contrasts: stringsField(msg, "contrasts"),
		Modulate:  stringsField(msg, "modulate"),
		Seed:      uint64(max(0, numberField(msg, "seed"))),
		Realign:   msg.Get("realign").Truthy(),
		NullCheck: msg.Get("nullCheck").Truthy(),
	}
	if h := msg.Get("highpass"); h.Type() == js.TypeNumber {
		v := h.Float()
		s.Highpass = &v
	}
	return s
}

// ijkField reads msg.ijk, three integers.
func ijkField(msg js.Value) ([3]int, error) {
	var ijk [3]int
	v := msg.Get("ijk")
	if !present(v) || !js.Global().Get("Array").Call("isArray", v).Bool() || v.Length() != 3 {
		return ijk, errors.New("ijk: want an array of three voxel indices")
	}
	for a := range 3 {
		e := v.Index(a)
		if e.Type() != js.TypeNumber || e.Float() != float64(e.Int()) {
			return ijk, fmt.Errorf("ijk[%d]: %s, want an integer", a, e.String())
		}
		ijk[a] = e.Int()
	}
	return ijk, nil
}

func present(v js.Value) bool { return !v.IsUndefined() && !v.IsNull() }

func intField(msg js.Value, key string) int {
	if v := msg.Get(key); v.Type() == js.TypeNumber {
		return v.Int()
	}
	return 0
}

func numberField(msg js.Value, key string) float64 {
	if v := msg.Get(key); v.Type() == js.TypeNumber {
		return v.Float()
	}
	return 0
}

func stringField(msg js.Value, key string) string {
	if v := msg.Get(key); v.Type() == js.TypeString {
		return v.String()
	}
	return ""
}

func stringsField(msg js.Value, key string) []string {
	v := msg.Get(key)
	if !present(v) || !js.Global().Get("Array").Call("isArray", v).Bool() {
		return nil
	}
	out := make([]string, 0, v.Length())
	for i := 0; i < v.Length(); i++ {
		if e := v.Index(i); e.Type() == js.TypeString {
			out = append(out, e.String())
		}
	}
	return out
}
