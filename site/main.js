// The page: state, file inputs, settings, the worker connection and the
// automation entry window.winnow. Views draw from plain data (views/*.js);
// the worker does all the work (worker.js, wasm/). No maths here.

import { Kind, METHODS, message } from "./protocol.js";
import * as slices from "./views/slices.js";
import * as clusterView from "./views/clusters.js";
import * as designView from "./views/design.js";
import * as legendView from "./views/legend.js";
import * as histView from "./views/histogram.js";
import * as seriesView from "./views/series.js";
import * as hrfView from "./views/hrf.js";
import * as motionView from "./views/motion.js";
import * as nullView from "./views/nulldist.js";

const $ = (id) => document.getElementById(id);

// ---- worker ---------------------------------------------------------------

let worker = null;
let nextId = 1;
const pending = new Map(); // id -> {resolve, reject, progress}
let markReady, failReady;
const ready = new Promise((res, rej) => {
  markReady = res;
  failReady = rej;
});
let isReady = false;

// Offline single-file page: the worker source and the gzip-compressed wasm
// are inert blocks in the page; otherwise both are files next to the page.
const workerSrc = document.getElementById("winnow-worker-src");
const wasmGz = document.getElementById("winnow-wasm-gz");

async function inflateWasm() {
  const b64 = wasmGz.textContent.trim();
  const bin = atob(b64);
  const gz = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) gz[i] = bin.charCodeAt(i);
  const stream = new Blob([gz]).stream().pipeThrough(new DecompressionStream("gzip"));
  return new Response(stream).arrayBuffer();
}

// newBootedWorker starts a worker and sends it the WebAssembly program: the
// embedded copy in the offline file, else winnow.wasm next to the page.
// onFail gets an Error when the embedded copy cannot be inflated.
function newBootedWorker(onFail) {
  let w;
  if (workerSrc) {
    w = new Worker(URL.createObjectURL(new Blob([workerSrc.textContent], { type: "text/javascript" })));
    inflateWasm().then((buf) => w.postMessage({ kind: Kind.boot, wasm: buf }, [buf]), onFail);
  } else {
    w = new Worker("worker.js");
    w.postMessage({ kind: Kind.boot, url: new URL("winnow.wasm", location.href).href });
  }
  return w;
}

function startWorker() {
  worker = newBootedWorker((err) => bootFailed("inflating the embedded WebAssembly: " + err.message));
  worker.onmessage = (e) => onWorkerMessage(e.data);
  worker.onerror = (e) => {
    e.preventDefault();
    bootFailed("the worker failed: " + (e.message || "unknown error"));
  };
}

function bootFailed(text) {
  showError(text);
  setState("error");
  if (!isReady) failReady(new Error(text));
  for (const [id, p] of pending) {
    pending.delete(id);
    p.reject(new Error(text));
  }
}

function onWorkerMessage(msg) {
  if (!msg || msg.v !== 1) return;
  if (msg.kind === Kind.ready) {
    isReady = true;
    hrf = msg.hrf || null;
    markReady({ version: msg.version });
    if (!busy) {
      setBusy(false); // refresh the buttons, also after a restart
      setState("ready");
      setStatus(restarted ? "Canceled (the worker was restarted)." : `Ready (winnow ${msg.version}). Nothing leaves this tab.`);
    }
    restarted = false;
    return;
  }
  const p = pending.get(msg.id);
  if (!p) {
    if (msg.kind === Kind.error) bootFailed(msg.message);
    return;
  }
  switch (msg.kind) {
    case Kind.progress:
      if (p.progress) p.progress(msg);
      break;
    case Kind.result:
      pending.delete(msg.id);
      p.resolve(msg);
      break;
    case Kind.error:
      pending.delete(msg.id);
      p.reject(new Error(msg.message));
      break;
  }
}

// request sends one message and resolves with its result message. A fit
// (the default) becomes the request the Cancel button ends; side requests
// (series, export) do not.
function request(kind, fields, progress, side = false, transfer = []) {
  const id = nextId++;
  const p = new Promise((resolve, reject) => {
    pending.set(id, { resolve, reject, progress });
    worker.postMessage(message(id, kind, fields), transfer);
  });
  if (!side) current = id;
  p.id = id;
  return p;
}

let current = 0; // id of the running fit, for cancel
let restarted = false; // the worker was restarted to end a fit

// cancel asks the worker to stop the running fit. A fit that does not stop
// within five seconds (inside a long step that does not look at its
// context, such as generating the demo) is ended by restarting the worker,
// so the page never hangs.
function cancel() {
  const id = current;
  const p = pending.get(id);
  if (!p) {
    if (busy) cancelWanted = true; // an analyze not sent yet (analyzeRequest)
    return;
  }
  // A parallel read's reader worker ends when the fit worker closes the
  // pipe (or, after a restart, when analyzeRequest cleans up).
  worker.postMessage(message(nextId++, Kind.cancel, { target: id }));
  stopHelpers(); // shards in helper workers end with them
  setTimeout(() => {
    if (!pending.has(id)) return;
    pending.delete(id);
    worker.terminate();
    isReady = false;
    restarted = true;
    p.reject(new Error("canceled"));
    startWorker();
  }, 5000);
}

// ---- parallel read of a run: a second worker inflates ---------------------

// reader is a second worker that, during analyze, slices the run's Blob,
// hashes it and inflates it, and posts the decompressed bytes over a
// MessageChannel straight to the fit worker (protocol.js: inflate,
// boldPort), so decoding and accumulating overlap inflating. Started once
// the main worker is ready, where the browser reports two or more logical
// processors; with one, the fit worker reads the run itself.
let reader = null; // {worker, ready: Promise}
let readerJob = 0; // id of the running inflate request
let cancelWanted = false; // Cancel was pressed before the analyze request went out

function fitWorkers() {
  return (navigator.hardwareConcurrency || 1) >= 2 ? 2 : 1;
}

function startReader() {
  let ok, fail;
  const r = { ready: new Promise((a, b) => { ok = a; fail = b; }), isReady: false };
  r.ready.then(() => { r.isReady = true; }, () => {});
  const w = newBootedWorker(fail);
  w.onmessage = (e) => {
    const msg = e.data;
    if (!msg || msg.v !== 1) return;
    if (msg.kind === Kind.ready) return ok();
    const p = pending.get(msg.id);
    if (!p) {
      if (msg.id === 0 && msg.kind === Kind.error) fail(new Error(msg.message));
      return;
    }
    if (msg.kind === Kind.result || msg.kind === Kind.error) {
      pending.delete(msg.id);
      if (msg.kind === Kind.result) p.resolve(msg);
      else p.reject(new Error(msg.message));
    }
  };
  w.onerror = (e) => {
    e.preventDefault();
    fail(new Error("the reader worker failed: " + (e.message || "unknown error")));
    if (reader === r) reader = null;
  };
  r.worker = w;
  reader = r;
  return r;
}

