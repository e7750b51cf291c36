// The colour legend of the slice overlay: one bar per sign in use, labelled
// with the |value| at each end. Pure: render draws from its arguments only.
//
// data: {lo, hi, label, positive: bool, negative: bool}; opts: {dpr}.

import { positive, negative, cssColor } from "./colormap.js";

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const ctx = canvas.getContext("2d");
  const W = canvas.width, H = canvas.height;
  ctx.clearRect(0, 0, W, H);
  ctx.font = `${12 * dpr}px system-ui, sans-serif`;
  ctx.textBaseline = "middle";
  ctx.fillStyle = "#3b4450";
  if (!data || !(data.hi > 0)) {
    ctx.fillText("no voxel survives: nothing to colour", 0, H / 2);
    return;
  }
  const bars = [];
  if (data.positive !== false) bars.push({ table: positive, sign: "+" });
  if (data.negative) bars.push({ table: negative, sign: "\u2212" });
  const barW = Math.min(220 * dpr, (W - 40 * dpr) / bars.length - 120 * dpr);
  const barH = 12 * dpr;
  let x = 0;
  const fmt = (v) => (Math.abs(v) >= 100 ? v.toFixed(0) : v.toFixed(2));
  for (const b of bars) {
    const label = `${b.sign}${data.label}`;
    ctx.fillStyle = "#3b4450";
    ctx.textAlign = "left";
    ctx.fillText(label, x, H / 2);
    x += ctx.measureText(label).width + 8 * dpr;
    const lo = fmt(data.lo);
    ctx.fillText(lo, x, H / 2);
    x += ctx.measureText(lo).width + 6 * dpr;
    for (let i = 0; i < barW; i++) {
      ctx.fillStyle = cssColor(b.table, i / Math.max(1, barW - 1));
      ctx.fillRect(x + i, H / 2 - barH / 2, 1, barH);
    }
    ctx.strokeStyle = "#8b949e";
    ctx.lineWidth = 1;
    ctx.strokeRect(x + 0.5, H / 2 - barH / 2 + 0.5, barW - 1, barH - 1);
    x += barW + 6 * dpr;
    ctx.fillStyle = "#3b4450";
    const hi = fmt(data.hi);
    ctx.fillText(hi, x, H / 2);
    x += ctx.measureText(hi).width + 28 * dpr;
  }
}
