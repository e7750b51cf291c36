// The design matrix as a grey image: one column per regressor, one row per
// volume, each column scaled from its own minimum (black) to maximum
// (white), a constant column drawn mid grey; the names stand above their
// columns. Pure: render draws from its arguments only.
//
// data: {rows, cols, names: string[], data: Float64Array (row-major)}
// opts: {dpr, rowLabel: what a row is ("scan" by default; "map" for a group)}

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const rl = opts.rowLabel || "scan";
  const ctx = canvas.getContext("2d");
  const W = canvas.width, H = canvas.height;
  ctx.clearRect(0, 0, W, H);
  const { rows, cols, names } = data;
  const x = data.data;
  ctx.font = `${11 * dpr}px system-ui, sans-serif`;
  const longest = Math.max(...names.map((n) => ctx.measureText(n).width));
  const top = Math.min(160 * dpr, longest * 0.72 + 14 * dpr);
  const left = ctx.measureText(`${rl} ${rows}`).width + 10 * dpr, right = 8 * dpr, bottom = 4 * dpr;
  const colW = Math.max(1, Math.min(36 * dpr, (W - left - right) / cols));
  const imgW = colW * cols, imgH = H - top - bottom;

  const img = new ImageData(cols, rows);
  for (let c = 0; c < cols; c++) {
    let lo = Infinity, hi = -Infinity;
    for (let r = 0; r < rows; r++) {
      const v = x[r * cols + c];
      if (v < lo) lo = v;
      if (v > hi) hi = v;
    }
    const span = hi - lo;
    for (let r = 0; r < rows; r++) {
      const g = span > 0 ? Math.round((255 * (x[r * cols + c] - lo)) / span) : 128;
      const o = 4 * (r * cols + c);
      img.data[o] = img.data[o + 1] = img.data[o + 2] = g;
      img.data[o + 3] = 255;
    }
  }
  const off = document.createElement("canvas");
  off.width = cols;
  off.height = rows;
  off.getContext("2d").putImageData(img, 0, 0);
  ctx.imageSmoothingEnabled = false;
  ctx.drawImage(off, left, top, imgW, imgH);
  ctx.strokeStyle = "#8b949e";
  ctx.lineWidth = 1;
  ctx.strokeRect(left - 0.5, top - 0.5, imgW + 1, imgH + 1);

  ctx.fillStyle = "#3b4450";
  ctx.textAlign = "left";
  ctx.textBaseline = "middle";
  for (let c = 0; c < cols; c++) {
    ctx.save();
    ctx.translate(left + (c + 0.5) * colW, top - 5 * dpr);
    ctx.rotate(-Math.PI / 4);
    ctx.fillText(names[c], 0, 0);
    ctx.restore();
  }
  ctx.textAlign = "right";
  ctx.textBaseline = "top";
  ctx.fillText(`${rl} 1`, left - 5 * dpr, top);
  ctx.textBaseline = "bottom";
  ctx.fillText(`${rl} ${rows}`, left - 5 * dpr, top + imgH);
}