// gzipBlob reports whether a Blob starts with the gzip magic bytes 1f 8b
// (RFC 1952) and is long enough to hold a gzip stream.
async function gzipBlob(b) {
  if (b.size < 18) return false;
  const m = new Uint8Array(await b.slice(0, 2).arrayBuffer());
  return m[0] === 0x1f && m[1] === 0x8b;
}

// analyzeRequest sends an analyze request; with workers = 2 and a gzip
// run it goes the parallel way, else to the fit worker alone. By default a
// reader worker still booting is not waited for (the fit starts at once in
// one worker); asked for explicitly (wait), it is. It resolves with the
// result message and the number of workers used.
async function analyzeRequest(fields, workers, wait) {
  cancelWanted = false;
  const parallel = workers >= 2 && fields.inflate !== "wasm" && typeof DecompressionStream === "function" &&
    typeof MessageChannel === "function" && (await gzipBlob(fields.bold));
  let r = null;
  if (parallel) {
    r = reader || startReader();
    if (!r.isReady && !wait) r = null;
    try {
      if (r) await r.ready;
    } catch (err) {
      r = null; // no second worker: the fit worker reads the run itself
    }
  }
  if (cancelWanted) throw new Error("canceled");
  if (!r) return { msg: await request(Kind.analyze, fields, onProgress), workers: 1 };
  const ch = new MessageChannel();
  const rid = nextId++;
  const inflated = new Promise((resolve, reject) => pending.set(rid, { resolve, reject }));
  inflated.catch(() => {}); // a failure reaches the fit through the port
  readerJob = rid;
  r.worker.postMessage(message(rid, Kind.inflate, { blob: fields.bold, port: ch.port1 }), [ch.port1]);
  try {
    return { msg: await request(Kind.analyze, { ...fields, boldPort: ch.port2 }, onProgress, false, [ch.port2]), workers: 2 };
  } finally {
    cancelReaderJob();
  }
}

// cancelReaderJob ends the reader's running inflate, if any.
function cancelReaderJob() {
  const id = readerJob;
  readerJob = 0;
  if (id && pending.has(id) && reader) reader.worker.postMessage(message(nextId++, Kind.cancel, { target: id }));
}

// ---- group mode: shards over more workers -----------------------------------

// helpers are extra workers for the shards of a group run, started on first
// use; shard 1 runs in the main worker, which also merges. The reader
// worker, booted and idle between fits, runs shard 2 when it is ready
// (lentReader), so a two-worker run boots no new worker (about 37 MB of
// the tab's memory each in Chromium).
const helpers = []; // {worker, ready: Promise}
let lentReader = null; // the reader, while it runs a group shard

function startHelper() {
  let ok, fail;
  const h = { ready: new Promise((a, b) => { ok = a; fail = b; }) };
  const w = newBootedWorker(fail);
  w.onmessage = (e) => {
    const msg = e.data;
    if (!msg || msg.v !== 1) return;
    if (msg.kind === Kind.ready) return ok();
    if (msg.id === 0 && msg.kind === Kind.error) return fail(new Error(msg.message));
    onWorkerMessage(msg);
  };
  w.onerror = (e) => {
    e.preventDefault();
    fail(new Error("a helper worker failed: " + (e.message || "unknown error")));
  };
  h.worker = w;
  helpers.push(h);
  return h;
}

// stopHelpers ends the helpers, and the reader if it ran a shard: a
// worker's WebAssembly memory never shrinks, so ending it is how its memory
// returns. A fresh reader is started after the run (restoreReader).
function stopHelpers() {
  while (helpers.length) helpers.pop().worker.terminate();
  if (lentReader) {
    lentReader.worker.terminate();
    if (reader === lentReader) reader = null;
    lentReader = null;
  }
}

// requestOn sends one side request to a given worker.
function requestOn(w, kind, fields, progress) {
  const id = nextId++;
  return new Promise((resolve, reject) => {
    pending.set(id, { resolve, reject, progress });
    w.postMessage(message(id, kind, fields));
  });
}

// groupWorkers is how many workers a group run uses by default: the
// browser's logical processors, at most 4.
function groupWorkers() {
  return Math.max(1, Math.min(4, navigator.hardwareConcurrency || 1));
}

const groupFiles = { maps: [], design: null, background: null };

// numField reads a number input; blank means 0 (the option's default).
function numField(id) {
  const v = $(id).value.trim();
  return v === "" ? 0 : Number(v);
}

function groupSettingsFromForm() {
  return {
    contrasts: $("g-contrasts").value.split("\n").map((x) => x.trim()).filter(Boolean),
    correct: $("g-correct").value,
    perms: numField("g-perms"),
    seed: $("g-seed").value.trim() === "" ? undefined : numField("g-seed"),
    alpha: numField("g-alpha"),
    clusterP: numField("g-cluster-p"),
  };
}

