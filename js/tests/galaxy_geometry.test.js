import test from "node:test";
import assert from "node:assert/strict";
import { vectorTip, velocityFromTip } from "../lib/galaxy_geometry.js";

test("vectorTip and velocityFromTip invert each other", () => {
  const start = [-8.1, 0.3];
  const v = [12.9, 245.6];
  const tip = vectorTip(start, v, 50);
  assert.ok(Math.abs(tip[1] - (0.3 + 245.6 / 50)) < 1e-12);
  const back = velocityFromTip(start, tip, 50);
  assert.ok(Math.abs(back[0] - 12.9) < 1e-9 && Math.abs(back[1] - 245.6) < 1e-9);
});

// The sense-of-rotation arc is Python's now: tests/widgets/test_views.py::test_rotation_arc_*.
