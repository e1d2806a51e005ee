import test from "node:test";
import assert from "node:assert/strict";
import {
  CONTROL_POINTS, MISSING_RGB, sampleColormap, buildLut, lutIndex, cielabLightness, cssColor,
} from "../lib/colormap.js";

test("control points span [0, 1] in increasing order", () => {
  assert.equal(CONTROL_POINTS[0][0], 0);
  assert.equal(CONTROL_POINTS[CONTROL_POINTS.length - 1][0], 1);
  for (let i = 1; i < CONTROL_POINTS.length; i++) assert.ok(CONTROL_POINTS[i][0] > CONTROL_POINTS[i - 1][0]);
});

test("ends are dark blue and yellow", () => {
  const [r0, g0, b0] = sampleColormap(0);
  assert.ok(b0 > r0 && b0 > g0 && b0 < 128);
  const [r1, g1, b1] = sampleColormap(1);
  assert.ok(r1 > 200 && g1 > 200 && b1 < 128);
});

test("lightness rises monotonically and nearly evenly (perceptual ramp)", () => {
  // CIE L* per CIE 15:2004 with the sRGB transfer curve (IEC 61966-2-1); white is 100
  assert.ok(Math.abs(cielabLightness(255, 255, 255) - 100) < 1e-9);
  assert.ok(Math.abs(cielabLightness(0, 0, 0)) < 1e-9);
  const lut = buildLut(64);
  const L = [];
  for (let i = 0; i < 64; i++) L.push(cielabLightness(lut[3 * i], lut[3 * i + 1], lut[3 * i + 2]));
  const steps = L.slice(1).map((v, i) => v - L[i]);
  for (const s of steps) assert.ok(s > 0, `lightness must rise, step ${s}`);
  const mean = (L[63] - L[0]) / 63;
  for (const s of steps) assert.ok(s < 2.5 * mean && s > 0.3 * mean, `uneven step ${s} vs mean ${mean}`);
  assert.ok(L[63] - L[0] > 60, "enough lightness range to read values");
});

test("sampleColormap clamps, interpolates and marks NaN", () => {
  assert.deepEqual(sampleColormap(-3), sampleColormap(0));
  assert.deepEqual(sampleColormap(7), sampleColormap(1));
  const p = CONTROL_POINTS[3];
  assert.deepEqual(sampleColormap(p[0]), [p[1], p[2], p[3]]);
  assert.deepEqual(sampleColormap(NaN), [...MISSING_RGB]);
  assert.match(cssColor(0.5), /^rgb\(\d+,\d+,\d+\)$/);
});

test("buildLut has the ends of the map", () => {
  const lut = buildLut(256);
  assert.equal(lut.length, 768);
  assert.deepEqual([...lut.slice(0, 3)], sampleColormap(0));
  assert.deepEqual([...lut.slice(765)], sampleColormap(1));
});

test("lutIndex clamps, handles reversed and empty ranges, -1 for NaN", () => {
  assert.equal(lutIndex(0, 0, 1, 256), 0);
  assert.equal(lutIndex(1, 0, 1, 256), 255);
  assert.equal(lutIndex(0.5, 0, 1, 256), 128);
  assert.equal(lutIndex(-5, 0, 1, 256), 0);
  assert.equal(lutIndex(9, 0, 1, 256), 255);
  assert.equal(lutIndex(1, 1, 0, 256), 0);
  assert.equal(lutIndex(3, 3, 3, 256), 128);
  assert.equal(lutIndex(NaN, 0, 1, 256), -1);
});