// runGroup runs a group analysis over n workers (shard k of n in each, then
// the merge in the main worker; n = 1: one plain run) and shows the result.
async function runGroup(fields, n) {
  await ready;
  if (busy) throw new Error("an analysis is already running");
  n = Math.max(1, Math.min(8, Math.floor(n || groupWorkers())));
  stopSeries();
  showError("");
  setBusy(true);
  setState("running");
  setStatus(fields.demo ? "Generating and analysing the group demo\u2026" : "Running the group analysis\u2026");
  const t0 = performance.now();
  const parametric = !["fwe-perm", "cluster-perm", "tfce"].includes(fields.correct || "fwe-perm");
  if (parametric) n = 1; // no permutations to share
  // steps: when each step ended, ms from the call, and the workers' own
  // stage times (for the benchmark harness).
  const steps = { workers: [] };
  timings.groupSteps = steps;
  try {
    let msg;
    if (n === 1) {
      msg = await request(Kind.group, fields, onProgress);
    } else {
      const shardWorkers = [];
      if (reader && reader.isReady && !readerJob) {
        lentReader = reader;
        shardWorkers.push(reader.worker);
      }
      const more = n - 1 - shardWorkers.length;
      while (helpers.length < more) startHelper();
      await Promise.all(helpers.slice(0, more).map((h) => h.ready));
      shardWorkers.push(...helpers.slice(0, more).map((h) => h.worker));
      steps.helpersReady = performance.now() - t0;
      steps.lentReader = lentReader !== null;
      const first = request(Kind.group, { ...fields, shard: 1, shards: n }, onProgress);
      const rest = shardWorkers.map((w, i) => requestOn(w, Kind.group, { ...fields, shard: i + 2, shards: n }));
      const parts = await Promise.all([first, ...rest]);
      // The helpers' work is done: ending them returns their memory (a
      // worker's WebAssembly memory never shrinks); the next run starts
      // them again.
      stopHelpers();
      steps.shards = performance.now() - t0;
      steps.workers = parts.map((p) => p.timing || null);
      setStatus("Merging the shards\u2026");
      msg = await request(Kind.groupMerge, { ...fields, shards: parts.map((p) => p.shard) }, onProgress);
    }
    steps.result = performance.now() - t0;
    steps.worker = msg.timing || null;
    result = {
      summary: JSON.parse(msg.summary),
      dims: msg.dims, voxelMM: msg.voxelMM, affine: msg.affine,
      maps: msg.maps, mask: msg.mask, design: msg.design || null, truth: null,
      hist: msg.hist, motion: null, files: [], mode: "group",
      nullCheck: msg.nullCheck || null, nullHist: msg.nullHist || [], nullCheckMade: null,
    };
    series = null;
    view = { contrast: 0, cursor: startCursor(), selected: -1, geom: null };
    const c0 = result.summary.contrasts[0];
    if (c0 && c0.clusters.length > 0) {
      view.cursor = c0.clusters[0].peak_ijk.slice();
      view.selected = 0;
    }
    await showResult();
    showGroupSettings();
    const ms = performance.now() - t0;
    steps.shown = ms;
    timings.groupMs = ms;
    timings.groupWorkers = n;
    setStatus(`Done in ${(ms / 1000).toFixed(1)} s on ${n} worker${n > 1 ? "s" : ""}.`);
    setState("done");
    return result.summary;
  } catch (err) {
    const canceled = err.message === "canceled";
    showError(canceled ? "" : err.message);
    setStatus(canceled ? "Canceled." : "The analysis stopped with an error.");
    setState(!isReady ? "booting" : canceled ? "ready" : "error");
    throw err;
  } finally {
    stopHelpers(); // after an error or a cancel; nothing after a complete run
    restoreReader();
    setBusy(false);
  }
}

// restoreReader starts a fresh, idle reader worker when a group run has
// ended the one it borrowed.
function restoreReader() {
  if (!reader && isReady && fitWorkers() >= 2) startReader();
}

// group runs a group analysis from script: {demo: true} or {maps: [Blob],
// design?: Blob | string, mask?: Blob, contrasts, correct, perms, seed,
// alpha, clusterP, workers}; it resolves with the summary once the views
// show it.
function group(opts = {}) {
  const fields = {
    demo: !!opts.demo, contrasts: Array.isArray(opts.contrasts) ? opts.contrasts : [],
    correct: opts.correct || "fwe-perm", perms: opts.perms, seed: opts.seed, alpha: opts.alpha,
    clusterP: opts.clusterP ?? opts.cluster_p,
  };
  if (!fields.demo) {
    if (!Array.isArray(opts.maps) || opts.maps.length < 2 || !opts.maps.every((m) => m instanceof Blob)) {
      return Promise.reject(new Error("group: maps must be two or more Files or Blobs"));
    }
    fields.maps = opts.maps;
    fields.mapNames = opts.maps.map((m, i) => (m.name ? m.name : `map-${String(i + 1).padStart(2, "0")}.nii.gz`));
    if (opts.design !== undefined && opts.design !== null) {
      fields.design = opts.design;
      fields.designName = opts.design.name || "design.tsv";
    }
    if (opts.mask) {
      fields.mask = opts.mask;
      fields.maskName = opts.mask.name || "mask.nii.gz";
    }
  }
  if (opts.background) {
    fields.background = opts.background;
    fields.backgroundName = opts.background.name || "background.nii.gz";
  }
  return runGroup(fields, opts.workers);
}

// showGroupSettings puts the shown group result's inference settings into
// the group form, so that changing one of them starts from what is shown.
function showGroupSettings() {
  setMode("group"); // a group run started from script shows the group form beside its result
  const c = result.summary.contrasts[0];
  if (!c) return;
  $("g-correct").value = c.correction;
  $("g-alpha").value = String(c.alpha);
  if (c.cluster_p) $("g-cluster-p").value = String(c.cluster_p);
}

// applyPartial puts a re-threshold's reply into the shown result: the
// summary, the histograms, the null check and the maps the settings change
// (each replacing the map of its contrast and kind).
function applyPartial(msg) {
  result.summary = JSON.parse(msg.summary);
  result.hist = msg.hist;
  result.nullCheck = msg.nullCheck || null;
  for (const m of msg.maps) {
    const i = result.maps.findIndex((x) => x.contrast === m.contrast && x.kind === m.kind);
    if (i >= 0) result.maps[i] = m;
    else result.maps.push(m);
  }
}

// groupRethreshold infers the shown group result again under {correct,
// alpha, clusterP} without running the permutations again: the parametric
// methods at any settings, fwe-perm and tfce at a new alpha from the
// recorded null maxima. What needs a new run (cluster-perm at another
// cluster-forming p, a method whose maxima the run did not record) is
// refused with the worker's message saying so. Resolves with {ms, workerMs,
// go, summary}, ms from the request to the redrawn views.
async function groupRethreshold(fields) {
  if (!result || result.mode !== "group") throw new Error("no group result to rethreshold yet");
  if (busy) throw new Error("an analysis is already running");
  const t0 = performance.now();
  showError("");
  setBusy(true);
  try {
    const msg = await request(Kind.group, { rethreshold: true, correct: fields.correct, alpha: fields.alpha, clusterP: fields.clusterP }, onProgress);
    applyPartial(msg);
    result.nullHist = msg.nullHist || [];
    view.selected = -1;
    const tReply = performance.now();
    const drawn = await showResult(true);
    showGroupSettings();
    const ms = drawn - t0;
    timings.groupRethresholdMs = ms;
    const c = result.summary.contrasts[0];
    setStatus(`Re-thresholded with ${c.correction} at alpha ${c.alpha}, without new permutations, in ${Math.round(ms)} ms.`);
    setState("done");
    return { ms, workerMs: tReply - t0, go: msg.timing || null, summary: result.summary };
  } catch (err) {
    showError(err.message);
    throw err;
  } finally {
    setBusy(false);
  }
}

function setMode(mode) {
  const g = mode === "group";
  $("mode-run").setAttribute("aria-selected", String(!g));
  $("mode-group").setAttribute("aria-selected", String(g));
  $("settings").hidden = g;
  $("group-settings").hidden = !g;
}

