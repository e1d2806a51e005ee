// Axes, tick labels and colour bars drawn on a canvas 2D context, plus the
// pure tick layout they use (tested in node).
import { tickValues, formatTick } from "./scale.js";
import { cssColor } from "./colormap.js";

export const AXIS_FONT = "11px sans-serif";
export const LABEL_FONT = "12px sans-serif";
export const INK = "#333";

/**
 * Ticks of a linear axis: [{value, px, label}] for values between d0 and d1,
 * with px = r0 + (value - d0) * (r1 - r0) / (d1 - d0); `angular` for an axis
 * in degrees (ticks at multiples of 15, 30, 45, 90 or 180 deg).
 */
export function tickLayout(d0, d1, r0, r1, count, angular = false) {
  const { step, ticks } = tickValues(d0, d1, count, angular);
  const k = (r1 - r0) / (d1 - d0);
  return ticks.map((value) => ({
    value,
    px: r0 + (value - d0) * k,
    label: formatTick(value, step),
  }));
}

/** Axis title with its unit in square brackets, e.g. "U [km/s]". */
export function axisTitle(label, unit) {
  label = label || "";
  return unit ? `${label} [${unit}]` : label;
}

/**
 * Size a canvas for CSS size (w, h) at the device pixel ratio; returns the
 * ratio. Only touches the canvas when the size changed (that clears it).
 */
export function sizeCanvas(canvas, w, h) {
  const dpr = (typeof window !== "undefined" && window.devicePixelRatio) || 1;
  const W = Math.max(1, Math.round(w * dpr));
  const H = Math.max(1, Math.round(h * dpr));
  if (canvas.width !== W || canvas.height !== H) {
    canvas.width = W;
    canvas.height = H;
    canvas.style.width = `${w}px`;
    canvas.style.height = `${h}px`;
  }
  return dpr;
}

/**
 * Frame, ticks, tick labels and titles around the plot rectangle
 * (left, top, width, height in CSS px). xd / yd are the data domains
 * shown from left to right and from bottom to top. `options.xAngular` /
 * `options.yAngular` mark an axis in degrees (see tickLayout).
 */
export function drawAxes(ctx, rect, xd, yd, xTitle, yTitle, options = {}) {
  const { left, top, width, height } = rect;
  ctx.save();
  ctx.strokeStyle = INK;
  ctx.fillStyle = INK;
  ctx.lineWidth = 1;
  ctx.strokeRect(left + 0.5, top + 0.5, width - 1, height - 1);
  ctx.font = AXIS_FONT;
  ctx.textAlign = "center";
  ctx.textBaseline = "top";
  // about one labelled tick per 75 px across, per 50 px up (at least three, see tickValues)
  const xt = tickLayout(xd[0], xd[1], left, left + width, Math.max(3, Math.floor(width / 75)), !!options.xAngular);
  for (const t of xt) {
    const x = Math.round(t.px) + 0.5;
    ctx.beginPath();
    ctx.moveTo(x, top + height);
    ctx.lineTo(x, top + height + 5);
    ctx.stroke();
    ctx.fillText(t.label, x, top + height + 7);
  }
  ctx.textAlign = "right";
  ctx.textBaseline = "middle";
  const yt = tickLayout(yd[0], yd[1], top + height, top, Math.max(3, Math.floor(height / 50)), !!options.yAngular);
  for (const t of yt) {
    const y = Math.round(t.px) + 0.5;
    ctx.beginPath();
    ctx.moveTo(left - 5, y);
    ctx.lineTo(left, y);
    ctx.stroke();
    ctx.fillText(t.label, left - 7, y);
  }
  ctx.font = LABEL_FONT;
  ctx.textAlign = "center";
  ctx.textBaseline = "bottom";
  ctx.fillText(xTitle, left + width / 2, top + height + 38);
  ctx.save();
  ctx.translate(left - 46, top + height / 2);
  ctx.rotate(-Math.PI / 2);
  ctx.textBaseline = "bottom";
  ctx.fillText(yTitle, 0, 0);
  ctx.restore();
  ctx.restore();
  return { xTicks: xt, yTicks: yt };
}

/**
 * A vertical colour bar at (left, top, width, height) with labelled ticks.
 * `ticks` is [{t, label}] with t in [0, 1] from bottom to top.
 */
export function drawColorBar(ctx, rect, ticks, title) {
  const { left, top, width, height } = rect;
  ctx.save();
  for (let i = 0; i < height; i++) {
    ctx.fillStyle = cssColor(1 - i / Math.max(1, height - 1));
    ctx.fillRect(left, top + i, width, 1);
  }
  ctx.strokeStyle = INK;
  ctx.fillStyle = INK;
  ctx.strokeRect(left + 0.5, top + 0.5, width - 1, height - 1);
  ctx.font = AXIS_FONT;
  ctx.textAlign = "left";
  ctx.textBaseline = "middle";
  for (const tk of ticks) {
    const y = Math.round(top + (1 - tk.t) * (height - 1)) + 0.5;
    ctx.beginPath();
    ctx.moveTo(left + width, y);
    ctx.lineTo(left + width + 4, y);
    ctx.stroke();
    ctx.fillText(tk.label, left + width + 6, y);
  }
  if (title) {
    ctx.font = LABEL_FONT;
    ctx.save();
    ctx.translate(left + width + 56, top + height / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.textBaseline = "bottom";
    ctx.fillText(title, 0, 0);
    ctx.restore();
  }
  ctx.restore();
}
