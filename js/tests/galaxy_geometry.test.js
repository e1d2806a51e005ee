import test from "node:test";
import assert from "node:assert/strict";
import { vectorTip, velocityFromTip, angularMomentumZ, rotationArc } from "../lib/galaxy_geometry.js";

test("vectorTip and velocityFromTip invert each other", () => {
  const start = [-8.1, 0.3];
  const v = [12.9, 245.6];
  const tip = vectorTip(start, v, 50);
  assert.ok(Math.abs(tip[1] - (0.3 + 245.6 / 50)) < 1e-12);
  const back = velocityFromTip(start, tip, 50);
  assert.ok(Math.abs(back[0] - 12.9) < 1e-9 && Math.abs(back[1] - 245.6) < 1e-9);
});

test("the Sun in astropy's Galactocentric frame rotates clockwise seen from the north Galactic pole", () => {
  // astropy Galactocentric defaults (v4.0): Sun at x = -8.122 kpc moving with
  // v_y = +245.6 km/s (Gravity Collaboration 2018; Drimmel & Poggio 2018) -> Lz < 0
  const sun = [-8.122, 0];
  const vSun = [12.9, 245.6];
  assert.ok(angularMomentumZ(sun, vSun) < 0);
  const arc = rotationArc(sun, vSun, 0.5, 90, 10);
  // starts at the Sun's azimuth at half its distance ...
  assert.ok(Math.abs(arc[0] + 4.061) < 1e-9 && Math.abs(arc[1]) < 1e-9);
  // ... and sweeps toward +y, i.e. from 9 o'clock to 12 o'clock: clockwise
  const last = arc.length - 2;
  assert.ok(Math.abs(arc[last]) < 1e-9 && Math.abs(arc[last + 1] - 4.061) < 1e-9);
  // the arc's own turning is clockwise (negative signed area with the centre)
  let area = 0;
  for (let i = 0; i + 3 < arc.length; i += 2) area += arc[i] * arc[i + 3] - arc[i + 2] * arc[i + 1];
  assert.ok(area < 0);
});

test("rotationArc follows the body's sense and is undefined for radial motion", () => {
  const ccw = rotationArc([5, 0], [0, 100], 1, 90, 4);
  assert.ok(Math.abs(ccw[8]) < 1e-9 && Math.abs(ccw[9] - 5) < 1e-9);
  assert.equal(rotationArc([5, 0], [100, 0], 1, 90, 4), null);
  assert.equal(rotationArc([0, 0], [0, 100], 1, 90, 4), null);
});