function wireGroup() {
  $("mode-run").addEventListener("click", () => setMode("run"));
  $("mode-group").addEventListener("click", () => setMode("group"));
  $("g-workers-note").textContent = `Permutations are shared over ${groupWorkers()} worker${groupWorkers() > 1 ? "s" : ""} in this tab.`;
  const setMaps = (list) => {
    groupFiles.maps = Array.from(list).sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    const box = document.querySelector('.drop[data-role="gmaps"]');
    box.classList.toggle("chosen", groupFiles.maps.length > 0);
    const total = groupFiles.maps.reduce((a, f) => a + f.size, 0);
    $("gmaps-name").textContent = groupFiles.maps.length ? `${groupFiles.maps.length} maps (${formatBytes(total)})` : "none chosen";
  };
  const setDesign = (f) => {
    groupFiles.design = f;
    document.querySelector('.drop[data-role="gdesign"]').classList.toggle("chosen", !!f);
    $("gdesign-name").textContent = f ? `${f.name} (${formatBytes(f.size)})` : "none chosen";
  };
  $("gmaps-file").addEventListener("change", (e) => setMaps(e.target.files));
  const setBackground = (f) => {
    groupFiles.background = f;
    document.querySelector('.drop[data-role="gbg"]').classList.toggle("chosen", !!f);
    $("gbg-name").textContent = f ? `${f.name} (${formatBytes(f.size)})` : "none chosen";
  };
  $("gdesign-file").addEventListener("change", (e) => setDesign(e.target.files[0] || null));
  $("gbg-file").addEventListener("change", (e) => setBackground(e.target.files[0] || null));
  for (const [role, set] of [["gmaps", (fl) => setMaps(fl)], ["gdesign", (fl) => setDesign(fl[0] || null)], ["gbg", (fl) => setBackground(fl[0] || null)]]) {
    const box = document.querySelector(`.drop[data-role="${role}"]`);
    box.addEventListener("dragover", (e) => {
      e.preventDefault();
      box.classList.add("over");
    });
    box.addEventListener("dragleave", () => box.classList.remove("over"));
    box.addEventListener("drop", (e) => {
      e.preventDefault();
      box.classList.remove("over");
      if (e.dataTransfer.files.length) set(e.dataTransfer.files);
    });
  }
  $("group-settings").addEventListener("submit", (e) => {
    e.preventDefault();
    if (groupFiles.maps.length < 2) {
      showError("Choose two or more subjects' effect maps first.");
      return;
    }
    group({ ...groupSettingsFromForm(), maps: groupFiles.maps, design: groupFiles.design || undefined, background: groupFiles.background || undefined }).catch(() => {});
  });
  $("g-demo").addEventListener("click", () => {
    group({ ...groupSettingsFromForm(), demo: true, background: groupFiles.background || undefined }).catch(() => {});
  });
  // The inference settings re-infer a shown group result at once (the
  // relabellings, seed and contrasts need a new run).
  for (const id of ["g-correct", "g-alpha", "g-cluster-p"]) {
    $(id).addEventListener("change", () => {
      if (!result || result.mode !== "group" || busy) return;
      const s = groupSettingsFromForm();
      groupRethreshold({ correct: s.correct, alpha: s.alpha, clusterP: s.clusterP }).catch(() => {});
    });
  }
}

// ---- page state -----------------------------------------------------------

const files = { bold: null, events: null, confounds: null, mask: null };
let result = null; // {summary, dims, voxelMM, affine, maps, mask, design, truth}
let view = { contrast: 0, cursor: [0, 0, 0], selected: -1, geom: null };
let busy = false;
let hrf = null; // {t, h}: the response model, sent once by the worker
let series = null; // the series on screen: {ijk, time, observed, fitted, rho}
let seriesReq = null; // the running series request, for cancel
// timings of the last fit and rethreshold, ms, for the benchmark harness.
// rethresholdMs runs from the request to the views redrawn (canvas calls
// done); rethresholdWorkerMs to the worker's reply; rethresholdPaintedMs to
// the second animation frame after the redraw.
const timings = { fitMs: null, fitWorkers: null, rethresholdMs: null, rethresholdWorkerMs: null, rethresholdPaintedMs: null, kind: null };

function setState(s) {
  document.body.dataset.state = s;
}
function setStatus(text) {
  $("status").textContent = text;
}
function showError(text) {
  const el = $("error");
  el.textContent = text;
  el.hidden = !text;
}

function setBusy(on) {
  busy = on;
  $("run").disabled = on || !isReady;
  $("demo").disabled = on || !isReady;
  $("g-run").disabled = on || !isReady;
  $("g-demo").disabled = on || !isReady;
  $("rethreshold").disabled = on || !result || result.mode === "group";
  $("progress").hidden = !on;
  if (on) {
    $("progress-fill").style.width = "0%";
    $("progress-text").textContent = "starting";
  }
}

function onProgress(msg) {
  const f = msg.total > 0 ? Math.min(1, msg.done / msg.total) : 0;
  $("progress-fill").style.width = `${(100 * f).toFixed(1)}%`;
  $("progress-text").textContent = msg.total > 1 ? `${msg.stage}: ${msg.done} of ${msg.total}` : msg.stage;
}

function settingsFromForm() {
  return {
    contrasts: $("contrasts").value.split("\n").map((s) => s.trim()).filter(Boolean),
    correct: $("correct").value,
    alpha: numField("alpha"),
    clusterP: numField("cluster-p"),
    smooth: numField("smooth"),
    highpass: $("highpass").value.trim() === "" ? 128 : numField("highpass"),
    noise: $("noise").value,
    tr: numField("tr"),
    realign: $("realign").checked,
    nullCheck: $("null-check").checked,
  };
}

// run sends a fit (analyze or demo) and shows its result; it resolves with
// the summary once the views have drawn.
async function run(kind, fields, workers = 1, wait = false) {
  await ready;
  if (busy) throw new Error("an analysis is already running");
  stopSeries();
  showError("");
  setBusy(true);
  setState("running");
  setStatus(kind === Kind.demo ? "Generating and fitting the demo run\u2026" : "Fitting\u2026");
  const t0 = performance.now();
  try {
    let msg;
    if (kind === Kind.analyze) {
      const r = await analyzeRequest(fields, workers, wait);
      msg = r.msg;
      timings.fitWorkers = r.workers;
    } else {
      msg = await request(kind, fields, onProgress);
      timings.fitWorkers = 1;
    }
    result = {
      summary: JSON.parse(msg.summary),
      dims: msg.dims, voxelMM: msg.voxelMM, affine: msg.affine,
      maps: msg.maps, mask: msg.mask, design: msg.design, truth: msg.truth || null,
      hist: msg.hist, motion: msg.motion || null, files: msg.files || [],
      mode: "run", nullCheck: msg.nullCheck || null, nullHist: null,
    };
    // The settings the null check was made with, to say so after a rethreshold.
    const f0 = result.summary.contrasts[0];
    result.nullCheckMade = fields.nullCheck && f0 ? { correction: f0.correction, alpha: f0.alpha } : null;
    series = null;
    revokeExports();
    view = { contrast: 0, cursor: startCursor(), selected: -1, geom: null };
    const c0 = result.summary.contrasts[0];
    if (c0 && c0.clusters.length > 0) {
      view.cursor = c0.clusters[0].peak_ijk.slice();
      view.selected = 0;
    }
    if (kind === Kind.demo && c0) $("contrasts").value = c0.spec || "";
    await showResult();
    const ms = performance.now() - t0;
    timings.fitMs = ms;
    timings.kind = kind;
    setStatus(`Done in ${(ms / 1000).toFixed(1)} s.`);
    setState("done");
    setTimeout(requestSeries, 0); // once the finally below has cleared busy
    return result.summary;
  } catch (err) {
    const canceled = err.message === "canceled";
    showError(canceled ? "" : err.message);
    setStatus(canceled ? "Canceled." : "The analysis stopped with an error.");
    setState(!isReady ? "booting" : canceled ? "ready" : "error");
    throw err;
  } finally {
    setBusy(false);
  }
}

