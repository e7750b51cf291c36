// Three orthogonal slices through the cursor: the mean image in grey with
// the surviving statistic overlaid in colour, an optional outline (the demo's
// planted truth) and a crosshair. Pure: render draws from its arguments only
// and returns the geometry that pick uses to turn a click into a voxel.
//
// data: {dims: [nx, ny, nz], voxelMM: [3], affine: number[16] (row-major,
//        voxel -> world mm), background: Float32Array, overlay: Float32Array
//        or null (0 = nothing to draw; sign picks the colour table),
//        outline: Float32Array or null, cursor: [i, j, k]}
// opts: {bgRange: [lo, hi], overlayRange: [lo, hi] (|value| at the ends of
//        the colour tables), dpr: device pixels per CSS pixel}
//
// Screens show world axes as: axial, right of the subject to the right and
// anterior up; coronal, right to the right and superior up; sagittal,
// anterior to the right and superior up. Which voxel axis runs along which
// world axis, and in which direction, is read from the affine, and the edges
// carry letters (L/R, P/A, I/S), so no convention has to be assumed.

import { positive, negative, SIZE } from "./colormap.js";

// orient returns, for world axes x, y, z, the voxel axis that runs most
// nearly along it and the sign of that run.
export function orient(affine) {
  const axes = [];
  const used = [false, false, false];
  for (let r = 0; r < 3; r++) {
    let best = -1, bestAbs = -1;
    for (let c = 0; c < 3; c++) {
      const a = Math.abs(affine[4 * r + c]);
      if (!used[c] && a > bestAbs) {
        best = c;
        bestAbs = a;
      }
    }
    used[best] = true;
    axes.push({ axis: best, sign: affine[4 * r + best] < 0 ? -1 : 1 });
  }
  return axes;
}

// world maps a voxel (0-based) to world mm with the affine.
export function world(affine, ijk) {
  const out = [0, 0, 0];
  for (let r = 0; r < 3; r++) {
    out[r] = affine[4 * r] * ijk[0] + affine[4 * r + 1] * ijk[1] + affine[4 * r + 2] * ijk[2] + affine[4 * r + 3];
  }
  return out;
}

// displayRange picks a grey window for the background: the 2nd and 99.5th
// percentiles of the nonzero values inside the mask (up to 40000 samples).
export function displayRange(values, mask) {
  const step = Math.max(1, Math.floor(values.length / 40000));
  const s = [];
  for (let i = 0; i < values.length; i += step) {
    if ((!mask || mask[i]) && values[i] !== 0 && Number.isFinite(values[i])) s.push(values[i]);
  }
  if (s.length === 0) return [0, 1];
  s.sort((a, b) => a - b);
  const lo = s[Math.floor(0.02 * (s.length - 1))];
  const hi = s[Math.floor(0.995 * (s.length - 1))];
  return hi > lo ? [lo, hi] : [lo, lo + 1];
}

// layout places the three panels in a canvas of w x h device pixels.
export function layout(w, h, data, dpr = 1) {
  const [X, Y, Z] = orient(data.affine);
  const d = data.dims, mm = data.voxelMM;
  const ext = (a) => d[a.axis] * Math.abs(mm[a.axis] || 1);
  const spec = [
    { name: "axial", h: X, v: Y, fixed: Z, letters: ["L", "R", "A", "P"] },
    { name: "coronal", h: X, v: Z, fixed: Y, letters: ["L", "R", "S", "I"] },
    { name: "sagittal", h: Y, v: Z, fixed: X, letters: ["P", "A", "S", "I"] },
  ];
  const gap = 14 * dpr, top = 24 * dpr, pad = 6 * dpr;
  const widthMM = spec.reduce((s, p) => s + ext(p.h), 0);
  const heightMM = Math.max(...spec.map((p) => ext(p.v)));
  const scale = Math.max(0.01, Math.min((w - 2 * gap - 2 * pad) / widthMM, (h - top - pad) / heightMM));
  let x = (w - (widthMM * scale + 2 * gap)) / 2;
  const panels = spec.map((p) => {
    const pw = ext(p.h) * scale, ph = ext(p.v) * scale;
    const panel = {
      name: p.name, letters: p.letters,
      x0: x, y0: top + (heightMM * scale - ph) / 2, w: pw, h: ph,
      hA: p.h.axis, hs: p.h.sign, vA: p.v.axis, vs: p.v.sign, fA: p.fixed.axis,
      nh: d[p.h.axis], nv: d[p.v.axis],
    };
    x += pw + gap;
    return panel;
  });
  return { panels, dpr, top };
}

