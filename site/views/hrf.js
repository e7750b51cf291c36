// The response model: the canonical double-gamma kernel the design
// convolves each condition with, as sampled by the worker. Pure.
//
// data: {t, h: Float64Array}; opts: {dpr}

import { frame, polyline, extent } from "./plot.js";

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const [lo, hi] = extent(data.h);
  const f = frame(canvas, [0, data.t[data.t.length - 1]], [Math.min(0, lo) * 1.15, hi * 1.1], {
    dpr, xLabel: "seconds after onset", title: "Response model (double gamma)",
  });
  polyline(f, [0, data.t[data.t.length - 1]], [0, 0], "#8b949e", 1);
  polyline(f, data.t, data.h, "#1d6b5a", 2);
}