async function rethreshold(fields) {
  if (!result) throw new Error("no result to rethreshold yet");
  if (busy) throw new Error("an analysis is already running");
  const t0 = performance.now();
  stopSeries();
  showError("");
  // Busy without the progress bar: a re-threshold takes a frame or two, and
  // showing the bar would only make the page lay out and paint meanwhile.
  busy = true;
  try {
    const msg = await request(Kind.rethreshold, fields, onProgress);
    applyPartial(msg);
    view.selected = -1;
    const tReply = performance.now();
    const drawn = await showResult(true);
    const ms = drawn - t0;
    timings.rethresholdMs = ms;
    timings.rethresholdWorkerMs = tReply - t0;
    timings.rethresholdPaintedMs = performance.now() - t0;
    setState("done");
    setTimeout(requestSeries, 0); // the series may have been stopped above
    timings.rethresholdGo = msg.timing || null;
    return { ms, workerMs: tReply - t0, paintedMs: performance.now() - t0, go: msg.timing || null, summary: result.summary };
  } catch (err) {
    showError(err.message);
    throw err;
  } finally {
    setBusy(false);
  }
}

function startCursor() {
  return result.dims.map((n) => Math.floor(n / 2));
}

function mapOf(contrast, kind) {
  const m = result.maps.find((x) => x.contrast === contrast && x.kind === kind);
  return m ? m.data : null;
}

// ---- drawing --------------------------------------------------------------

let overlay = null; // z where the thresholded map survives, 0 elsewhere
let bgRange = null;

function prepareOverlay() {
  const z = mapOf(view.contrast, "z");
  const th = mapOf(view.contrast, "thresholded");
  const n = z ? z.length : 0;
  if (!overlay || overlay.length !== n) overlay = new Float32Array(n);
  else overlay.fill(0);
  let lo = Infinity, hi = 0, pos = false, neg = false;
  if (z && th) {
    for (let i = 0; i < z.length; i++) {
      if (th[i] !== 0 && Number.isFinite(z[i]) && z[i] !== 0) {
        overlay[i] = z[i];
        const a = Math.abs(z[i]);
        if (a < lo) lo = a;
        if (a > hi) hi = a;
        if (z[i] > 0) pos = true;
        else neg = true;
      }
    }
  }
  if (!(hi > 0)) lo = hi = 0;
  return { lo, hi: hi > lo ? hi : lo + 1e-6, any: hi > 0, pos, neg };
}

function sizeCanvas(c) {
  const dpr = window.devicePixelRatio || 1;
  const w = Math.max(1, Math.round(c.clientWidth * dpr));
  const h = Math.max(1, Math.round(c.clientHeight * dpr));
  if (c.width !== w) c.width = w;
  if (c.height !== h) c.height = h;
  return dpr;
}

let ov = null;

function drawSlices() {
  paintSlices();
  showReadout();
}

function paintSlices() {
  const c = $("slices");
  const dpr = sizeCanvas(c);
  view.geom = slices.render(
    c,
    {
      dims: result.dims, voxelMM: result.voxelMM, affine: result.affine,
      background: mapOf(-1, "mean"), overlay, outline: $("show-truth").checked ? result.truth : null, cursor: view.cursor,
    },
    { bgRange, overlayRange: [ov.lo, ov.hi], dpr },
  );
}

// showReadout writes the cursor's position and values under the slices.
function showReadout() {
  const [i, j, k] = view.cursor;
  const idx = i + result.dims[0] * (j + result.dims[1] * k);
  const w = slices.world(result.affine, view.cursor);
  const z = mapOf(view.contrast, "z");
  const stat = mapOf(view.contrast, "stat");
  const con = result.summary.contrasts[view.contrast];
  const inMask = result.mask[idx] === 1;
  $("readout").textContent =
    `ijk ${i}, ${j}, ${k}  \u00b7  ${w.map((v) => v.toFixed(1)).join(", ")} mm  \u00b7  ` +
    (inMask ? `z ${z[idx].toFixed(2)}  ${con.kind} ${stat[idx].toFixed(2)}` : "outside the mask");
}

// drawAll draws every view; partial (after a rethreshold) only those that
// depend on the threshold.
function drawAll(partial = false) {
  ov = prepareOverlay();
  drawSlices();
  drawLegend();
  showClusters();
  drawHistogram();
  drawNull();
  if (partial) return;
  const group = result.mode === "group";
  $("series-box").hidden = group;
  $("hrf").hidden = group;
  // Files the worker encodes come from its last fit; a group result offers
  // its summary and pictures.
  for (const el of document.querySelectorAll(".run-only")) el.hidden = group;
  for (const el of document.querySelectorAll(".group-only")) el.hidden = !group;
  if (result.design) {
    const dc = $("design");
    designView.render(dc, result.design, { dpr: sizeCanvas(dc), rowLabel: group ? "map" : "scan" });
  }
  if (!group) drawSeries();
  if (hrf && !group) {
    const hc = $("hrf");
    hrfView.render(hc, hrf, { dpr: sizeCanvas(hc) });
  }
  $("motion-box").hidden = !result.motion;
  $("export-motion").hidden = !result.motion;
  if (result.motion) {
    const mc = $("motion");
    motionView.render(mc, result.motion, { dpr: sizeCanvas(mc) });
  }
}

function drawLegend() {
  const lc = $("legend");
  const dpr = sizeCanvas(lc);
  legendView.render(lc, ov.any ? { lo: ov.lo, hi: ov.hi, label: "z", positive: ov.pos, negative: ov.neg } : null, { dpr });
}

