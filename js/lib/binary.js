// Binary buffers between the kernel and the views. Traits declared as
// traitlets.Bytes arrive as DataView objects; arrays are little-endian
// float32 (coordinates, colour values) or uint32 (indices of stars).

const HOST_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

function asBytes(value) {
  if (value === null || value === undefined) return null;
  if (value instanceof ArrayBuffer) return { buffer: value, byteOffset: 0, byteLength: value.byteLength };
  if (ArrayBuffer.isView(value)) return value; // DataView or any typed array
  throw new TypeError(`expected a binary buffer (DataView/ArrayBuffer/typed array), got ${typeof value}`);
}

function decode(value, Type, getter) {
  const v = asBytes(value);
  if (v === null || v.byteLength === 0) return new Type(0);
  if (v.byteLength % 4 !== 0) {
    throw new RangeError(`buffer of ${v.byteLength} bytes is not a whole number of 4-byte values`);
  }
  const n = v.byteLength / 4;
  if (!HOST_LITTLE_ENDIAN) return decodeLittleEndian(v, Type, getter);
  if (v.byteOffset % 4 === 0) return new Type(v.buffer, v.byteOffset, n);
  // unaligned view: typed arrays need 4-byte alignment, so copy
  return new Type(v.buffer.slice(v.byteOffset, v.byteOffset + v.byteLength));
}

function decodeLittleEndian(v, Type, getter) {
  const dv = new DataView(v.buffer, v.byteOffset, v.byteLength);
  const n = v.byteLength / 4;
  const out = new Type(n);
  for (let i = 0; i < n; i++) out[i] = dv[getter](4 * i, true);
  return out;
}

/** Float32Array view (no copy when aligned) of a little-endian float32 buffer. */
export function asFloat32(value) {
  return decode(value, Float32Array, "getFloat32");
}

/** Uint32Array view (no copy when aligned) of a little-endian uint32 buffer. */
export function asUint32(value) {
  return decode(value, Uint32Array, "getUint32");
}

/** Byte-by-byte decoding that works on any host; used on big-endian hosts, and by tests. */
export function decodeFloat32LE(value) {
  const v = asBytes(value);
  return v === null ? new Float32Array(0) : decodeLittleEndian(v, Float32Array, "getFloat32");
}

/**
 * Little-endian uint32 encoding of indices, as a DataView over a fresh
 * buffer, ready for model.set() on a Bytes trait.
 */
export function encodeUint32(indices) {
  const n = indices.length;
  const buf = new ArrayBuffer(4 * n);
  if (HOST_LITTLE_ENDIAN) {
    new Uint32Array(buf).set(indices);
  } else {
    const dv = new DataView(buf);
    for (let i = 0; i < n; i++) dv.setUint32(4 * i, indices[i], true);
  }
  return new DataView(buf);
}

/** Boolean mask (Uint8Array of 0/1, length n) from indices; out-of-range indices are ignored. */
export function maskFromIndices(indices, n) {
  const mask = new Uint8Array(n);
  for (let i = 0; i < indices.length; i++) {
    const j = indices[i];
    if (j < n) mask[j] = 1;
  }
  return mask;
}
