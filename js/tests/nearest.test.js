import test from "node:test";
import assert from "node:assert/strict";
import { buildGridIndex, nearestIndex, nearestIndexBrute } from "../lib/nearest.js";
import { rng, randomPoints } from "./rng.js";

test("grid lookup equals brute force on random queries (different px per unit on x and y)", () => {
  const { xs, ys } = randomPoints(50000, 5, 20);
  xs[10] = NaN;
  ys[20] = NaN;
  const index = buildGridIndex(xs, ys);
  assert.equal(index.order.length, 49998);
  const r = rng(99);
  const kx = 30;
  const ky = -3; // y axis grows downward on screen; sign is ignored
  let found = 0;
  for (let q = 0; q < 500; q++) {
    const qx = (r() * 2 - 1) * 22;
    const qy = (r() * 2 - 1) * 22;
    const a = nearestIndex(index, xs, ys, qx, qy, kx, ky, 12);
    const b = nearestIndexBrute(xs, ys, qx, qy, kx, ky, 12);
    assert.equal(a, b, `query ${qx}, ${qy}`);
    if (a >= 0) found++;
  }
  assert.ok(found > 400);
});

test("nearestIndex returns -1 beyond the pixel radius and for an empty index", () => {
  const xs = Float32Array.from([0, 10]);
  const ys = Float32Array.from([0, 0]);
  const index = buildGridIndex(xs, ys, 4);
  assert.equal(nearestIndex(index, xs, ys, 0.5, 0, 1, 1, 1), 0);
  assert.equal(nearestIndex(index, xs, ys, 5, 0, 1, 1, 1), -1);
  assert.equal(nearestIndex(index, xs, ys, 9.6, 0.2, 1, 1, 1), 1);
  assert.equal(buildGridIndex(Float32Array.from([NaN]), Float32Array.from([1])), null);
  assert.equal(nearestIndex(null, xs, ys, 0, 0, 1, 1, 5), -1);
});

test("degenerate data (all points on a line) still indexes", () => {
  const xs = new Float32Array(100).fill(3);
  const ys = Float32Array.from({ length: 100 }, (_, i) => i);
  const index = buildGridIndex(xs, ys);
  assert.equal(nearestIndex(index, xs, ys, 3.1, 41.2, 10, 10, 5), 41);
});