function showClusters() {
  const con = result.summary.contrasts[view.contrast];
  clusterView.render($("clusters"), { clusters: con.clusters, kind: con.kind, correction: con.correction }, {
    selected: view.selected,
    onSelect: (i) => {
      view.selected = i;
      view.cursor = con.clusters[i].peak_ijk.slice();
      drawAll();
      requestSeries();
    },
  });
}

function drawHistogram() {
  const h = (result.hist || []).find((x) => x.contrast === view.contrast);
  const c = $("histogram");
  const dpr = sizeCanvas(c);
  if (h) histView.render(c, h, { dpr, log: $("hist-log").checked });
}

function drawNull() {
  const h = (result.nullHist || []).find((x) => x.contrast === view.contrast);
  $("null-box").hidden = !h;
  if (!h) return;
  const c = $("nulldist");
  const con = result.summary.contrasts[view.contrast];
  nullView.render(c, h, { dpr: sizeCanvas(c), alpha: con ? con.alpha : null });
}

// showNullCheck shows the null check in words, from the worker's sentence:
// highlighted when its warning applies, and a note when the settings on
// screen are not those it was made with.
function showNullCheck() {
  const el = $("nullcheck");
  const nc = result.nullCheck;
  el.classList.remove("alert", "stale");
  if (nc) {
    const text = nc.sentence + ".";
    el.textContent = (result.mode === "group" ? "Null check (first contrast): " : "Null check: ") + text;
    if (nc.warning) {
      const w = document.createElement("strong");
      w.textContent = "Warning \u2014 " + nc.warning + ".";
      el.appendChild(document.createElement("br"));
      el.appendChild(w);
    }
    if (nc.warning) el.classList.add("alert");
    el.hidden = false;
  } else if (result.nullCheckMade && result.summary.null_check === null) {
    const m = result.nullCheckMade;
    el.textContent = `Null check: it was made with ${m.correction} at alpha ${m.alpha}, not with the settings shown; fit again to check these settings.`;
    el.classList.add("stale");
    el.hidden = false;
  } else {
    el.hidden = true;
  }
}

function drawSeries() {
  const c = $("series");
  const dpr = sizeCanvas(c);
  const same = series && series.ijk.every((v, a) => v === view.cursor[a]);
  seriesView.render(c, same ? series : null, { dpr, note: $("series-state").textContent });
}

// requestSeries asks the worker for the series at the cursor, ending any
// earlier request first; a voxel outside the mask gets a note instead.
let seriesTimer = 0;

// stopSeries ends a pending or running series request, so that it does not
// share the worker's one thread with a fit or a rethreshold.
function stopSeries() {
  clearTimeout(seriesTimer);
  seriesTimer = 0;
  if (seriesReq) {
    worker.postMessage(message(nextId++, Kind.cancel, { target: seriesReq.id }));
    seriesReq = null;
    setSeriesState("", false);
  }
}

function requestSeries() {
  stopSeries();
  if (!result || busy || result.mode === "group") return;
  const [i, j, k] = view.cursor;
  if (series && series.ijk[0] === i && series.ijk[1] === j && series.ijk[2] === k) return;
  const idx = i + result.dims[0] * (j + result.dims[1] * k);
  if (result.mask[idx] !== 1) {
    setSeriesState("No time series outside the analysis mask.", false);
    drawSeries();
    return;
  }
  seriesTimer = setTimeout(() => {
    seriesTimer = 0;
    setSeriesState("reading time series…", true);
    drawSeries();
    const req = request(Kind.series, { ijk: [i, j, k] }, (m) => {
      setSeriesState(`reading time series… volume ${m.done} of ${m.total}`, true);
    }, true);
    seriesReq = req;
    req.then(
      (msg) => {
        if (seriesReq !== req) return;
        seriesReq = null;
        series = msg.series;
        setSeriesState(`Observed series and model fit at voxel ${series.ijk.join(", ")}.`, false);
        if (result) drawSeries();
      },
      (err) => {
        if (seriesReq !== req) return;
        seriesReq = null;
        setSeriesState(err.message === "canceled" ? "Canceled." : "Time series: " + err.message, false);
        if (result) drawSeries();
      },
    );
  }, 120);
}

function setSeriesState(text, running) {
  $("series-state").textContent = text;
  $("series-cancel").hidden = !running;
}

// ---- exports --------------------------------------------------------------

const exportURLs = [];
function revokeExports() {
  while (exportURLs.length) URL.revokeObjectURL(exportURLs.pop());
}

function canvasBlob(id) {
  return new Promise((resolve, reject) => {
    $(id).toBlob((b) => (b ? resolve(b) : reject(new Error(`${id}: the picture could not be made`))), "image/png");
  });
}

// exportFile makes one downloadable file and resolves with {name, url,
// size, type}; key is "summary", "clusters", "report", "design", "motion",
// "map:<file name>" or "png:<slices|series|histogram|design>".
async function exportFile(key) {
  if (!result) throw new Error("nothing to save yet: no result");
  let blob, name;
  if (key.startsWith("png:")) {
    const id = key.slice(4);
    if (!["slices", "series", "histogram", "design", "nulldist"].includes(id)) throw new Error(`unknown picture ${id}`);
    blob = await canvasBlob(id);
    name = ({ series: "timeseries", nulldist: "null-distribution" }[id] || id) + ".png";
  } else if (key === "summary") {
    blob = new Blob([JSON.stringify(result.summary, null, 2) + "\n"], { type: "application/json" });
    name = "summary.json";
  } else {
    if (result.mode === "group") throw new Error(`${key}: not available for a group result; save summary.json or a picture`);
    const fields = { what: key, index: -1 };
    if (key.startsWith("map:")) {
      const f = result.files.find((x) => x.file === key.slice(4));
      if (!f) throw new Error(`no map named ${key.slice(4)}`);
      fields.what = "map";
      fields.index = f.index;
    }
    const msg = await request(Kind.export, fields, null, true);
    blob = new Blob([msg.bytes], { type: msg.type });
    name = msg.name;
  }
  const url = URL.createObjectURL(blob);
  exportURLs.push(url);
  return { name, url, size: blob.size, type: blob.type };
}

async function saveExport(key) {
  $("export-state").textContent = "Preparing…";
  try {
    const f = await exportFile(key);
    const a = document.createElement("a");
    a.href = f.url;
    a.download = f.name;
    a.hidden = true;
    document.body.appendChild(a);
    a.click();
    a.remove();
    $("export-state").textContent = `${f.name} (${formatBytes(f.size)}) made here and handed to the browser's download.`;
  } catch (err) {
    $("export-state").textContent = "Could not save: " + err.message;
  }
}

