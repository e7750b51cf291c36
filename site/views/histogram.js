// The distribution of one contrast's in-mask z values: bars of voxel
// counts, the count a null run would give (the standard normal density
// scaled to the voxel count and bin width, computed by the worker) as a
// dashed curve, and the threshold in force as a vertical rule, named
// "corrected" or "uncorrected". Pure: render draws from its arguments only.
//
// data: {edges, counts, curveZ, curveY (Float64Array), n, threshold: number
//        or null, label: string}
// opts: {dpr, log: bool (counts on a log10(1 + count) axis)}

import { frame, polyline, ticks } from "./plot.js";

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const log = !!opts.log;
  const tf = (v) => (log ? Math.log10(1 + v) : v);
  const { edges, counts, curveZ, curveY } = data;
  let top = 0;
  for (const c of counts) top = Math.max(top, tf(c));
  for (const c of curveY) top = Math.max(top, tf(c));
  top = top > 0 ? top * 1.08 : 1;
  const xr = [edges[0], edges[edges.length - 1]];
  let yTicks, yFormat;
  if (log) {
    yTicks = [];
    for (let p = 0; Math.log10(1 + Math.pow(10, p)) <= top; p++) yTicks.push(Math.log10(1 + Math.pow(10, p)));
    yFormat = (v) => (v === 0 ? "0" : String(Math.round(Math.pow(10, v) - 1)));
  }
  const f = frame(canvas, xr, [0, top], {
    dpr, xLabel: "z", yLabel: log ? "voxels (log scale)" : "voxels", yTicks, yFormat,
    title: `In-mask z (${data.n} voxels)`, xTicks: ticks(xr[0], xr[1], 8),
  });
  const { ctx } = f;
  ctx.fillStyle = "#a7bccf";
  for (let i = 0; i < counts.length; i++) {
    if (!(counts[i] > 0)) continue;
    const x0 = f.x(edges[i]), x1 = f.x(edges[i + 1]);
    const y0 = f.y(tf(counts[i]));
    ctx.fillRect(x0 + 0.5 * dpr, y0, Math.max(1, x1 - x0 - 1 * dpr), f.bottom - y0);
  }
  polyline(f, curveZ, Array.from(curveY, tf), "#1f2630", 1.5, [5, 3]);

  if (data.threshold !== null && data.threshold !== undefined && Number.isFinite(data.threshold)) {
    const px = Math.round(f.x(data.threshold)) + 0.5;
    ctx.strokeStyle = "#b4442a";
    ctx.lineWidth = 2 * dpr;
    ctx.beginPath();
    ctx.moveTo(px, f.top);
    ctx.lineTo(px, f.bottom);
    ctx.stroke();
    ctx.fillStyle = "#b4442a";
    ctx.font = `600 ${11 * dpr}px system-ui, sans-serif`;
    ctx.textBaseline = "top";
    const text = `z \u2265 ${data.threshold.toFixed(2)} (${data.label})`;
    const w = ctx.measureText(text).width;
    const leftSide = px + 6 * dpr + w > f.right;
    ctx.textAlign = leftSide ? "right" : "left";
    ctx.fillText(text, leftSide ? px - 6 * dpr : px + 6 * dpr, f.top + 2 * dpr);
  }
  // Key, right-aligned in the title row.
  ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  ctx.textAlign = "right";
  ctx.textBaseline = "middle";
  ctx.fillStyle = "#1f2630";
  const ky = 11 * dpr;
  let kx = f.right - 2 * dpr;
  const t1 = "observed";
  ctx.fillText(t1, kx, ky);
  kx -= ctx.measureText(t1).width + 6 * dpr;
  ctx.fillStyle = "#a7bccf";
  ctx.fillRect(kx - 12 * dpr, ky - 5 * dpr, 12 * dpr, 10 * dpr);
  kx -= 12 * dpr + 14 * dpr;
  ctx.fillStyle = "#1f2630";
  const t2 = "null N(0, 1)";
  ctx.fillText(t2, kx, ky);
  kx -= ctx.measureText(t2).width + 6 * dpr;
  ctx.save();
  ctx.strokeStyle = "#1f2630";
  ctx.setLineDash([5 * dpr, 3 * dpr]);
  ctx.lineWidth = 1.5 * dpr;
  ctx.beginPath();
  ctx.moveTo(kx - 22 * dpr, ky);
  ctx.lineTo(kx, ky);
  ctx.stroke();
  ctx.restore();
}
