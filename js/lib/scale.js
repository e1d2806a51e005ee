// Linear scales, "nice" tick positions and tick labels for the plot axes.
// Pure functions only, so node can test them without a browser.

/**
 * A linear map from a data interval [d0, d1] to a pixel interval [r0, r1].
 * d0 > d1 is allowed (a reversed axis). A zero-width domain is widened by
 * one unit around its value so the map stays finite.
 * Returns {k, b, map(v), invert(px), domain, range} with px = k * v + b.
 */
export function linearScale(d0, d1, r0, r1) {
  if (!Number.isFinite(d0) || !Number.isFinite(d1)) {
    throw new RangeError(`linearScale: domain must be finite, got [${d0}, ${d1}]`);
  }
  if (d0 === d1) {
    d0 -= 0.5;
    d1 += 0.5;
  }
  const k = (r1 - r0) / (d1 - d0);
  const b = r0 - k * d0;
  return {
    k,
    b,
    domain: [d0, d1],
    range: [r0, r1],
    map: (v) => k * v + b,
    invert: (px) => (px - b) / k,
  };
}

/** Tick spacings for angles in degrees spanning 60 deg or more (l at 0/90/180/270/360). */
export const ANGLE_STEPS = [15, 30, 45, 90, 180];

/**
 * The tick spacing 1, 2 or 5 times a power of ten that gives about `count`
 * intervals over `span`; with `angular` (degrees) and a span of 60 deg or
 * more, the one of ANGLE_STEPS that gives the number of intervals closest to
 * `count` (the larger one on a tie).
 */
export function tickStep(span, count = 5, angular = false) {
  span = Math.abs(span);
  if (!(span > 0) || !Number.isFinite(span)) return 1;
  if (angular && span >= 60) {
    let best = ANGLE_STEPS[0];
    for (const step of ANGLE_STEPS) {
      if (Math.abs(span / step - count) <= Math.abs(span / best - count)) best = step;
    }
    return best;
  }
  const raw = span / Math.max(1, count);
  const power = Math.pow(10, Math.floor(Math.log10(raw)));
  const frac = raw / power;
  let nice;
  if (frac < 1.5) nice = 1;
  else if (frac < 3.5) nice = 2;
  else if (frac < 7.5) nice = 5;
  else nice = 10;
  return nice * power;
}

function multiplesInside(lo, hi, step) {
  const i0 = Math.ceil(lo / step - 1e-9);
  const i1 = Math.floor(hi / step + 1e-9);
  const ticks = [];
  for (let i = i0; i <= i1; i++) {
    const v = Number((i * step).toPrecision(12));
    ticks.push(v === 0 ? 0 : v); // no "-0"
  }
  return ticks;
}

/**
 * Tick values inside [min(a, b), max(a, b)] and their spacing: {step, ticks}.
 * Multiples of tickStep, computed as integer multiples of the step (no
 * accumulated round-off) and cleaned to 12 significant digits; at least three
 * ticks whenever the interval is not a point (a finer step is taken if the
 * first gives fewer, so an axis is never labelled at one or two values only).
 */
export function tickValues(a, b, count = 5, angular = false) {
  const lo = Math.min(a, b);
  const hi = Math.max(a, b);
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return { step: 1, ticks: [] };
  if (lo === hi) return { step: 1, ticks: [lo] };
  let step = tickStep(hi - lo, count, angular);
  let ticks = multiplesInside(lo, hi, step);
  for (let finer = 2 * count; ticks.length < 3 && finer <= 64 * Math.max(1, count); finer *= 2) {
    step = tickStep(hi - lo, finer, angular);
    ticks = multiplesInside(lo, hi, step);
  }
  return { step, ticks };
}

/** The tick values of tickValues (see there). */
export function niceTicks(a, b, count = 5, angular = false) {
  return tickValues(a, b, count, angular).ticks;
}

/**
 * Text for a tick value given the tick step: as many decimals as the step
 * needs; exponent notation for very large or very small magnitudes.
 */
export function formatTick(value, step) {
  if (!Number.isFinite(value)) return String(value);
  if (value === 0) return "0";
  const mag = Math.abs(value);
  if (mag >= 1e6 || mag < 1e-4) {
    const digits = Math.max(0, Math.min(6, Math.floor(Math.log10(mag)) - Math.floor(Math.log10(Math.abs(step) || mag))));
    return value.toExponential(digits).replace("e+", "e");
  }
  const decimals = step > 0 ? Math.max(0, Math.min(10, -Math.floor(Math.log10(step) + 1e-9))) : 2;
  return value.toFixed(decimals);
}

/** A value for a read-out: `digits` significant digits, plain or exponent. */
export function formatValue(value, digits = 4) {
  if (value === null || value === undefined || Number.isNaN(value)) return "NaN";
  if (!Number.isFinite(value)) return String(value);
  if (value === 0) return "0";
  const mag = Math.abs(value);
  if (mag >= 1e6 || mag < 1e-3) return value.toExponential(digits - 1).replace("e+", "e");
  return String(Number(value.toPrecision(digits)));
}

/**
 * [min, max] over the finite values of an array; null when there are none.
 */
export function finiteExtent(values) {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v < lo) lo = v; // NaN fails both comparisons and is skipped
    if (v > hi) hi = v;
  }
  return lo <= hi ? [lo, hi] : null;
}

/**
 * Zoom the interval [d0, d1] about `center` by `factor` (< 1 zooms in).
 */
export function zoomDomain(d0, d1, center, factor) {
  return [center + (d0 - center) * factor, center + (d1 - center) * factor];
}

/**
 * Widen one of two domains so both axes show the same data units per pixel.
 * Returns [xDomain, yDomain]; orientation (reversed or not) is kept.
 */
export function equalAspect(xd, yd, width, height) {
  const sx = Math.abs(xd[1] - xd[0]) / width;
  const sy = Math.abs(yd[1] - yd[0]) / height;
  const grow = (d, s, n) => {
    const c = 0.5 * (d[0] + d[1]);
    const half = 0.5 * s * n * Math.sign(d[1] - d[0] || 1);
    return [c - half, c + half];
  };
  if (sx > sy) return [xd.slice(), grow(yd, sx, height)];
  if (sy > sx) return [grow(xd, sy, width), yd.slice()];
  return [xd.slice(), yd.slice()];
}
