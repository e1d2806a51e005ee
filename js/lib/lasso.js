// Hit-testing for selections over typed arrays of points (data coordinates).
// NaN coordinates never hit (every comparison with NaN is false).

/**
 * Indices of points with x in [min(x0, x1), max(x0, x1)] and y likewise.
 * Returns a Uint32Array in increasing order.
 */
export function indicesInRect(xs, ys, x0, x1, y0, y1) {
  const xlo = Math.min(x0, x1);
  const xhi = Math.max(x0, x1);
  const ylo = Math.min(y0, y1);
  const yhi = Math.max(y0, y1);
  const n = Math.min(xs.length, ys.length);
  const out = new Uint32Array(n);
  let k = 0;
  for (let i = 0; i < n; i++) {
    const x = xs[i];
    const y = ys[i];
    if (x >= xlo && x <= xhi && y >= ylo && y <= yhi) out[k++] = i;
  }
  return out.slice(0, k);
}

/** [xmin, xmax, ymin, ymax] of a flat polygon [x0, y0, x1, y1, ...]. */
export function polygonBounds(poly) {
  let xlo = Infinity;
  let xhi = -Infinity;
  let ylo = Infinity;
  let yhi = -Infinity;
  for (let i = 0; i + 1 < poly.length; i += 2) {
    const x = poly[i];
    const y = poly[i + 1];
    if (x < xlo) xlo = x;
    if (x > xhi) xhi = x;
    if (y < ylo) ylo = y;
    if (y > yhi) yhi = y;
  }
  return [xlo, xhi, ylo, yhi];
}

/**
 * Whether (px, py) is inside the closed polygon (even-odd rule, ray cast
 * toward +x). Points exactly on an edge may fall either side.
 */
export function pointInPolygon(px, py, poly) {
  const m = poly.length >> 1;
  let inside = false;
  for (let i = 0, j = m - 1; i < m; j = i++) {
    const xi = poly[2 * i];
    const yi = poly[2 * i + 1];
    const xj = poly[2 * j];
    const yj = poly[2 * j + 1];
    if (yi > py !== yj > py && px < ((xj - xi) * (py - yi)) / (yj - yi) + xi) {
      inside = !inside;
    }
  }
  return inside;
}

/**
 * Indices of points inside the polygon (flat array, at least 3 vertices).
 * A bounding-box test runs first, so only nearby points pay for the full test.
 */
export function indicesInPolygon(xs, ys, poly) {
  if (poly.length < 6) return new Uint32Array(0);
  const [xlo, xhi, ylo, yhi] = polygonBounds(poly);
  const n = Math.min(xs.length, ys.length);
  const out = new Uint32Array(n);
  let k = 0;
  for (let i = 0; i < n; i++) {
    const x = xs[i];
    const y = ys[i];
    if (x >= xlo && x <= xhi && y >= ylo && y <= yhi && pointInPolygon(x, y, poly)) out[k++] = i;
  }
  return out.slice(0, k);
}

/**
 * Drop polygon vertices closer than minDist to the previous kept vertex,
 * so a lasso drawn by hand keeps a modest number of edges.
 */
export function simplifyPath(poly, minDist) {
  if (poly.length < 4) return Float64Array.from(poly);
  const out = [poly[0], poly[1]];
  const d2 = minDist * minDist;
  for (let i = 2; i + 1 < poly.length; i += 2) {
    const dx = poly[i] - out[out.length - 2];
    const dy = poly[i + 1] - out[out.length - 1];
    if (dx * dx + dy * dy >= d2) out.push(poly[i], poly[i + 1]);
  }
  return Float64Array.from(out);
}
