// Small deterministic generator for test inputs (mulberry32, common practice (no source)).
export function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function randomPoints(n, seed, scale = 1) {
  const r = rng(seed);
  const xs = new Float32Array(n);
  const ys = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    xs[i] = (r() * 2 - 1) * scale;
    ys[i] = (r() * 2 - 1) * scale;
  }
  return { xs, ys };
}
