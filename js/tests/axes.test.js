import test from "node:test";
import assert from "node:assert/strict";
import { tickLayout, axisTitle } from "../lib/axes.js";

test("tickLayout places ticks proportionally and labels them", () => {
  const t = tickLayout(0, 10, 100, 300, 5);
  assert.deepEqual(t.map((d) => d.value), [0, 2, 4, 6, 8, 10]);
  assert.deepEqual(t.map((d) => d.px), [100, 140, 180, 220, 260, 300]);
  assert.deepEqual(t.map((d) => d.label), ["0", "2", "4", "6", "8", "10"]);
});

test("tickLayout on a y axis (pixels grow downward) and a reversed domain", () => {
  const t = tickLayout(-1, 1, 200, 0, 2);
  assert.deepEqual(t.map((d) => d.px), [200, 100, 0]);
  const r = tickLayout(360, 0, 0, 360, 4);
  assert.equal(r.find((d) => d.value === 300).px, 60);
  assert.equal(r.find((d) => d.value === 0).px, 360);
});

test("axisTitle adds the unit in brackets", () => {
  assert.equal(axisTitle("U", "km/s"), "U [km/s]");
  assert.equal(axisTitle("l", ""), "l");
  assert.equal(axisTitle("", null), "");
});
