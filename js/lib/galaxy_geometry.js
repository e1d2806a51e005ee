// Geometry of the face-on Galaxy view (data units: kpc and km/s).

/** Arrow tip (kpc) for a velocity (km/s) drawn from `start` at `scale` km/s per kpc. */
export function vectorTip(start, velocity, scale) {
  return [start[0] + velocity[0] / scale, start[1] + velocity[1] / scale];
}

/** Inverse of vectorTip: the velocity (km/s) whose arrow from `start` ends at `tip`. */
export function velocityFromTip(start, tip, scale) {
  return [(tip[0] - start[0]) * scale, (tip[1] - start[1]) * scale];
}

// The arc showing the sense of rotation is computed in Python (mwkin.widgets.views.rotation_arc) and
// sent as rotation_x / rotation_y, so the exported figure draws the same points.