function fillExportMaps() {
  const sel = $("export-map");
  sel.textContent = "";
  for (const f of result.files) {
    const o = document.createElement("option");
    o.value = f.file;
    o.textContent = f.file;
    sel.appendChild(o);
  }
}

function describe(s, con) {
  const parts = [];
  parts.push(`${s.mask_voxels} voxels in mask`);
  parts.push(`df ${s.df.toFixed(1)}`);
  if (s.fwhm_mm) parts.push(`smoothness ${s.fwhm_mm.map((v) => v.toFixed(1)).join(" \u00d7 ")} mm`);
  if (con) {
    parts.push(`${con.correction} at ${con.alpha}`);
    parts.push(con.z_threshold !== null ? `z \u2265 ${con.z_threshold.toFixed(2)}`
      : con.stat_threshold !== null ? `threshold ${con.stat_threshold.toFixed(2)}` : "no voxel can pass");
    parts.push(`${con.surviving_voxels} surviving voxels`);
  }
  return parts.join("  \u00b7  ");
}

// showResult fills the result panel (partial: only what a re-threshold
// changes) at once, and resolves with the time the drawing ended once the
// browser has painted it: after the next frame's callbacks and paint (a task
// queued from requestAnimationFrame runs after that frame's rendering).
async function showResult(partial = false) {
  if (partial) showInference();
  else fillResult();
  const drawn = performance.now();
  await new Promise((r) => requestAnimationFrame(() => setTimeout(r, 0)));
  return drawn;
}

// fillResult fills the whole result panel.
function fillResult() {
  $("empty-note").hidden = true;
  $("results").hidden = false;
  const s = result.summary;
  const pickEl = $("contrast-pick");
  pickEl.textContent = "";
  s.contrasts.forEach((c, i) => {
    const o = document.createElement("option");
    o.value = String(i);
    o.textContent = `${c.name} (${c.kind})`;
    pickEl.appendChild(o);
  });
  pickEl.value = String(view.contrast);
  showSettings();
  $("outline-note").hidden = !result.truth;
  showNullCheck();
  fillExportMaps();
  showWarnings();
  bgRange = slices.displayRange(mapOf(-1, "mean"), result.mask);
  drawAll();
}

// showInference shows a re-thresholded result: the canvases first, while
// the page's layout is still clean (reading their sizes forces none), then
// the text and the cluster table.
function showInference() {
  ov = prepareOverlay();
  paintSlices();
  drawLegend();
  drawHistogram();
  drawNull();
  showReadout();
  showClusters();
  showSettings();
  showNullCheck();
  showWarnings();
}

// showSettings shows the inference settings of the result on screen in the
// form's fields, and the result's facts.
function showSettings() {
  const s = result.summary;
  const shown = s.contrasts[view.contrast];
  if (shown && result.mode !== "group") {
    // Only changed values are set: setting a select restyles it.
    const set = (id, v) => {
      if ($(id).value !== v) $(id).value = v;
    };
    set("correct", shown.correction);
    set("alpha", String(shown.alpha));
    if (shown.cluster_p) set("cluster-p", String(shown.cluster_p));
  }
  $("facts").textContent = describe(s, shown);
}

let shownWarnings = null; // the warnings on screen, joined

function showWarnings() {
  const warnings = result.summary.warnings || [];
  const key = warnings.join("\n");
  if (key === shownWarnings) return;
  shownWarnings = key;
  $("warnings").textContent = "";
  for (const w of warnings) {
    const li = document.createElement("li");
    li.textContent = w;
    $("warnings").appendChild(li);
  }
  $("warnings-box").hidden = warnings.length === 0;
}

// ---- inputs ---------------------------------------------------------------

function setFile(role, file) {
  files[role] = file;
  const box = document.querySelector(`.drop[data-role="${role}"]`);
  box.classList.toggle("chosen", !!file);
  $(`${role}-name`).textContent = file ? `${file.name} (${formatBytes(file.size)})` : "none chosen";
}

function formatBytes(n) {
  if (n >= 1 << 20) return `${(n / (1 << 20)).toFixed(1)} MiB`;
  if (n >= 1 << 10) return `${(n / (1 << 10)).toFixed(0)} KiB`;
  return `${n} bytes`;
}

function wireInputs() {
  for (const role of Object.keys(files)) {
    const input = $(`${role}-file`);
    input.addEventListener("change", () => setFile(role, input.files[0] || null));
    const box = document.querySelector(`.drop[data-role="${role}"]`);
    box.addEventListener("dragover", (e) => {
      e.preventDefault();
      box.classList.add("over");
    });
    box.addEventListener("dragleave", () => box.classList.remove("over"));
    box.addEventListener("drop", (e) => {
      e.preventDefault();
      box.classList.remove("over");
      const f = e.dataTransfer.files[0];
      if (f) setFile(role, f);
    });
  }
  // A file dropped outside the boxes must not navigate away from the page.
  window.addEventListener("dragover", (e) => e.preventDefault());
  window.addEventListener("drop", (e) => e.preventDefault());

  $("settings").addEventListener("submit", (e) => {
    e.preventDefault();
    if (!files.bold || !files.events) {
      showError("Choose a run (4D NIfTI) and its events table first.");
      return;
    }
    const s = settingsFromForm();
    analyze({ ...s, bold: files.bold, events: files.events, confounds: files.confounds || undefined, mask: files.mask || undefined }).catch(() => {});
  });
  $("demo").addEventListener("click", () => {
    const s = settingsFromForm();
    delete s.contrasts;
    run(Kind.demo, { ...s, seed: 1 }).catch(() => {});
  });
  $("rethreshold").addEventListener("click", () => {
    const s = settingsFromForm();
    rethreshold({ correct: s.correct, alpha: s.alpha, clusterP: s.clusterP }).catch(() => {});
  });
  $("cancel").addEventListener("click", cancel);
  $("show-truth").addEventListener("change", () => result && drawSlices());
  $("hist-log").addEventListener("change", () => result && drawHistogram());
  $("series-cancel").addEventListener("click", () => {
    if (seriesReq) worker.postMessage(message(nextId++, Kind.cancel, { target: seriesReq.id }));
  });
  for (const b of document.querySelectorAll("button[data-export]")) {
    b.addEventListener("click", () => saveExport(b.dataset.export));
  }
  $("export-map-go").addEventListener("click", () => saveExport("map:" + $("export-map").value));
  $("contrast-pick").addEventListener("change", (e) => {
    view.contrast = Number(e.target.value);
    view.selected = -1;
    $("facts").textContent = describe(result.summary, result.summary.contrasts[view.contrast]);
    drawAll();
  });
  $("slices").addEventListener("click", (e) => {
    if (!result || !view.geom) return;
    const c = $("slices");
    const r = c.getBoundingClientRect();
    const x = ((e.clientX - r.left) * c.width) / r.width;
    const y = ((e.clientY - r.top) * c.height) / r.height;
    const ijk = slices.pick(view.geom, x, y, view.cursor);
    if (ijk) {
      view.cursor = ijk;
      view.selected = -1;
      drawAll();
      requestSeries();
    }
  });
  window.addEventListener("resize", () => result && drawAll());
}

