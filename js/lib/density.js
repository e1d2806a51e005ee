// 2D binning for density shading when points overlap heavily.

/**
 * Count points (and sum an optional value) in an nx-by-ny grid over the
 * data rectangle x in [x0, x1), y in [y0, y1). Bin (i, j) has index
 * j * nx + i, with i counted from x0 and j from y0 (either bound may be the
 * larger one, for reversed axes). Points with NaN or outside are skipped.
 *
 * Returns {nx, ny, counts: Uint32Array, sums: Float64Array|null,
 * valueCounts: Uint32Array|null, maxCount}. valueCounts counts the points of a bin whose value is not
 * NaN, so sums[k] / valueCounts[k] is the mean value in bin k.
 */
export function binPoints(xs, ys, values, x0, x1, y0, y1, nx, ny) {
  const counts = new Uint32Array(nx * ny);
  const sums = values ? new Float64Array(nx * ny) : null;
  const valueCounts = values ? new Uint32Array(nx * ny) : null;
  const fx = nx / (x1 - x0);
  const fy = ny / (y1 - y0);
  const n = Math.min(xs.length, ys.length);
  let maxCount = 0;
  for (let i = 0; i < n; i++) {
    const u = (xs[i] - x0) * fx;
    const v = (ys[i] - y0) * fy;
    // negated test so NaN is rejected too
    if (!(u >= 0 && u < nx && v >= 0 && v < ny)) continue;
    const k = Math.floor(v) * nx + Math.floor(u);
    const c = ++counts[k];
    if (c > maxCount) maxCount = c;
    if (values) {
      const w = values[i];
      if (w === w) {
        sums[k] += w;
        valueCounts[k]++;
      }
    }
  }
  return { nx, ny, counts, sums, valueCounts, maxCount };
}

/**
 * Shading level in [0, 1] for a bin count: log(1 + count) / log(1 + maxCount),
 * so sparse outskirts stay visible next to a dense core.
 */
export function densityLevel(count, maxCount) {
  if (!(count > 0) || !(maxCount > 0)) return 0;
  return Math.log1p(count) / Math.log1p(maxCount);
}

/**
 * Counts to label on a log colour bar: 1, 10, 100 ... up to maxCount, plus
 * maxCount itself when far enough from the last power of ten.
 */
export function densityTicks(maxCount) {
  const ticks = [];
  for (let v = 1; v <= maxCount; v *= 10) ticks.push(v);
  const last = ticks[ticks.length - 1];
  if (maxCount > 1 && maxCount >= 2 * last) ticks.push(maxCount);
  return ticks;
}
