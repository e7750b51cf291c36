// One voxel's time series (points joined by a thin line) with the model
// fitted to it (a thicker line). Pure: render draws from its arguments only.
//
// data: {ijk: [i, j, k], time, observed, fitted: Float64Array, rho}
//       or null (nothing chosen yet), with opts.note a line to show instead.
// opts: {dpr, note}

import { frame, polyline, extent } from "./plot.js";

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  if (!data) {
    const f = frame(canvas, [0, 1], [0, 1], { dpr, xLabel: "time, s", yTicks: [], xTicks: [] });
    f.ctx.fillStyle = "#5b6572";
    f.ctx.textAlign = "center";
    f.ctx.textBaseline = "middle";
    f.ctx.fillText(opts.note || "Pick a voxel to see its time series.", (f.left + f.right) / 2, (f.top + f.bottom) / 2);
    return;
  }
  const { time, observed, fitted } = data;
  const [lo, hi] = extent(observed, fitted);
  const pad = 0.06 * (hi - lo);
  const xr = [0, time.length ? time[time.length - 1] + (time[0] || 0) : 1];
  const f = frame(canvas, xr, [lo - pad, hi + pad], {
    dpr, xLabel: "time, s", yLabel: "signal",
    title: `Voxel ${data.ijk.join(", ")}` + (data.rho ? `   \u03c1 = ${data.rho.toFixed(2)}` : ""),
  });
  const { ctx } = f;
  polyline(f, time, observed, "rgba(91,101,114,0.55)", 1);
  ctx.fillStyle = "#5b6572";
  const r = 1.6 * dpr;
  for (let i = 0; i < time.length; i++) {
    ctx.beginPath();
    ctx.arc(f.x(time[i]), f.y(observed[i]), r, 0, 2 * Math.PI);
    ctx.fill();
  }
  polyline(f, time, fitted, "#1d6b5a", 2.2);
  ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  ctx.textAlign = "right";
  ctx.textBaseline = "top";
  ctx.fillStyle = "#1d6b5a";
  ctx.fillText("model fit (all columns)", f.right - 4 * dpr, 4 * dpr);
  const w = ctx.measureText("model fit (all columns)").width;
  ctx.fillStyle = "#5b6572";
  ctx.fillText("\u25cf data   ", f.right - 4 * dpr - w, 4 * dpr);
}
