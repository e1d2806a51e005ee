// Nearest point for hover read-outs: a uniform grid over the data (counting
// sort into cells, O(N) to build), searched only in the cells a pixel radius
// covers. Distances are measured on screen, so axes in different units are
// weighted by their pixels per data unit.

/**
 * Build the grid index of the finite points. `cells` is the number of cells
 * per side (default: about 8 points per cell, at most 2048 per side).
 * Returns null when no point is finite.
 */
export function buildGridIndex(xs, ys, cells) {
  const n = Math.min(xs.length, ys.length);
  let xlo = Infinity;
  let xhi = -Infinity;
  let ylo = Infinity;
  let yhi = -Infinity;
  let valid = 0;
  for (let i = 0; i < n; i++) {
    const x = xs[i];
    const y = ys[i];
    if (!(x === x && y === y) || !Number.isFinite(x) || !Number.isFinite(y)) continue;
    valid++;
    if (x < xlo) xlo = x;
    if (x > xhi) xhi = x;
    if (y < ylo) ylo = y;
    if (y > yhi) yhi = y;
  }
  if (valid === 0) return null;
  const side = cells || Math.max(1, Math.min(2048, Math.ceil(Math.sqrt(valid / 8))));
  const cw = (xhi - xlo) / side || 1;
  const ch = (yhi - ylo) / side || 1;
  const cellOf = new Int32Array(n);
  const starts = new Uint32Array(side * side + 1);
  for (let i = 0; i < n; i++) {
    const x = xs[i];
    const y = ys[i];
    if (!Number.isFinite(x) || !Number.isFinite(y)) {
      cellOf[i] = -1;
      continue;
    }
    const cx = Math.min(side - 1, Math.floor((x - xlo) / cw));
    const cy = Math.min(side - 1, Math.floor((y - ylo) / ch));
    const c = cy * side + cx;
    cellOf[i] = c;
    starts[c + 1]++;
  }
  for (let c = 0; c < side * side; c++) starts[c + 1] += starts[c];
  const fill = starts.slice(0, side * side);
  const order = new Uint32Array(valid);
  for (let i = 0; i < n; i++) {
    const c = cellOf[i];
    if (c >= 0) order[fill[c]++] = i;
  }
  return { x0: xlo, y0: ylo, cw, ch, side, starts, order };
}

/**
 * Index of the point nearest to (qx, qy) within maxPx pixels, or -1.
 * kx, ky are pixels per data unit along x and y (signs ignored).
 */
export function nearestIndex(index, xs, ys, qx, qy, kx, ky, maxPx) {
  if (!index) return -1;
  kx = Math.abs(kx);
  ky = Math.abs(ky);
  const rx = maxPx / kx;
  const ry = maxPx / ky;
  const { x0, y0, cw, ch, side, starts, order } = index;
  const cx0 = Math.max(0, Math.floor((qx - rx - x0) / cw));
  const cx1 = Math.min(side - 1, Math.floor((qx + rx - x0) / cw));
  const cy0 = Math.max(0, Math.floor((qy - ry - y0) / ch));
  const cy1 = Math.min(side - 1, Math.floor((qy + ry - y0) / ch));
  let best = -1;
  let bestD2 = maxPx * maxPx;
  for (let cy = cy0; cy <= cy1; cy++) {
    for (let cx = cx0; cx <= cx1; cx++) {
      const c = cy * side + cx;
      for (let p = starts[c]; p < starts[c + 1]; p++) {
        const i = order[p];
        const dx = (xs[i] - qx) * kx;
        const dy = (ys[i] - qy) * ky;
        const d2 = dx * dx + dy * dy;
        if (d2 < bestD2 || (d2 === bestD2 && best >= 0 && i < best)) {
          bestD2 = d2;
          best = i;
        }
      }
    }
  }
  return best;
}

/** The same answer by scanning every point; the reference for tests. */
export function nearestIndexBrute(xs, ys, qx, qy, kx, ky, maxPx) {
  kx = Math.abs(kx);
  ky = Math.abs(ky);
  let best = -1;
  let bestD2 = maxPx * maxPx;
  for (let i = 0; i < xs.length; i++) {
    const dx = (xs[i] - qx) * kx;
    const dy = (ys[i] - qy) * ky;
    const d2 = dx * dx + dy * dy;
    if (d2 < bestD2) {
      bestD2 = d2;
      best = i;
    }
  }
  return best;
}
