import test from "node:test";
import assert from "node:assert/strict";
import { clearPixels, drawPoints, drawDensity } from "../lib/raster.js";
import { buildLut, sampleColormap, MISSING_RGB } from "../lib/colormap.js";
import { binPoints } from "../lib/density.js";

const W = 10;
const H = 8;
const px = (pixels, x, y) => [...pixels.slice(4 * (y * W + x), 4 * (y * W + x) + 3)];

test("drawPoints writes opaque points at the mapped pixels and skips NaN / outside", () => {
  const pixels = new Uint8ClampedArray(4 * W * H);
  clearPixels(pixels, 255, 255, 255);
  const xs = Float32Array.from([2, NaN, 4, 50]);
  const ys = Float32Array.from([3, 1, NaN, 1]);
  const n = drawPoints(pixels, W, H, xs, ys, 1, 0, 1, 0, 1, 1, { rgb: [10, 20, 30] });
  assert.equal(n, 1);
  assert.deepEqual(px(pixels, 2, 3), [10, 20, 30]);
  const painted = [];
  for (let p = 0; p < W * H; p++) if (pixels[4 * p] !== 255) painted.push(p);
  assert.deepEqual(painted, [3 * W + 2]);
});

test("drawPoints colours by value through the lookup table, grey for NaN values", () => {
  const lut = buildLut(256);
  const pixels = new Uint8ClampedArray(4 * W * H);
  clearPixels(pixels, 255, 255, 255);
  const xs = Float32Array.from([1, 5, 8]);
  const ys = Float32Array.from([1, 1, 1]);
  const vs = Float32Array.from([0, NaN, 1]);
  drawPoints(pixels, W, H, xs, ys, 1, 0, 1, 0, 1, 1, { values: vs, vmin: 0, vmax: 1, lut });
  assert.deepEqual(px(pixels, 1, 1), sampleColormap(0));
  assert.deepEqual(px(pixels, 5, 1), [...MISSING_RGB]);
  assert.deepEqual(px(pixels, 8, 1), sampleColormap(1));
});

test("drawPoints blends with opacity, draws squares of the given size, honours the mask", () => {
  const pixels = new Uint8ClampedArray(4 * W * H);
  clearPixels(pixels, 200, 200, 200);
  drawPoints(pixels, W, H, Float32Array.from([4]), Float32Array.from([4]), 1, 0, 1, 0, 3, 0.5, { rgb: [0, 0, 0] });
  for (const [x, y] of [[3, 3], [4, 4], [5, 5]]) assert.deepEqual(px(pixels, x, y), [100, 100, 100]);
  assert.deepEqual(px(pixels, 6, 4), [200, 200, 200]);
  clearPixels(pixels, 255, 255, 255);
  const mask = Uint8Array.from([0, 1]);
  const n = drawPoints(pixels, W, H, Float32Array.from([1, 2]), Float32Array.from([1, 2]), 1, 0, 1, 0, 1, 1,
    { rgb: [0, 0, 0], mask, want: 1 });
  assert.equal(n, 1);
  assert.deepEqual(px(pixels, 1, 1), [255, 255, 255]);
  assert.deepEqual(px(pixels, 2, 2), [0, 0, 0]);
});

test("drawDensity paints bins counted from the bottom row up", () => {
  const lut = buildLut(16);
  const pixels = new Uint8ClampedArray(4 * W * H);
  clearPixels(pixels, 255, 255, 255);
  // data [0, 10) x [0, 8) into 5 x 4 bins of 2 px; one point in bin (0, 0) = bottom left
  const g = binPoints(Float32Array.from([1]), Float32Array.from([1]), null, 0, 10, 0, 8, 5, 4);
  assert.equal(drawDensity(pixels, W, H, g, 2, lut), 1);
  assert.deepEqual(px(pixels, 0, 7), sampleColormap(1)); // the single bin holds the maximum
  assert.deepEqual(px(pixels, 1, 6), sampleColormap(1));
  assert.deepEqual(px(pixels, 0, 5), [255, 255, 255]);
});
