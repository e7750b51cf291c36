// Colour tables for the statistic overlay, computed here from a formula
// rather than copied from anywhere.
//
// Each table is a path through the OKLab colour space (B. Ottosson, "A
// perceptual color space for image processing", 2020): lightness L rises
// linearly from lo to hi while the hue turns from h0 to h1 degrees at chroma
// C. Because OKLab lightness is close to perceived lightness, equal steps of
// the statistic give equal steps of brightness, and the colours stay
// ordered when printed in grey. Where a colour falls outside the sRGB gamut
// its chroma is reduced (bisection) until it fits, keeping L and the hue.

const N = 256;

// oklabToSRGB returns [r, g, b] in 0..1 (not clipped) for an OKLab colour,
// with the matrices of the 2020 note and the sRGB transfer curve (IEC 61966-2-1).
function oklabToSRGB(L, a, b) {
  const l_ = L + 0.3963377774 * a + 0.2158037573 * b;
  const m_ = L - 0.1055613458 * a - 0.0638541728 * b;
  const s_ = L - 0.0894841775 * a - 1.291485548 * b;
  const l = l_ * l_ * l_, m = m_ * m_ * m_, s = s_ * s_ * s_;
  const lin = [
    4.0767416621 * l - 3.3077115913 * m + 0.2309699292 * s,
    -1.2684380046 * l + 2.6097574011 * m - 0.3413193965 * s,
    -0.0041960863 * l - 0.7034186147 * m + 1.707614701 * s,
  ];
  return lin.map((c) => (c <= 0.0031308 ? 12.92 * c : 1.055 * Math.pow(c, 1 / 2.4) - 0.055));
}

function inGamut(rgb) {
  return rgb.every((c) => c >= -1e-4 && c <= 1 + 1e-4);
}

// ramp builds an N x 3 Uint8Array table.
function ramp(lo, hi, h0, h1, C) {
  const t = new Uint8Array(N * 3);
  for (let i = 0; i < N; i++) {
    const f = i / (N - 1);
    const L = lo + (hi - lo) * f;
    const h = ((h0 + (h1 - h0) * f) * Math.PI) / 180;
    let c0 = 0, c1 = C, rgb = oklabToSRGB(L, C * Math.cos(h), C * Math.sin(h));
    if (!inGamut(rgb)) {
      for (let it = 0; it < 24; it++) {
        const c = (c0 + c1) / 2;
        if (inGamut(oklabToSRGB(L, c * Math.cos(h), c * Math.sin(h)))) c0 = c;
        else c1 = c;
      }
      rgb = oklabToSRGB(L, c0 * Math.cos(h), c0 * Math.sin(h));
    }
    for (let k = 0; k < 3; k++) t[3 * i + k] = Math.round(255 * Math.min(1, Math.max(0, rgb[k])));
  }
  return t;
}

// positive: deep red-violet through orange to pale yellow.
export const positive = ramp(0.5, 0.96, 10, 105, 0.2);
// negative: deep blue through teal to pale cyan.
export const negative = ramp(0.45, 0.93, 268, 195, 0.16);
export const SIZE = N;

// cssColor is entry f (0..1) of a table as a CSS colour.
export function cssColor(table, f) {
  const i = Math.max(0, Math.min(N - 1, Math.round(f * (N - 1))));
  return `rgb(${table[3 * i]},${table[3 * i + 1]},${table[3 * i + 2]})`;
}
