// Geometry of the face-on Galaxy view (data units: kpc and km/s).

/** Arrow tip (kpc) for a velocity (km/s) drawn from `start` at `scale` km/s per kpc. */
export function vectorTip(start, velocity, scale) {
  return [start[0] + velocity[0] / scale, start[1] + velocity[1] / scale];
}

/** Inverse of vectorTip: the velocity (km/s) whose arrow from `start` ends at `tip`. */
export function velocityFromTip(start, tip, scale) {
  return [(tip[0] - start[0]) * scale, (tip[1] - start[1]) * scale];
}

/**
 * z component of r x v for in-plane r, v: x vy - y vx. Positive means
 * counter-clockwise motion seen from +z (x to the right, y up).
 */
export function angularMomentumZ(r, v) {
  return r[0] * v[1] - r[1] * v[0];
}

/**
 * Points of an arc about the centre that shows the sense of rotation of a
 * body at `position` moving with `velocity`: radius `fraction` times its
 * distance, starting at its azimuth and sweeping `spanDeg` degrees in the
 * direction it moves. Flat Float64Array [x0, y0, x1, y1, ...] (nSeg + 1
 * points), or null when the sense is undefined (at the centre, or radial motion).
 */
export function rotationArc(position, velocity, fraction, spanDeg, nSeg) {
  const r = Math.hypot(position[0], position[1]);
  const lz = angularMomentumZ(position, velocity);
  if (!(r > 0) || !(Math.abs(lz) > 0)) return null;
  const sense = Math.sign(lz);
  const radius = fraction * r;
  const theta0 = Math.atan2(position[1], position[0]);
  const span = (spanDeg * Math.PI) / 180;
  const out = new Float64Array(2 * (nSeg + 1));
  for (let i = 0; i <= nSeg; i++) {
    const theta = theta0 + (sense * span * i) / nSeg;
    out[2 * i] = radius * Math.cos(theta);
    out[2 * i + 1] = radius * Math.sin(theta);
  }
  return out;
}
