import test from "node:test";
import assert from "node:assert/strict";
import {
  indicesInRect, indicesInPolygon, pointInPolygon, polygonBounds, simplifyPath,
} from "../lib/lasso.js";
import { randomPoints } from "./rng.js";

test("indicesInRect returns the points inside, in order, any corner order", () => {
  const xs = Float32Array.from([0, 1, 2, 3, NaN, 1.5]);
  const ys = Float32Array.from([0, 1, 2, 3, 1.5, NaN]);
  const got = indicesInRect(xs, ys, 2.5, 0.5, 2.5, 0.5);
  assert.ok(got instanceof Uint32Array);
  assert.deepEqual([...got], [1, 2]);
  assert.deepEqual([...indicesInRect(xs, ys, 0, 3, 0, 3)], [0, 1, 2, 3]); // edges inclusive, NaN out
  assert.equal(indicesInRect(xs, ys, 10, 11, 10, 11).length, 0);
});

test("indicesInRect agrees with a direct filter on random points", () => {
  const { xs, ys } = randomPoints(20000, 7);
  const got = indicesInRect(xs, ys, -0.3, 0.45, -0.8, 0.1);
  const want = [];
  for (let i = 0; i < xs.length; i++) {
    if (xs[i] >= -0.3 && xs[i] <= 0.45 && ys[i] >= -0.8 && ys[i] <= 0.1) want.push(i);
  }
  assert.deepEqual([...got], want);
});

test("pointInPolygon on a concave polygon (an L shape)", () => {
  // L: unit square [0,2]x[0,2] minus the square [1,2]x[1,2]
  const L = [0, 0, 2, 0, 2, 1, 1, 1, 1, 2, 0, 2];
  assert.equal(pointInPolygon(0.5, 0.5, L), true);
  assert.equal(pointInPolygon(1.5, 0.5, L), true);
  assert.equal(pointInPolygon(0.5, 1.5, L), true);
  assert.equal(pointInPolygon(1.5, 1.5, L), false); // the notch
  assert.equal(pointInPolygon(3, 0.5, L), false);
  assert.equal(pointInPolygon(NaN, 0.5, L), false);
  assert.deepEqual(polygonBounds(L), [0, 2, 0, 2]);
});

test("indicesInPolygon: a triangle holds the expected share of uniform points", () => {
  const { xs, ys } = randomPoints(40000, 3);
  // triangle with area 1 of the 4-unit square -> about a quarter of the points
  const tri = Float64Array.from([-1, -1, 1, -1, -1, 1]);
  const got = indicesInPolygon(xs, ys, tri);
  for (const i of got) assert.ok(xs[i] + ys[i] <= 0 + 1e-6);
  const frac = got.length / xs.length;
  assert.ok(Math.abs(frac - 0.5) < 0.02, `fraction ${frac}`); // half-plane x + y < 0 inside the square
  // a square polygon equals the rectangle brush
  const sq = [-0.5, -0.5, 0.5, -0.5, 0.5, 0.5, -0.5, 0.5];
  const a = indicesInPolygon(xs, ys, sq);
  const b = indicesInRect(xs, ys, -0.5, 0.5, -0.5, 0.5);
  assert.ok(Math.abs(a.length - b.length) <= 2); // only points on the edges may differ
  assert.equal(indicesInPolygon(xs, ys, [0, 0, 1, 1]).length, 0); // fewer than 3 vertices
});

test("simplifyPath drops vertices closer than the minimum distance", () => {
  const path = [0, 0, 0.5, 0, 1, 0, 3, 0, 3, 0.2, 3, 4];
  assert.deepEqual([...simplifyPath(path, 2)], [0, 0, 3, 0, 3, 4]);
});