// cell maps a screen cell (p across, q down) of a panel to a voxel index
// along its horizontal and vertical voxel axes.
function cellToVoxel(pn, p, q) {
  return [pn.hs > 0 ? p : pn.nh - 1 - p, pn.vs > 0 ? pn.nv - 1 - q : q];
}

// pick returns the voxel under device pixel (x, y), keeping the cursor's
// coordinate along the clicked panel's fixed axis; null outside the panels.
export function pick(geom, x, y, cursor) {
  for (const pn of geom.panels) {
    if (x < pn.x0 || y < pn.y0 || x >= pn.x0 + pn.w || y >= pn.y0 + pn.h) continue;
    const p = Math.min(pn.nh - 1, Math.floor(((x - pn.x0) / pn.w) * pn.nh));
    const q = Math.min(pn.nv - 1, Math.floor(((y - pn.y0) / pn.h) * pn.nv));
    const [a, b] = cellToVoxel(pn, p, q);
    const out = cursor.slice();
    out[pn.hA] = a;
    out[pn.vA] = b;
    return out;
  }
  return null;
}

// scratch returns an off-screen canvas of w x h pixels for one panel, kept
// between renders: making a canvas each time costs more than drawing it.
// Its pixels are always replaced whole before use.
const scratchCanvases = new Map();
function scratch(key, w, h) {
  let c = scratchCanvases.get(key);
  if (!c) {
    c = document.createElement("canvas");
    scratchCanvases.set(key, c);
  }
  if (c.width !== w) c.width = w;
  if (c.height !== h) c.height = h;
  return c;
}

