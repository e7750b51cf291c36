package main

// The page <-> worker protocol, version 1. site/protocol.js carries the same
// text; change both together.
//
// Every message is a plain object {v: 1, id, kind, ...fields}. id is a
// positive integer the page picks for each request; every reply carries the
// id of the request it answers. A message whose v is not 1 is answered with
// an error.
//
// page -> worker
//
//	boot         wasm: ArrayBuffer | url: string. Seen only by site/worker.js,
//	             which starts the Go program with it.
//	analyze      bold: Blob, boldName: string,
//	             events: Blob | string, eventsName: string,
//	             confounds?: Blob | string, confoundsName?: string,
//	             mask?: Blob, maskName?: string,
//	             contrasts: string[] (SPECs "NAME=EXPR"),
//	             correct: string (none, bonferroni, holm, fdr-bh, fdr-by, fwe-rft, cluster-rft),
//	             alpha: number, clusterP: number, smooth: number (FWHM mm),
//	             highpass: number (s; 0 off), noise: "ar1" | "ols",
//	             tr?: number (s; 0 or absent: from the header),
//	             hrfDerivs?: boolean, modulate?: string[], realign?: boolean,
//	             nullCheck?: boolean (40 chance designs).
//	             inflate?: "stream" | "wasm" (how a gzip run is inflated: the
//	             browser's DecompressionStream, the default, or the Go decoder).
//	             boldPort?: MessagePort (transferred): the decompressed run
//	             arrives on it from a reader worker (inflate, below) instead
//	             of being read from bold, which still names the file and is
//	             read again for a series.
//	             An absent or zero number means the documented default.
//	demo         seed: number, and the settings of analyze except the files
//	             and contrasts: the built-in synthetic scenario is generated
//	             and fitted with its own contrast.
//	rethreshold  correct, alpha, clusterP: infer the last result again
//	             under new settings, without refitting.
//	series       ijk: [i, j, k]: the time series of one voxel of the last
//	             fit and the model fitted to it. The worker reads the run
//	             again (the same Blob, or the demo's bytes), so it takes
//	             one more pass over the file; cancel ends it.
//	export       what: "map" (with index into the result's files),
//	             "clusters", "summary", "report", "design" or "motion":
//	             one file of the last result, encoded by the Go pipeline.
//	inflate      blob: Blob (gzip), port: MessagePort (transferred): sent to a
//	             second worker, the reader, for the parallel read of a run.
//	             It slices the Blob, hashes it (SHA-256) and inflates it with
//	             DecompressionStream, and posts on port the port messages
//	             below; the page sends the other end of the channel to the
//	             fit worker as analyze's boldPort. Reply: result with bytes
//	             (compressed size) and sha256, or error.
//	gunzip       blob: Blob, how: "stream" | "wasm": inflate a gzip Blob to
//	             the end and report the time (a benchmark hook).
//	group        maps: Blob[], mapNames: string[] (one 3D effect map per
//	             subject), design?: Blob | string, designName?, mask?: Blob,
//	             maskName?, background?: Blob, backgroundName? (a 3D image on
//	             the maps' grid to draw over; else the maps' mean), or demo:
//	             true (the worker generates the synthetic
//	             group demo); contrasts: string[] (may be empty for a
//	             one-sample test), correct (fwe-perm, cluster-perm, tfce,
//	             none, bonferroni, holm, fdr-bh, fdr-by, fwe-rft), perms,
//	             seed, alpha, clusterP; shard, shards (K of N, 1-based:
//	             only that slice of the relabellings; the reply is a shard).
//	             Or rethreshold: true with correct, alpha, clusterP (absent:
//	             those shown) and no files: infer the worker's last complete
//	             group result again without new permutations; the reply is a
//	             group result with partial: true (summary, thresholded maps,
//	             hist, nullHist, nullCheck, timing: {rethreshold}), or an
//	             error that ends "run the group analysis again" where the
//	             recorded null cannot answer (cluster-perm at a new p).
//	groupMerge   the fields of group (the maps are read again for the mean
//	             background) and shards: Uint8Array[] (every shard's
//	             bytes): the result one unsharded run gives.
//	cancel       target: the id of a running request. It has no reply of its
//	             own: the target ends with an error "canceled".
//
// worker -> page
//
//	ready        version: string, hrf: {t, h: Float64Array} (the canonical
//	             response kernel, sampled every 0.1 s over 0 to 32 s). Sent
//	             once, with id 0, when the Go program has started.
//	progress     stage: string, done: number, total: number.
//	result       summary: string (the text of summary.json),
//	             dims: [nx, ny, nz], voxelMM: [3]number,
//	             affine: number[16] (4x4, row-major, 0-based voxel -> world mm),
//	             maps: [{contrast: number (-1 for run-level maps),
//	                     kind: "mean" | "z" | "stat" | "thresholded",
//	                     name: string, data: Float32Array (nx*ny*nz,
//	                     index i + nx*(j + ny*k))}],
//	             mask: Uint8Array (1 in the analysis mask),
//	             design: {rows, cols, names: string[], data: Float64Array (row-major)},
//	             truth?: Float32Array (demo only: 1 inside planted activation),
//	             files: [{index, file, kind, contrast}] (every map the fit
//	             made, for export),
//	             hist: [{contrast, edges, counts, curveZ, curveY: Float64Array,
//	                     n, threshold: number | null, corrected: boolean,
//	                     label: string}] (in-mask z histogram, null density
//	                     N·w·φ(z), threshold line),
//	             motion?: {fd: Float64Array (mm per volume), meanFD, maxFD}
//	             (realigned runs only),
//	             partial: boolean (true for rethreshold: only the summary,
//	             hist and the thresholded maps; dims, affine, mask, design,
//	             files and motion are absent).
//	             timing: {name: ms} (the worker's step times, for benchmarks).
//	result of series: series: {ijk, time, observed, fitted: Float64Array, rho}.
//	result of export: name: string, type: string (MIME), bytes: Uint8Array.
//	result of gunzip: bytes: number (decompressed), ms: number.
//	result of group (a shard): shard: Uint8Array (for groupMerge).
//	result of group or groupMerge: mode: "group", and the fields of a fit's
//	             result (maps: the mean of the input maps as kind "mean",
//	             z, stat and thresholded per contrast; no truth, motion,
//	             files), plus nullHist: [{contrast, label, edges, counts:
//	             Float64Array, n, threshold: number | null, observed,
//	             exceed}] (the permutation null of the maximum; absent under
//	             parametric methods).
//	             Group and shard results carry timing: stage start times,
//	             ms, and the worker's Go memory, MB.
//	nullCheck    (in every full result) {sentence, warning: string} or null:
//	             the summary's null_check in words and, when its interval's
//	             lower bound is above alpha, the warning ("" otherwise).
//	error        message: string, one line, the text of the Go error.
//
// Typed arrays in a result are transferred, not copied.
//
// Port messages (reader worker <-> fit worker, on the MessagePort of
// inflate and boldPort; plain objects without v, id or kind)
//
//	reader -> fit  chunk: Uint8Array (the next decompressed bytes, at most
//	               1 MiB, its buffer transferred); end: true, bytes: number,
//	               sha256: string (the compressed file's size and hash, after
//	               the last chunk); or error: string (one line; the fit ends
//	               with it).
//	fit -> reader  credit: true (one chunk consumed: the reader keeps at most
//	               8 chunks unanswered); close: true (the fit stopped reading,
//	               for an error or a cancel: the reader's job ends).

// ProtocolVersion is the v field of every message.
const ProtocolVersion = 1

// Message kinds.
const (
	KindAnalyze     = "analyze"
	KindDemo        = "demo"
	KindRethreshold = "rethreshold"
	KindCancel      = "cancel"
	KindSeries      = "series"
	KindExport      = "export"
	KindGunzip      = "gunzip"
	KindInflate     = "inflate"
	KindGroup       = "group"
	KindGroupMerge  = "groupMerge"
	KindReady       = "ready"
	KindProgress    = "progress"
	KindResult      = "result"
	KindError       = "error"
)

// chunkBytes is how much of a Blob one FileReaderSync call reads.
const chunkBytes = 4 << 20

// The pipe of the parallel read (port messages): decompressed bytes go in
// chunks of pipeChunk bytes, at most pipeWindow of them unanswered.
const (
	pipeChunk  = 1 << 20
	pipeWindow = 8
)

// requestKinds are the kinds a page may send, for the error on an unknown one.
var requestKinds = []string{KindAnalyze, KindDemo, KindRethreshold, KindSeries, KindExport, KindGunzip, KindInflate, KindGroup, KindGroupMerge, KindCancel}