// ---- automation entry -----------------------------------------------------

const blobOrText = (v) => v === undefined || v === null || typeof v === "string" || v instanceof Blob;

// analyze runs a fit from script (interface.md, "In the browser") and
// resolves with the summary once the views show the result.
function analyze(opts) {
  if (!opts || !(opts.bold instanceof Blob)) return Promise.reject(new Error("analyze: bold must be a File or Blob"));
  if (!(opts.events instanceof Blob) && typeof opts.events !== "string") {
    return Promise.reject(new Error("analyze: events must be a File, Blob or text"));
  }
  if (!blobOrText(opts.confounds)) return Promise.reject(new Error("analyze: confounds must be a File, Blob or text"));
  if (opts.mask !== undefined && opts.mask !== null && !(opts.mask instanceof Blob)) {
    return Promise.reject(new Error("analyze: mask must be a File or Blob"));
  }
  if (opts.correct !== undefined && !METHODS.includes(opts.correct)) {
    return Promise.reject(new Error(`analyze: correct "${opts.correct}", want one of ${METHODS.join(", ")}`));
  }
  const name = (v, def) => (v && typeof v.name === "string" && v.name ? v.name : def);
  const fields = {
    bold: opts.bold, boldName: name(opts.bold, "bold.nii.gz"),
    events: opts.events, eventsName: name(opts.events, "events.tsv"),
    contrasts: Array.isArray(opts.contrasts) ? opts.contrasts : [],
    correct: opts.correct, alpha: opts.alpha, clusterP: opts.clusterP ?? opts.cluster_p,
    smooth: opts.smooth, highpass: opts.highpass, noise: opts.noise, tr: opts.tr,
    hrfDerivs: !!(opts.hrfDerivs ?? opts.hrf_derivs), modulate: opts.modulate,
    realign: !!opts.realign, nullCheck: !!(opts.nullCheck ?? opts.null_check),
  };
  // inflate: "wasm" makes the worker inflate a gzip run with the Go decoder
  // instead of the browser's DecompressionStream (for benchmarks).
  if (opts.inflate) fields.inflate = opts.inflate;
  if (opts.confounds !== undefined && opts.confounds !== null) {
    fields.confounds = opts.confounds;
    fields.confoundsName = name(opts.confounds, "confounds.tsv");
  }
  if (opts.mask) {
    fields.mask = opts.mask;
    fields.maskName = name(opts.mask, "mask.nii.gz");
  }
  // workers: 1 reads the run in the fit worker; 2 inflates a gzip run in a
  // second worker (the default where the browser reports two or more
  // logical processors; by default a fit started while that worker still
  // boots runs in one). The result is the same either way.
  const workers = opts.workers === undefined ? fitWorkers() : Math.max(1, Math.min(2, Math.floor(Number(opts.workers)) || 1));
  formFromFields(fields);
  return run(Kind.analyze, fields, workers, opts.workers !== undefined);
}

// formFromFields puts the settings of a run started from script into the
// form, so that the form describes the shown result and a later "Apply" or
// Fit starts from them, and shows that form (the Single run tab). Fields
// left out keep the form's value.
function formFromFields(f) {
  setMode("run");
  const set = (id, v) => {
    const el = $(id);
    if (!el || v === undefined || v === null || (typeof v === "number" && !Number.isFinite(v))) return;
    if (el.type === "checkbox") el.checked = !!v;
    else if (String(el.value) !== String(v)) el.value = String(v);
  };
  if (Array.isArray(f.contrasts) && f.contrasts.length) set("contrasts", f.contrasts.join("\n"));
  set("correct", f.correct);
  set("alpha", f.alpha);
  set("cluster-p", f.clusterP);
  set("smooth", f.smooth);
  set("highpass", f.highpass);
  set("noise", f.noise);
  set("tr", f.tr);
  set("realign", f.realign);
  set("null-check", f.nullCheck);
}

window.winnow = Object.freeze({
  ready,
  analyze,
  group,
  // demo runs the built-in synthetic scenario; opts as analyze without files and contrasts.
  demo: (opts = {}) => {
    const fields = { ...opts, seed: opts.seed ?? 1 };
    formFromFields({ ...fields, nullCheck: !!(opts.nullCheck ?? opts.null_check), realign: !!opts.realign, contrasts: undefined });
    return run(Kind.demo, fields);
  },
  // rethreshold re-infers the shown result: {correct, alpha, clusterP}; it
  // resolves with {ms, summary}, ms from the request to the redrawn views.
  // A shown group result is re-inferred from its recorded null (groupRethreshold).
  rethreshold: (opts = {}) => (result && result.mode === "group" ? groupRethreshold : rethreshold)({ correct: opts.correct, alpha: opts.alpha, clusterP: opts.clusterP ?? opts.cluster_p }),
  // summary is the summary the page shows now, or null.
  summary: () => (result ? JSON.parse(JSON.stringify(result.summary)) : null),
  // timings of the last fit (fitMs: from the request to the drawn views;
  // kind: "analyze" or "demo"; fitWorkers: 2 when a second worker inflated
  // the run) and the last rethreshold (rethresholdMs).
  timings,
  // exportFile(key) makes a file as the Save buttons do, without
  // downloading it: {name, url (blob:), size, type}.
  exportFile,
  // series() resolves with the series on screen once it has arrived: {ijk,
  // time, observed, fitted, rho}, or null when none is shown.
  series: () => waitSeries(),
  // gunzipTiming(blob, how) inflates a gzip Blob in the worker, how
  // "stream" (the browser's DecompressionStream) or "wasm" (the Go
  // decoder), and resolves with {bytes, ms}.
  gunzipTiming: (blob, how) => request(Kind.gunzip, { blob, how }, null, true).then((m) => ({ bytes: m.bytes, ms: m.ms })),
});

function waitSeries() {
  return new Promise((resolve) => {
    (function check() {
      if (seriesReq || seriesTimer) return setTimeout(check, 50);
      resolve(series && series.ijk.every((v, a) => v === view.cursor[a]) ? series : null);
    })();
  });
}

wireInputs();
wireGroup();
startWorker();
ready.then(() => setBusy(false), () => {});
// The reader worker of the parallel read boots once the page is usable.
ready.then(() => { if (fitWorkers() >= 2 && !reader) startReader(); }, () => {});
