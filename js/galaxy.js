// Face-on Galaxy view for one star's orbit: the Galactocentric x-y plane
// (kpc, astropy's Galactocentric frame: the Sun near x = -R0), the Sun, the
// Galactic centre, an arrow giving the sense of Galactic rotation (taken from
// the Sun's own motion, so it is clockwise seen from the north Galactic pole
// in this frame), the orbit track and the star with a velocity arrow.
//
// Dragging the arrow tip sets a new in-plane initial velocity
// (velocity_xy, km/s; arrow_scale km/s per kpc of arrow). While dragging the
// view sends at most one update per animation frame and the final value on
// release; `dragging` is true meanwhile. The kernel integrates the orbit and
// sends back track_x / track_y. Python owns every default.
import { linearScale, equalAspect, zoomDomain, formatValue } from "./lib/scale.js";
import { asFloat32 } from "./lib/binary.js";
import { sizeCanvas, drawAxes, axisTitle, INK } from "./lib/axes.js";
import { vectorTip, velocityFromTip } from "./lib/galaxy_geometry.js";

const MARGIN = { left: 64, top: 10, right: 14, bottom: 46 };
const TIP_HIT_PX = 10;

function polyline(ctx, xs, ys, sx, sy) {
  // NaN separates tracks: lift the pen there
  const n = Math.min(xs.length, ys.length);
  let pen = false;
  ctx.beginPath();
  for (let i = 0; i < n; i++) {
    const x = xs[i];
    const y = ys[i];
    if (!Number.isFinite(x) || !Number.isFinite(y)) {
      pen = false;
      continue;
    }
    if (pen) ctx.lineTo(sx.map(x), sy.map(y));
    else ctx.moveTo(sx.map(x), sy.map(y));
    pen = true;
  }
  ctx.stroke();
}

function label(ctx, text, x, y, align, baseline, color) {
  // white halo keeps labels readable over the tracks
  ctx.save();
  ctx.font = "11px sans-serif";
  ctx.textAlign = align;
  ctx.textBaseline = baseline;
  ctx.lineWidth = 3;
  ctx.strokeStyle = "rgba(255,255,255,0.9)";
  ctx.strokeText(text, x, y);
  ctx.fillStyle = color;
  ctx.fillText(text, x, y);
  ctx.restore();
}

function arrow(ctx, x0, y0, x1, y1, head) {
  const a = Math.atan2(y1 - y0, x1 - x0);
  ctx.beginPath();
  ctx.moveTo(x0, y0);
  ctx.lineTo(x1, y1);
  ctx.stroke();
  ctx.beginPath();
  ctx.moveTo(x1, y1);
  ctx.lineTo(x1 - head * Math.cos(a - 0.4), y1 - head * Math.sin(a - 0.4));
  ctx.lineTo(x1 - head * Math.cos(a + 0.4), y1 - head * Math.sin(a + 0.4));
  ctx.closePath();
  ctx.fill();
}

