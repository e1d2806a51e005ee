import test from "node:test";
import assert from "node:assert/strict";
import { binPoints, densityLevel, densityTicks } from "../lib/density.js";
import { randomPoints } from "./rng.js";

test("binPoints counts by hand-checked bins, skipping NaN and outside points", () => {
  const xs = Float32Array.from([0.1, 0.2, 1.5, 1.9, NaN, 5, 0.5]);
  const ys = Float32Array.from([0.1, 0.3, 0.5, 1.5, 0.5, 0.5, NaN]);
  const g = binPoints(xs, ys, null, 0, 2, 0, 2, 2, 2);
  // bins: (0,0) -> 2 points, (1,0) -> 1, (1,1) -> 1
  assert.deepEqual([...g.counts], [2, 1, 0, 1]);
  assert.equal(g.maxCount, 2);
  assert.equal(g.sums, null);
});

test("binPoints sums values and counts the non-NaN ones per bin", () => {
  const xs = Float32Array.from([0.1, 0.2, 0.3, 1.5]);
  const ys = Float32Array.from([0.1, 0.2, 0.3, 0.5]);
  const vs = Float32Array.from([1, 3, NaN, 10]);
  const g = binPoints(xs, ys, vs, 0, 2, 0, 2, 2, 2);
  assert.deepEqual([...g.counts], [3, 1, 0, 0]);
  assert.deepEqual([...g.valueCounts], [2, 1, 0, 0]);
  assert.equal(g.sums[0] / g.valueCounts[0], 2);
  assert.equal(g.sums[1], 10);
});

test("binPoints works with reversed bounds and conserves the count", () => {
  const { xs, ys } = randomPoints(10000, 11);
  const a = binPoints(xs, ys, null, -1, 1, -1, 1, 16, 8);
  const total = a.counts.reduce((s, c) => s + c, 0);
  assert.ok(total >= 9990); // all but points exactly on the upper edges
  const b = binPoints(xs, ys, null, 1, -1, -1, 1, 16, 8);
  // reversing x mirrors the columns
  for (let j = 0; j < 8; j++) for (let i = 0; i < 16; i++) {
    assert.ok(Math.abs(a.counts[j * 16 + i] - b.counts[j * 16 + 15 - i]) <= 1);
  }
});

test("densityLevel is log-scaled in [0, 1]", () => {
  assert.equal(densityLevel(0, 100), 0);
  assert.equal(densityLevel(100, 100), 1);
  assert.ok(Math.abs(densityLevel(9, 99) - 0.5) < 1e-12); // log(10)/log(100)
});

test("densityTicks lists powers of ten up to the maximum", () => {
  assert.deepEqual(densityTicks(1), [1]);
  assert.deepEqual(densityTicks(150), [1, 10, 100]);
  assert.deepEqual(densityTicks(450), [1, 10, 100, 450]);
});
