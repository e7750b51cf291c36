// The dedicated worker: it starts the Go program (wasm/) and relays messages
// between it and the page, nothing else. The protocol is in protocol.js.
import "winnow:wasm-exec"; // the toolchain's wasm_exec.js, added at build time; defines globalThis.Go
import { Kind } from "./protocol.js";

const queue = []; // page messages that arrived before the Go program was ready
let started = false;

self.onmessage = (e) => {
  const msg = e.data;
  if (msg && msg.kind === Kind.boot) {
    if (!started) {
      started = true;
      boot(msg).catch((err) => {
        self.postMessage({ v: 1, id: 0, kind: Kind.error, message: "starting the WebAssembly program: " + err.message });
      });
    }
    return;
  }
  if (typeof self.winnowReceive === "function") self.winnowReceive(msg);
  else queue.push(msg);
};

async function boot(msg) {
  const go = new Go();
  let inst;
  if (msg.wasm) {
    inst = (await WebAssembly.instantiate(msg.wasm, go.importObject)).instance;
  } else {
    const resp = await fetch(msg.url);
    if (!resp.ok) throw new Error(msg.url + ": HTTP " + resp.status);
    inst = (await WebAssembly.instantiateStreaming(resp, go.importObject)).instance;
  }
  // winnowReceive is defined by the Go program before it posts "ready".
  const run = go.run(inst);
  const flush = () => {
    if (typeof self.winnowReceive !== "function") return setTimeout(flush, 5);
    while (queue.length) self.winnowReceive(queue.shift());
  };
  flush();
  run.then(() => {
    self.postMessage({ v: 1, id: 0, kind: Kind.error, message: "the WebAssembly program exited" });
  });
}
