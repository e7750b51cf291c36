// The permutation null distribution of one contrast's maximum: bars of
// relabellings per bin (computed by the worker), the critical value in force
// as a vertical rule and the observed maximum as a marked rule. Pure: render
// draws from its arguments only.
//
// data: {edges, counts (Float64Array), n, label ("max t", ...),
//        threshold: number | null, observed: number, exceed: number}
// opts: {dpr, alpha}

import { frame, ticks, fmtTick } from "./plot.js";

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const { edges, counts } = data;
  let top = 0;
  for (const c of counts) top = Math.max(top, c);
  top = top > 0 ? top * 1.12 : 1;
  const xr = [edges[0], edges[edges.length - 1]];
  const f = frame(canvas, xr, [0, top], {
    dpr, xLabel: data.label, yLabel: "relabellings",
    title: `Permutation null of the ${data.label} (${data.n} relabellings)`, xTicks: ticks(xr[0], xr[1], 8),
  });
  const { ctx } = f;
  ctx.fillStyle = "#a7bccf";
  for (let i = 0; i < counts.length; i++) {
    if (!(counts[i] > 0)) continue;
    const x0 = f.x(edges[i]), x1 = f.x(edges[i + 1]);
    const y0 = f.y(counts[i]);
    ctx.fillRect(x0 + 0.5 * dpr, y0, Math.max(1, x1 - x0 - 1 * dpr), f.bottom - y0);
  }
  // side: "left" puts the label left of its rule; "auto" right unless it
  // would leave the plot.
  const rule = (v, colour, dash, text, row, side) => {
    const px = Math.round(f.x(v)) + 0.5;
    ctx.save();
    ctx.strokeStyle = colour;
    ctx.lineWidth = 2 * dpr;
    if (dash) ctx.setLineDash(dash.map((d) => d * dpr));
    ctx.beginPath();
    ctx.moveTo(px, f.top);
    ctx.lineTo(px, f.bottom);
    ctx.stroke();
    ctx.restore();
    ctx.fillStyle = colour;
    ctx.font = `600 ${11 * dpr}px system-ui, sans-serif`;
    ctx.textBaseline = "top";
    const w = ctx.measureText(text).width;
    const leftSide = side === "left" ? px - 6 * dpr - w >= f.left : px + 6 * dpr + w > f.right;
    ctx.textAlign = leftSide ? "right" : "left";
    ctx.fillText(text, leftSide ? px - 6 * dpr : px + 6 * dpr, f.top + (2 + 14 * row) * dpr);
  };
  if (data.threshold !== null && data.threshold !== undefined && Number.isFinite(data.threshold)) {
    rule(data.threshold, "#b4442a", [6, 3], `threshold ${fmtTick(data.threshold)}` + (opts.alpha ? ` (\u03b1 ${opts.alpha})` : ""), 0, "left");
  }
  if (Number.isFinite(data.observed)) {
    rule(data.observed, "#1d6b5a", null, `observed ${fmtTick(data.observed)} (reached by ${data.exceed} of ${data.n})`, 1, "auto");
    // A triangle on the axis marks the observed maximum.
    const px = f.x(data.observed);
    ctx.fillStyle = "#1d6b5a";
    ctx.beginPath();
    ctx.moveTo(px, f.bottom - 9 * dpr);
    ctx.lineTo(px - 6 * dpr, f.bottom);
    ctx.lineTo(px + 6 * dpr, f.bottom);
    ctx.closePath();
    ctx.fill();
  }
}