function render({ model, el }) {
  const root = document.createElement("div");
  root.className = "mwkin-galaxy";
  root.style.cssText = "display:inline-block;font:12px sans-serif;color:#333;user-select:none";
  const canvas = document.createElement("canvas");
  canvas.className = "mwkin-galaxy-plot";
  canvas.style.cssText = "display:block;touch-action:none";
  const readout = document.createElement("div");
  readout.className = "mwkin-galaxy-readout";
  // wraps within the canvas width (a long line was clipped in narrow layouts)
  readout.style.cssText = "margin-top:3px;min-height:1.3em;white-space:normal";
  root.appendChild(canvas);
  root.appendChild(readout);
  el.appendChild(root);
  const ctx = canvas.getContext("2d");

  let track = { x: new Float32Array(0), y: new Float32Array(0) };
  let cloud = { x: new Float32Array(0), y: new Float32Array(0) };
  let view = null;
  let layout = null;
  let frame = 0;
  let sendFrame = 0;
  let drag = null; // {kind: "tip" | "pan", ...}
  let localVelocity = null; // shown while dragging, ahead of the model
  let pendingVelocity = null;

  function readTracks() {
    track = { x: asFloat32(model.get("track_x")), y: asFloat32(model.get("track_y")) };
    cloud = { x: asFloat32(model.get("cloud_x")), y: asFloat32(model.get("cloud_y")) };
  }

  function readView() {
    const r = model.get("view_range");
    view = { x: [r[0], r[1]], y: [r[2], r[3]] };
  }

  function velocity() {
    return localVelocity || model.get("velocity_xy");
  }

  function scheduleDraw() {
    if (!frame) frame = requestAnimationFrame(draw);
  }

  function draw() {
    frame = 0;
    const W = model.get("width");
    const H = model.get("height");
    const dpr = sizeCanvas(canvas, W, H);
    readout.style.maxWidth = `${W}px`;
    const rect = { left: MARGIN.left, top: MARGIN.top, width: W - MARGIN.left - MARGIN.right, height: H - MARGIN.top - MARGIN.bottom };
    const [xd, yd] = equalAspect(view.x, view.y, rect.width, rect.height);
    const sx = linearScale(xd[0], xd[1], rect.left, rect.left + rect.width);
    const sy = linearScale(yd[0], yd[1], rect.top + rect.height, rect.top);
    layout = { rect, sx, sy, xd, yd };
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#fff";
    ctx.fillRect(0, 0, W, H);
    ctx.save();
    ctx.beginPath();
    ctx.rect(rect.left, rect.top, rect.width, rect.height);
    ctx.clip();
    // every colour, and the arc of the sense of rotation, come from Python (one palette, one drawing
    // shared with the exported figure)
    const COLORS = model.get("colors");
    ctx.lineWidth = 1;
    ctx.strokeStyle = COLORS.cloud;
    ctx.globalAlpha = model.get("cloud_opacity");
    polyline(ctx, cloud.x, cloud.y, sx, sy);
    ctx.globalAlpha = 1;
    ctx.lineWidth = 1.5;
    ctx.strokeStyle = COLORS.track;
    polyline(ctx, track.x, track.y, sx, sy);
    const sun = model.get("sun_xy");
    const arcX = asFloat32(model.get("rotation_x"));
    const arcY = asFloat32(model.get("rotation_y"));
    const m = Math.min(arcX.length, arcY.length);
    if (m >= 2) {
      ctx.strokeStyle = COLORS.rotation;
      ctx.fillStyle = COLORS.rotation;
      ctx.lineWidth = 2;
      polyline(ctx, arcX, arcY, sx, sy);
      arrow(ctx, sx.map(arcX[m - 2]), sy.map(arcY[m - 2]), sx.map(arcX[m - 1]), sy.map(arcY[m - 1]), 10);
      // label just beyond the arrow head, pushed away from the centre
      label(ctx, "Galactic rotation", sx.map(arcX[m - 1] * 1.12), sy.map(arcY[m - 1] * 1.12), "center", "middle", COLORS.rotation);
    }
    // Galactic centre
    const gx = sx.map(0);
    const gy = sy.map(0);
    ctx.strokeStyle = COLORS.centre;
    ctx.lineWidth = 2;
    ctx.beginPath();
    ctx.moveTo(gx - 6, gy);
    ctx.lineTo(gx + 6, gy);
    ctx.moveTo(gx, gy - 6);
    ctx.lineTo(gx, gy + 6);
    ctx.stroke();
    label(ctx, "Galactic centre", gx + 8, gy + 4, "left", "top", COLORS.centre);
    // Sun: circle with a dot
    const px = sx.map(sun[0]);
    const py = sy.map(sun[1]);
    ctx.strokeStyle = COLORS.sun;
    ctx.fillStyle = COLORS.sun;
    ctx.lineWidth = 1.5;
    ctx.beginPath();
    ctx.arc(px, py, 6, 0, 2 * Math.PI);
    ctx.stroke();
    ctx.beginPath();
    ctx.arc(px, py, 1.8, 0, 2 * Math.PI);
    ctx.fill();
    label(ctx, "Sun", px - 8, py + 4, "right", "top", INK);
    // star and its velocity arrow
    const star = model.get("star_xy");
    const v = velocity();
    const scale = model.get("arrow_scale");
    const tip = vectorTip(star, v, scale);
    const s0 = [sx.map(star[0]), sy.map(star[1])];
    const s1 = [sx.map(tip[0]), sy.map(tip[1])];
    ctx.strokeStyle = COLORS.arrow;
    ctx.fillStyle = COLORS.arrow;
    ctx.lineWidth = 2;
    arrow(ctx, s0[0], s0[1], s1[0], s1[1], 10);
    if (model.get("editable")) {
      ctx.lineWidth = 1.5;
      ctx.fillStyle = drag && drag.kind === "tip" ? COLORS.arrow : "#fff";
      ctx.beginPath();
      ctx.arc(s1[0], s1[1], 5, 0, 2 * Math.PI);
      ctx.fill();
      ctx.stroke();
    }
    ctx.fillStyle = COLORS.star;
    ctx.beginPath();
    ctx.arc(s0[0], s0[1], 4, 0, 2 * Math.PI);
    ctx.fill();
    ctx.restore();
    drawAxes(ctx, rect, xd, yd, axisTitle("x", "kpc"), axisTitle("y", "kpc"));
    layout.tipPx = s1;
    const speed = Math.hypot(v[0], v[1]);
    readout.textContent = `initial velocity in the plane: v_x = ${formatValue(v[0])} km/s, v_y = ${formatValue(v[1])} km/s, |v| = ${formatValue(speed)} km/s` + (model.get("editable") ? "   (drag the arrow tip to change it)" : "");
    const count = (model.get("draw_count") || 0) + 1;
    el.dataset.drawCount = String(count);
    el.dataset.tip = JSON.stringify(s1);
    el.dataset.trackPoints = String(track.x.length);
    el.dataset.pxPerKpc = String(sx.k);
    const last = track.x.length - 1;
    el.dataset.trackEnd = last >= 0 ? JSON.stringify([track.x[last], track.y[last]]) : "[]";
    model.set("draw_count", count);
    model.save_changes();
  }

  // ---- coalesced sending of the velocity ----
  function flushVelocity() {
    sendFrame = 0;
    if (!pendingVelocity) return;
    model.set("velocity_xy", pendingVelocity);
    pendingVelocity = null;
    model.save_changes();
  }

  function queueVelocity(v) {
    pendingVelocity = v;
    if (!sendFrame) sendFrame = requestAnimationFrame(flushVelocity);
  }

  function localPos(e) {
    const r = canvas.getBoundingClientRect();
    return [e.clientX - r.left, e.clientY - r.top];
  }

  function nearTip(x, y) {
    return layout && layout.tipPx && Math.hypot(x - layout.tipPx[0], y - layout.tipPx[1]) <= TIP_HIT_PX;
  }

  function onPointerDown(e) {
    if (e.button !== 0 || !layout) return;
    const [x, y] = localPos(e);
    canvas.setPointerCapture(e.pointerId);
    if (model.get("editable") && nearTip(x, y)) {
      // keep the grab offset so the tip does not jump to the pointer
      drag = { kind: "tip", dx: x - layout.tipPx[0], dy: y - layout.tipPx[1] };
      model.set("dragging", true);
      model.save_changes();
    } else {
      drag = { kind: "pan", x0: x, y0: y, view0: { x: view.x.slice(), y: view.y.slice() }, sx: layout.sx, sy: layout.sy };
    }
    e.preventDefault();
    scheduleDraw();
  }

  function onPointerMove(e) {
    const [x, y] = localPos(e);
    if (!drag) {
      canvas.style.cursor = model.get("editable") && nearTip(x, y) ? "grab" : "default";
      return;
    }
    if (drag.kind === "tip") {
      const p = [layout.sx.invert(x - drag.dx), layout.sy.invert(y - drag.dy)];
      localVelocity = velocityFromTip(model.get("star_xy"), p, model.get("arrow_scale"));
      queueVelocity(localVelocity);
    } else {
      const dx = (x - drag.x0) / drag.sx.k;
      const dy = (y - drag.y0) / drag.sy.k;
      view = { x: [drag.view0.x[0] - dx, drag.view0.x[1] - dx], y: [drag.view0.y[0] - dy, drag.view0.y[1] - dy] };
    }
    scheduleDraw();
  }

  function onPointerUp(e) {
    if (!drag) return;
    const kind = drag.kind;
    drag = null;
    if (canvas.hasPointerCapture(e.pointerId)) canvas.releasePointerCapture(e.pointerId);
    if (kind === "tip") {
      cancelAnimationFrame(sendFrame);
      sendFrame = 0;
      const final = localVelocity || model.get("velocity_xy");
      pendingVelocity = null;
      localVelocity = null;
      model.set("velocity_xy", final);
      model.set("dragging", false);
      model.save_changes();
    } else {
      model.set("view_range", [view.x[0], view.x[1], view.y[0], view.y[1]]);
      model.save_changes();
    }
    scheduleDraw();
  }

  function onWheel(e) {
    if (!layout) return;
    e.preventDefault();
    const [x, y] = localPos(e);
    const factor = Math.exp(Math.max(-1, Math.min(1, e.deltaY * 0.002)));
    view = { x: zoomDomain(view.x[0], view.x[1], layout.sx.invert(x), factor), y: zoomDomain(view.y[0], view.y[1], layout.sy.invert(y), factor) };
    scheduleDraw();
  }

  const domListeners = [
    [canvas, "pointerdown", onPointerDown],
    [canvas, "pointermove", onPointerMove],
    [canvas, "pointerup", onPointerUp],
    [canvas, "pointercancel", onPointerUp],
    [canvas, "wheel", onWheel, { passive: false }],
  ];
  for (const [t, type, fn, opts] of domListeners) t.addEventListener(type, fn, opts);

  const onTracks = () => {
    readTracks();
    scheduleDraw();
  };
  for (const name of ["track_x", "track_y", "cloud_x", "cloud_y"]) model.on(`change:${name}`, onTracks);
  model.on("change:view_range", () => {
    readView();
    scheduleDraw();
  });
  for (const name of ["star_xy", "velocity_xy", "sun_xy", "sun_velocity_xy", "arrow_scale", "width", "height", "editable",
                      "colors", "cloud_opacity", "rotation_x", "rotation_y"]) {
    model.on(`change:${name}`, scheduleDraw);
  }

  readTracks();
  readView();
  scheduleDraw();

  return () => {
    cancelAnimationFrame(frame);
    cancelAnimationFrame(sendFrame);
    for (const [t, type, fn, opts] of domListeners) t.removeEventListener(type, fn, opts);
    root.remove();
  };
}

export default { render };
