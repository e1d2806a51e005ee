import test from "node:test";
import assert from "node:assert/strict";
import { asFloat32, asUint32, decodeFloat32LE, encodeUint32, maskFromIndices } from "../lib/binary.js";

function leBytes(values, setter) {
  const dv = new DataView(new ArrayBuffer(4 * values.length));
  values.forEach((v, i) => dv[setter](4 * i, v, true));
  return dv;
}

test("asFloat32 decodes a little-endian DataView without copying", () => {
  const dv = leBytes([1.5, -2.25, NaN, 1e30], "setFloat32");
  const f = asFloat32(dv);
  assert.ok(f instanceof Float32Array);
  assert.equal(f.buffer, dv.buffer); // a view, not a copy
  assert.deepEqual([...f.slice(0, 2)], [1.5, -2.25]);
  assert.ok(Number.isNaN(f[2]));
  assert.ok(Math.abs(f[3] / 1e30 - 1) < 1e-6);
});

test("asFloat32 copies an unaligned view and accepts ArrayBuffer / null", () => {
  const raw = new Uint8Array(4 * 3 + 1);
  const inner = new DataView(raw.buffer, 1, 12);
  [3, 4, 5].forEach((v, i) => inner.setFloat32(4 * i, v, true));
  assert.deepEqual([...asFloat32(inner)], [3, 4, 5]);
  assert.deepEqual([...asFloat32(leBytes([7], "setFloat32").buffer)], [7]);
  assert.equal(asFloat32(null).length, 0);
  assert.equal(asFloat32(new DataView(new ArrayBuffer(0))).length, 0);
  assert.deepEqual([...decodeFloat32LE(inner)], [3, 4, 5]);
});

test("bad buffers raise clear errors", () => {
  assert.throws(() => asFloat32(new DataView(new ArrayBuffer(6))), /not a whole number of 4-byte values/);
  assert.throws(() => asUint32([1, 2, 3]), TypeError);
});

test("encodeUint32 round-trips through asUint32, little-endian on the wire", () => {
  const idx = Uint32Array.from([0, 5, 4294967295, 123456]);
  const dv = encodeUint32(idx);
  assert.ok(dv instanceof DataView);
  assert.equal(dv.byteLength, 16);
  assert.equal(dv.getUint32(4, true), 5);
  assert.equal(dv.getUint32(8, true), 4294967295);
  assert.deepEqual([...asUint32(dv)], [...idx]);
  assert.equal(encodeUint32([]).byteLength, 0);
});

test("maskFromIndices marks the given rows and ignores out-of-range ones", () => {
  assert.deepEqual([...maskFromIndices(Uint32Array.from([0, 3, 9]), 5)], [1, 0, 0, 1, 0]);
});
