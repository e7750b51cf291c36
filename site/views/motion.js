// Framewise displacement per volume after realignment, with the 0.5 mm
// reference line and the run's mean and maximum. Pure.
//
// data: {fd: Float64Array (mm), meanFD, maxFD}; opts: {dpr}

import { frame, polyline } from "./plot.js";

const LIMIT = 0.5; // mm, the high-motion line (matches the summary's count)

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const n = data.fd.length;
  let hi = LIMIT * 1.2;
  for (const v of data.fd) if (v > hi) hi = v * 1.1;
  const f = frame(canvas, [1, Math.max(2, n)], [0, hi], {
    dpr, xLabel: "volume", yLabel: "FD, mm",
    title: `Framewise displacement: mean ${data.meanFD.toFixed(3)} mm, max ${data.maxFD.toFixed(3)} mm`,
  });
  polyline(f, [1, n], [LIMIT, LIMIT], "#b4442a", 1, [4, 3]);
  const xs = Array.from({ length: n }, (_, i) => i + 1);
  polyline(f, xs, data.fd, "#1f2630", 1.5);
  const { ctx } = f;
  ctx.fillStyle = "#b4442a";
  ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  ctx.textAlign = "right";
  ctx.textBaseline = "bottom";
  ctx.fillText(`${LIMIT} mm`, f.right - 2 * dpr, f.y(LIMIT) - 2 * dpr);
}