export function render(canvas, data, opts = {}) {
  const dpr = opts.dpr || 1;
  const ctx = canvas.getContext("2d");
  const W = canvas.width, H = canvas.height;
  ctx.fillStyle = "#14171b";
  ctx.fillRect(0, 0, W, H);
  const geom = layout(W, H, data, dpr);
  const [nx, ny] = data.dims;
  const [blo, bhi] = opts.bgRange || displayRange(data.background, null);
  const [olo, ohi] = opts.overlayRange || [0, 1];
  const bspan = bhi > blo ? 255 / (bhi - blo) : 0;
  const ospan = ohi > olo ? (SIZE - 1) / (ohi - olo) : 0;
  const cur = data.cursor;

  for (const pn of geom.panels) {
    const img = new ImageData(pn.nh, pn.nv);
    const px = img.data;
    const inside = data.outline ? new Uint8Array(pn.nh * pn.nv) : null;
    const ijk = cur.slice();
    for (let q = 0; q < pn.nv; q++) {
      for (let p = 0; p < pn.nh; p++) {
        const [a, b] = cellToVoxel(pn, p, q);
        ijk[pn.hA] = a;
        ijk[pn.vA] = b;
        const idx = ijk[0] + nx * (ijk[1] + ny * ijk[2]);
        let g = (data.background[idx] - blo) * bspan;
        g = g < 0 || !(g === g) ? 0 : g > 255 ? 255 : g;
        let r = g, gg = g, bl = g;
        const o = data.overlay ? data.overlay[idx] : 0;
        if (o !== 0 && o === o) {
          const t = o > 0 ? positive : negative;
          let f = Math.round((Math.abs(o) - olo) * ospan);
          f = f < 0 ? 0 : f > SIZE - 1 ? SIZE - 1 : f;
          r = t[3 * f];
          gg = t[3 * f + 1];
          bl = t[3 * f + 2];
        }
        const o4 = 4 * (p + pn.nh * q);
        px[o4] = r;
        px[o4 + 1] = gg;
        px[o4 + 2] = bl;
        px[o4 + 3] = 255;
        if (inside && data.outline[idx] > 0) inside[p + pn.nh * q] = 1;
      }
    }
    const off = scratch(pn.name, pn.nh, pn.nv);
    off.getContext("2d").putImageData(img, 0, 0);
    ctx.imageSmoothingEnabled = false;
    ctx.drawImage(off, pn.x0, pn.y0, pn.w, pn.h);

    const cw = pn.w / pn.nh, ch = pn.h / pn.nv;
    if (inside) {
      ctx.beginPath();
      for (let q = 0; q < pn.nv; q++) {
        for (let p = 0; p < pn.nh; p++) {
          if (!inside[p + pn.nh * q]) continue;
          const x = pn.x0 + p * cw, y = pn.y0 + q * ch;
          if (p === 0 || !inside[p - 1 + pn.nh * q]) { ctx.moveTo(x, y); ctx.lineTo(x, y + ch); }
          if (p === pn.nh - 1 || !inside[p + 1 + pn.nh * q]) { ctx.moveTo(x + cw, y); ctx.lineTo(x + cw, y + ch); }
          if (q === 0 || !inside[p + pn.nh * (q - 1)]) { ctx.moveTo(x, y); ctx.lineTo(x + cw, y); }
          if (q === pn.nv - 1 || !inside[p + pn.nh * (q + 1)]) { ctx.moveTo(x, y + ch); ctx.lineTo(x + cw, y + ch); }
        }
      }
      ctx.strokeStyle = "rgba(255,255,255,0.85)";
      ctx.lineWidth = Math.max(1, dpr);
      ctx.stroke();
    }

    // Crosshair through the centre of the cursor's cell.
    const pc = pn.hs > 0 ? cur[pn.hA] : pn.nh - 1 - cur[pn.hA];
    const qc = pn.vs > 0 ? pn.nv - 1 - cur[pn.vA] : cur[pn.vA];
    const cx = pn.x0 + (pc + 0.5) * cw, cy = pn.y0 + (qc + 0.5) * ch;
    ctx.strokeStyle = "rgba(120,215,170,0.8)";
    ctx.lineWidth = Math.max(1, dpr);
    ctx.beginPath();
    ctx.moveTo(pn.x0, cy); ctx.lineTo(cx - 4 * dpr, cy);
    ctx.moveTo(cx + 4 * dpr, cy); ctx.lineTo(pn.x0 + pn.w, cy);
    ctx.moveTo(cx, pn.y0); ctx.lineTo(cx, cy - 4 * dpr);
    ctx.moveTo(cx, cy + 4 * dpr); ctx.lineTo(cx, pn.y0 + pn.h);
    ctx.stroke();

    // Title and edge letters.
    ctx.fillStyle = "#c9d1d9";
    ctx.font = `${12 * dpr}px system-ui, sans-serif`;
    ctx.textBaseline = "bottom";
    ctx.textAlign = "left";
    ctx.fillText(`${pn.name}  ${"ijk"[pn.fA]} = ${cur[pn.fA]}`, pn.x0, geom.top - 6 * dpr);
    ctx.fillStyle = "rgba(201,209,217,0.75)";
    ctx.font = `${11 * dpr}px system-ui, sans-serif`;
    ctx.textBaseline = "middle";
    const [l, r, t, b] = pn.letters;
    ctx.textAlign = "left";
    ctx.fillText(l, pn.x0 + 3 * dpr, pn.y0 + pn.h / 2);
    ctx.textAlign = "right";
    ctx.fillText(r, pn.x0 + pn.w - 3 * dpr, pn.y0 + pn.h / 2);
    ctx.textAlign = "center";
    ctx.textBaseline = "top";
    ctx.fillText(t, pn.x0 + pn.w / 2, pn.y0 + 2 * dpr);
    ctx.textBaseline = "bottom";
    ctx.fillText(b, pn.x0 + pn.w / 2, pn.y0 + pn.h - 2 * dpr);
  }
  return geom;
}
