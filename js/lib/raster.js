// Point drawing by direct pixel writes into an RGBA buffer (ImageData.data),
// which stays fast at 1e5-1e6 points where one canvas call per point does not.
// Coordinates map to pixels as px = kx * x + bx, py = ky * y + by.
import { lutIndex, MISSING_RGB } from "./colormap.js";
import { densityLevel } from "./density.js";

/** Fill an RGBA buffer with one opaque colour. */
export function clearPixels(pixels, r, g, b) {
  for (let p = 0; p < pixels.length; p += 4) {
    pixels[p] = r;
    pixels[p + 1] = g;
    pixels[p + 2] = b;
    pixels[p + 3] = 255;
  }
}

/**
 * Draw square points of `size` pixels into `pixels` (width x height RGBA),
 * blending with opacity `alpha`. Points with NaN coordinates, or outside,
 * are skipped.
 *
 * opts: {values, vmin, vmax, lut (Uint8Array rgb), rgb (single colour when
 * no values), mask (Uint8Array; when given only points with mask[i] ===
 * want are drawn), want}
 * Returns the number of points drawn.
 */
export function drawPoints(pixels, width, height, xs, ys, kx, bx, ky, by, size, alpha, opts = {}) {
  const { values = null, vmin = 0, vmax = 1, lut = null, rgb = [40, 70, 140], mask = null, want = 1 } = opts;
  const nLut = lut ? lut.length / 3 : 0;
  const n = Math.min(xs.length, ys.length);
  const half = (size - 1) >> 1;
  const a = Math.min(1, Math.max(0, alpha));
  const keep = 1 - a;
  let drawn = 0;
  for (let i = 0; i < n; i++) {
    if (mask !== null && mask[i] !== want) continue;
    const px = Math.floor(kx * xs[i] + bx) - half;
    const py = Math.floor(ky * ys[i] + by) - half;
    // negated so NaN is rejected
    if (!(px > -size && px < width && py > -size && py < height)) continue;
    let r = rgb[0];
    let g = rgb[1];
    let b = rgb[2];
    if (values !== null && nLut > 0) {
      const j = lutIndex(values[i], vmin, vmax, nLut);
      if (j < 0) {
        r = MISSING_RGB[0];
        g = MISSING_RGB[1];
        b = MISSING_RGB[2];
      } else {
        r = lut[3 * j];
        g = lut[3 * j + 1];
        b = lut[3 * j + 2];
      }
    }
    const xa = px < 0 ? 0 : px;
    const xb = px + size > width ? width : px + size;
    const ya = py < 0 ? 0 : py;
    const yb = py + size > height ? height : py + size;
    for (let yy = ya; yy < yb; yy++) {
      let p = 4 * (yy * width + xa);
      for (let xx = xa; xx < xb; xx++, p += 4) {
        pixels[p] = pixels[p] * keep + r * a;
        pixels[p + 1] = pixels[p + 1] * keep + g * a;
        pixels[p + 2] = pixels[p + 2] * keep + b * a;
      }
    }
    drawn++;
  }
  return drawn;
}

/**
 * Paint a density grid (from binPoints, bin (i, j) = pixels [i*binPx, ...)
 * from the left and [j*binPx, ...) from the BOTTOM) into the buffer. Without
 * values the colour encodes the log count; with values (sums / valueCounts)
 * it encodes the bin's mean value and the log count sets the opacity.
 */
export function drawDensity(pixels, width, height, grid, binPx, lut, opts = {}) {
  const { vmin = 0, vmax = 1, useValues = false } = opts;
  const { nx, ny, counts, sums, valueCounts, maxCount } = grid;
  const nLut = lut.length / 3;
  let painted = 0;
  for (let j = 0; j < ny; j++) {
    for (let i = 0; i < nx; i++) {
      const k = j * nx + i;
      const count = counts[k];
      if (count === 0) continue;
      const level = densityLevel(count, maxCount);
      let r;
      let g;
      let b;
      let a;
      if (useValues && sums) {
        const vc = valueCounts[k];
        const li = vc > 0 ? lutIndex(sums[k] / vc, vmin, vmax, nLut) : -1;
        if (li < 0) [r, g, b] = MISSING_RGB;
        else [r, g, b] = [lut[3 * li], lut[3 * li + 1], lut[3 * li + 2]];
        a = 0.3 + 0.7 * level;
      } else {
        const li = Math.min(nLut - 1, Math.floor(level * nLut));
        [r, g, b] = [lut[3 * li], lut[3 * li + 1], lut[3 * li + 2]];
        a = 1;
      }
      const keep = 1 - a;
      const x0 = i * binPx;
      const x1 = Math.min(width, x0 + binPx);
      const yTop = height - (j + 1) * binPx;
      const y0 = Math.max(0, yTop);
      const y1 = Math.min(height, yTop + binPx);
      for (let yy = y0; yy < y1; yy++) {
        let p = 4 * (yy * width + x0);
        for (let xx = x0; xx < x1; xx++, p += 4) {
          pixels[p] = pixels[p] * keep + r * a;
          pixels[p + 1] = pixels[p + 1] * keep + g * a;
          pixels[p + 2] = pixels[p + 2] * keep + b * a;
        }
      }
      painted++;
    }
  }
  return painted;
}
