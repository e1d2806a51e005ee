import test from "node:test";
import assert from "node:assert/strict";
import {
  linearScale, tickStep, tickValues, niceTicks, formatTick, formatValue, finiteExtent, zoomDomain, equalAspect,
} from "../lib/scale.js";

test("linearScale maps ends and inverts", () => {
  const s = linearScale(-10, 30, 0, 400);
  assert.equal(s.map(-10), 0);
  assert.equal(s.map(30), 400);
  assert.equal(s.map(10), 200);
  assert.ok(Math.abs(s.invert(s.map(7.3)) - 7.3) < 1e-12);
});

test("linearScale: reversed pixel range (y axis grows downward)", () => {
  const s = linearScale(0, 1, 300, 0);
  assert.equal(s.map(0), 300);
  assert.equal(s.map(1), 0);
  assert.ok(s.k < 0);
});

test("linearScale: zero-width domain is widened, infinite domain rejected", () => {
  const s = linearScale(5, 5, 0, 100);
  assert.equal(s.map(5), 50);
  assert.throws(() => linearScale(0, Infinity, 0, 1), RangeError);
});

test("tickStep picks 1, 2, 5 times a power of ten", () => {
  assert.equal(tickStep(10, 5), 2);
  assert.equal(tickStep(100, 10), 10);
  assert.equal(tickStep(0.7, 5), 0.1);
  assert.equal(tickStep(3000, 5), 500);
  assert.equal(tickStep(0, 5), 1);
});

test("niceTicks: multiples of the step inside the interval, no float noise", () => {
  assert.deepEqual(niceTicks(0, 10, 5), [0, 2, 4, 6, 8, 10]);
  assert.deepEqual(niceTicks(-0.35, 0.35, 6), [-0.3, -0.2, -0.1, 0, 0.1, 0.2, 0.3]);
  assert.deepEqual(niceTicks(0.1, 0.7, 6), [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7]);
  // reversed interval gives the same ticks
  assert.deepEqual(niceTicks(10, 0, 5), niceTicks(0, 10, 5));
  for (const t of niceTicks(-123.4, 987.6, 7)) assert.ok(t >= -123.4 && t <= 987.6);
  assert.ok(!Object.is(niceTicks(-1, 1, 2)[1], -0));
  assert.deepEqual(niceTicks(NaN, 1), []);
});

test("formatTick uses the decimals the step needs", () => {
  assert.equal(formatTick(0.30000000000000004, 0.1), "0.3");
  assert.equal(formatTick(250, 50), "250");
  assert.equal(formatTick(-1.25, 0.05), "-1.25");
  assert.equal(formatTick(0, 0.1), "0");
  assert.equal(formatTick(2e7, 1e7), "2e7");
  assert.equal(formatTick(2.1e7, 1e6), "2.1e7");
  assert.equal(formatTick(3e-5, 1e-5), "3e-5");
});

test("formatValue gives significant digits and NaN text", () => {
  assert.equal(formatValue(245.6123), "245.6");
  assert.equal(formatValue(NaN), "NaN");
  assert.equal(formatValue(-0.01234), "-0.01234");
  assert.equal(formatValue(12345678), "1.235e7");
});

test("finiteExtent skips NaN and returns null when nothing is finite", () => {
  assert.deepEqual(finiteExtent(Float32Array.from([3, NaN, -2, 7])), [-2, 7]);
  assert.equal(finiteExtent(Float32Array.from([NaN, NaN])), null);
  assert.equal(finiteExtent(new Float32Array(0)), null);
});

test("zoomDomain keeps the centre fixed", () => {
  assert.deepEqual(zoomDomain(0, 10, 2, 0.5), [1, 6]);
  assert.deepEqual(zoomDomain(0, 10, 5, 2), [-5, 15]);
});

test("equalAspect widens the narrower axis and keeps orientation", () => {
  const [xd, yd] = equalAspect([0, 10], [0, 10], 200, 100);
  assert.deepEqual(yd, [0, 10]);
  assert.deepEqual(xd, [-5, 15]); // 20 units over 200 px = 10 units over 100 px
  const [xr] = equalAspect([10, 0], [0, 10], 200, 100);
  assert.deepEqual(xr, [15, -5]);
});

test("tickValues: angles in degrees get 90/45/30-degree ticks; every axis at least three ticks", () => {
  // common practice (no source): longitude axes labelled at 0/90/180/270/360
  assert.deepEqual(niceTicks(0, 360, 4, true), [0, 90, 180, 270, 360]);
  assert.deepEqual(niceTicks(0, 360, 8, true), [0, 45, 90, 135, 180, 225, 270, 315, 360]);
  assert.deepEqual(niceTicks(-90, 90, 6, true), [-90, -60, -30, 0, 30, 60, 90]);
  assert.equal(tickStep(20, 4, true), 5); // below 60 degrees: the usual 1-2-5 steps
  // a narrow axis (count 2 over 0-360) was labelled at 0 and 200 only
  const { step, ticks } = tickValues(0, 360, 2);
  assert.ok(ticks.length >= 3, JSON.stringify(ticks));
  assert.ok(ticks.every((t) => t % step === 0));
  // an axis whose range holds one multiple of the first step (U from -40 to 55 km/s, count 2) still gets three
  assert.ok(tickValues(-40, 55, 2).ticks.length >= 3);
  assert.deepEqual(tickValues(3, 3, 5).ticks, [3]);
});
