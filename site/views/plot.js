// Shared drawing helpers for the line and bar plots: tick choice and a
// framed plot area with labelled axes. No state; every function draws from
// its arguments.

// ticks returns round values covering [lo, hi]: steps of 1, 2 or 5 times a
// power of ten, about n of them.
export function ticks(lo, hi, n = 5) {
  if (!(hi > lo)) return [lo];
  const raw = (hi - lo) / Math.max(1, n);
  const p = Math.pow(10, Math.floor(Math.log10(raw)));
  const m = raw / p;
  const step = (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10) * p;
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

export function fmtTick(v) {
  const a = Math.abs(v);
  if (a === 0) return "0";
  if (a >= 1e4 || a < 1e-3) return v.toExponential(0);
  return String(Number(v.toPrecision(4)));
}

// frame clears the canvas, lays out a plot area with margins for tick
// labels and returns {x(v), y(v), left, right, top, bottom, ctx}.
export function frame(canvas, xr, yr, opts = {}) {
  const dpr = opts.dpr || 1;
  const ctx = canvas.getContext("2d");
  const W = canvas.width, H = canvas.height;
  ctx.clearRect(0, 0, W, H);
  ctx.fillStyle = "#ffffff";
  ctx.fillRect(0, 0, W, H);
  ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  const yt = opts.yTicks || ticks(yr[0], yr[1], 4);
  const labels = yt.map(opts.yFormat || fmtTick);
  const left = Math.max(0, ...labels.map((l) => ctx.measureText(l).width)) + 14 * dpr + (opts.yLabel ? 14 * dpr : 0);
  const right = W - 10 * dpr;
  const top = (opts.title ? 22 : 10) * dpr;
  const bottom = H - (opts.xLabel ? 34 : 20) * dpr;
  const x = (v) => left + ((v - xr[0]) / (xr[1] - xr[0] || 1)) * (right - left);
  const y = (v) => bottom - ((v - yr[0]) / (yr[1] - yr[0] || 1)) * (bottom - top);

  ctx.strokeStyle = "#e3e7ec";
  ctx.lineWidth = 1;
  ctx.fillStyle = "#5b6572";
  ctx.textAlign = "right";
  ctx.textBaseline = "middle";
  yt.forEach((v, i) => {
    const py = Math.round(y(v)) + 0.5;
    ctx.beginPath();
    ctx.moveTo(left, py);
    ctx.lineTo(right, py);
    ctx.stroke();
    ctx.fillText(labels[i], left - 5 * dpr, py);
  });
  ctx.textAlign = "center";
  ctx.textBaseline = "top";
  for (const v of opts.xTicks || ticks(xr[0], xr[1], 6)) {
    const px = Math.round(x(v)) + 0.5;
    ctx.beginPath();
    ctx.moveTo(px, bottom);
    ctx.lineTo(px, bottom + 4 * dpr);
    ctx.strokeStyle = "#8b949e";
    ctx.stroke();
    ctx.fillText(fmtTick(v), px, bottom + 6 * dpr);
  }
  ctx.strokeStyle = "#8b949e";
  ctx.beginPath();
  ctx.moveTo(left + 0.5, top);
  ctx.lineTo(left + 0.5, bottom + 0.5);
  ctx.lineTo(right, bottom + 0.5);
  ctx.stroke();
  if (opts.xLabel) {
    ctx.textBaseline = "bottom";
    ctx.fillText(opts.xLabel, (left + right) / 2, H - 2 * dpr);
  }
  if (opts.yLabel) {
    ctx.save();
    ctx.translate(3 * dpr, (top + bottom) / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textBaseline = "top";
    ctx.fillText(opts.yLabel, 0, 0);
    ctx.restore();
  }
  if (opts.title) {
    ctx.fillStyle = "#1f2630";
    ctx.textAlign = "left";
    ctx.textBaseline = "top";
    ctx.font = `600 ${12 * dpr}px system-ui, sans-serif`;
    ctx.fillText(opts.title, left, 4 * dpr);
    ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  }
  return { ctx, x, y, left, right, top, bottom, dpr };
}

// polyline strokes the points (xs[i], ys[i]) in plot coordinates.
export function polyline(f, xs, ys, style, width = 1.5, dash = null) {
  const { ctx } = f;
  ctx.save();
  ctx.beginPath();
  ctx.rect(f.left, f.top, f.right - f.left, f.bottom - f.top);
  ctx.clip();
  ctx.strokeStyle = style;
  ctx.lineWidth = width * f.dpr;
  if (dash) ctx.setLineDash(dash.map((d) => d * f.dpr));
  ctx.beginPath();
  let pen = false;
  for (let i = 0; i < xs.length; i++) {
    const yv = ys[i];
    if (!Number.isFinite(yv)) {
      pen = false;
      continue;
    }
    const px = f.x(xs[i]), py = f.y(yv);
    if (pen) ctx.lineTo(px, py);
    else ctx.moveTo(px, py);
    pen = true;
  }
  ctx.stroke();
  ctx.restore();
}

// extent is [min, max] over the finite values of several arrays.
export function extent(...arrays) {
  let lo = Infinity, hi = -Infinity;
  for (const a of arrays) {
    for (let i = 0; i < a.length; i++) {
      const v = a[i];
      if (Number.isFinite(v)) {
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
    }
  }
  if (!(hi >= lo)) return [0, 1];
  if (hi === lo) return [lo - 1, hi + 1];
  return [lo, hi];
}
