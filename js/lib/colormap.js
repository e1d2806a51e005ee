// Our own sequential colour map, dark blue -> teal -> yellow, with CIE L*
// rising nearly evenly (about 10 to 91) so equal steps in value look like
// equal steps in colour. Control points were chosen by hand for this project
// and checked with cielabLightness() in the node tests.

/** Control points: [t, r, g, b] with t in [0, 1] and sRGB 0-255. */
export const CONTROL_POINTS = Object.freeze([
  [0.0, 24, 20, 74],
  [0.15, 37, 45, 118],
  [0.32, 33, 84, 142],
  [0.5, 22, 125, 146],
  [0.66, 44, 162, 128],
  [0.82, 138, 196, 84],
  [1.0, 250, 231, 92],
]);

/** Colour for points whose colour value is missing (NaN). */
export const MISSING_RGB = Object.freeze([150, 150, 150]);

/** [r, g, b] (0-255, rounded) at position t; t is clamped to [0, 1]. */
export function sampleColormap(t) {
  if (Number.isNaN(t)) return MISSING_RGB.slice();
  t = Math.min(1, Math.max(0, t));
  const pts = CONTROL_POINTS;
  let j = 1;
  while (j < pts.length - 1 && t > pts[j][0]) j++;
  const a = pts[j - 1];
  const b = pts[j];
  const u = (t - a[0]) / (b[0] - a[0]);
  return [1, 2, 3].map((k) => Math.round(a[k] + (b[k] - a[k]) * u));
}

/**
 * Lookup table of n colours, Uint8Array of length 3 n (r, g, b, r, g, b ...).
 */
export function buildLut(n = 256) {
  const lut = new Uint8Array(3 * n);
  for (let i = 0; i < n; i++) {
    const rgb = sampleColormap(n === 1 ? 0 : i / (n - 1));
    lut[3 * i] = rgb[0];
    lut[3 * i + 1] = rgb[1];
    lut[3 * i + 2] = rgb[2];
  }
  return lut;
}

/**
 * Table index in [0, n - 1] for value v on the range [vmin, vmax]; -1 when v
 * is NaN. A reversed range (vmin > vmax) reverses the map.
 */
export function lutIndex(v, vmin, vmax, n) {
  if (Number.isNaN(v)) return -1;
  const span = vmax - vmin;
  const t = span === 0 ? 0.5 : (v - vmin) / span;
  const i = Math.floor(t * n);
  return i <= 0 ? 0 : i >= n ? n - 1 : i;
}

/** CIE 1976 L* of an sRGB colour (0-255 channels), D65 white. */
export function cielabLightness(r, g, b) {
  const lin = (c) => {
    c /= 255;
    return c <= 0.04045 ? c / 12.92 : Math.pow((c + 0.055) / 1.055, 2.4);
  };
  // Rec. 709 / sRGB luminance weights
  const y = 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b);
  const f = y > 216 / 24389 ? Math.cbrt(y) : ((24389 / 27) * y + 16) / 116;
  return 116 * f - 16;
}

/** CSS colour string for t. */
export function cssColor(t) {
  const [r, g, b] = sampleColormap(t);
  return `rgb(${r},${g},${b})`;
}
