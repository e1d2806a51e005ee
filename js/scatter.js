// Sample scatter view for whole star samples (1e4-1e6 points), drawn by pixel
// writes into a canvas. Every setting is read from the model: Python
// (mwkin.widgets.views.SampleScatter) is the only source of defaults.
//
// Interaction: drag pans, the wheel zooms about the pointer, double-click
// resets the view; box and lasso selection from the toolbar, or Shift-drag
// (box) and Alt-drag (lasso) in pan mode. A click without dragging in a
// selection mode, or Escape, clears the selection. The selection goes to
// Python as little-endian uint32 indices in the `selected` Bytes trait.
import { linearScale, finiteExtent, zoomDomain, equalAspect, formatValue, tickValues, formatTick } from "./lib/scale.js";
import { buildLut } from "./lib/colormap.js";
import { indicesInRect, indicesInPolygon, simplifyPath } from "./lib/lasso.js";
import { asFloat32, asUint32, encodeUint32, maskFromIndices } from "./lib/binary.js";
import { binPoints, densityTicks, densityLevel } from "./lib/density.js";
import { buildGridIndex, nearestIndex } from "./lib/nearest.js";
import { clearPixels, drawPoints, drawDensity } from "./lib/raster.js";
import { sizeCanvas, drawAxes, drawColorBar, axisTitle, INK } from "./lib/axes.js";

const LUT = buildLut(256);
const MARGIN = { left: 66, top: 10, bottom: 46, rightBare: 14, rightBar: 96 };
const BAR_WIDTH = 12;
const UNSELECTED_RGB = [205, 205, 205];
const HIGHLIGHT_RGB = [214, 39, 90];
const DRAG_THRESHOLD_PX = 3;

function button(label, title) {
  const b = document.createElement("button");
  b.type = "button";
  b.textContent = label;
  b.title = title;
  b.style.cssText = "font:12px sans-serif;padding:2px 8px;margin-right:4px;border:1px solid #bbb;border-radius:3px;background:#f7f7f7;cursor:pointer";
  return b;
}

function render({ model, el }) {
  // ---- DOM ----
  const root = document.createElement("div");
  root.className = "mwkin-scatter";
  root.style.cssText = "display:inline-block;font:12px sans-serif;color:#333;user-select:none";
  const toolbar = document.createElement("div");
  toolbar.style.cssText = "margin-bottom:4px;display:flex;align-items:center;flex-wrap:wrap";
  const modeButtons = {
    pan: button("Pan / zoom", "Drag to pan, wheel to zoom, double-click to reset"),
    brush: button("Box select", "Drag a rectangle to select stars (or Shift-drag in pan mode)"),
    lasso: button("Lasso", "Draw around stars to select them (or Alt-drag in pan mode)"),
  };
  const resetButton = button("Reset view", "Show the whole sample");
  const clearButton = button("Clear selection", "Select nothing (Escape)");
  for (const b of Object.values(modeButtons)) toolbar.appendChild(b);
  toolbar.appendChild(resetButton);
  toolbar.appendChild(clearButton);
  const stage = document.createElement("div");
  stage.style.cssText = "position:relative";
  const canvas = document.createElement("canvas");
  canvas.className = "mwkin-scatter-plot";
  canvas.style.cssText = "display:block";
  const overlay = document.createElement("canvas");
  overlay.className = "mwkin-scatter-overlay";
  overlay.style.cssText = "position:absolute;left:0;top:0;touch-action:none;outline:none";
  overlay.tabIndex = 0;
  stage.appendChild(canvas);
  stage.appendChild(overlay);
  const status = document.createElement("div");
  status.className = "mwkin-scatter-status";
  status.style.cssText = "margin-top:3px;min-height:1.3em;white-space:nowrap;overflow:hidden;text-overflow:ellipsis";
  const readout = document.createElement("div");
  readout.className = "mwkin-scatter-readout";
  readout.style.cssText = "min-height:1.3em;white-space:nowrap;overflow:hidden;text-overflow:ellipsis;color:#555";
  root.appendChild(toolbar);
  root.appendChild(stage);
  root.appendChild(status);
  root.appendChild(readout);
  el.appendChild(root);
  const ctx = canvas.getContext("2d");
  const octx = overlay.getContext("2d");

  // ---- state derived from the model ----
  let xs = new Float32Array(0);
  let ys = new Float32Array(0);
  let cs = null;
  let nFinite = 0;
  let gridIndex = null; // built lazily on the first hover after a data change
  let selection = new Uint32Array(0);
  let selMask = null;
  let lastSentSelected = null;
  let view = null; // {x: [a, b], y: [a, b]} as drawn (before equal-aspect widening)
  let layout = null; // geometry of the last draw
  let imageData = null;
  let frame = 0;
  let hoverFrame = 0;
  let hoverPos = null;
  let hoverIndex = -1;
  let gesture = null;
  let viewCommitTimer = 0;
  let lastDataMessage = 0;

  function readData() {
    xs = asFloat32(model.get("x"));
    ys = asFloat32(model.get("y"));
    const c = asFloat32(model.get("c"));
    cs = c.length === xs.length && c.length > 0 ? c : null;
    nFinite = 0;
    const n = Math.min(xs.length, ys.length);
    for (let i = 0; i < n; i++) if (Number.isFinite(xs[i]) && Number.isFinite(ys[i])) nFinite++;
    gridIndex = null;
    hoverIndex = -1;
    readSelection();
  }

  function readSelection() {
    const v = model.get("selected");
    selection = asUint32(v);
    selMask = selection.length > 0 ? maskFromIndices(selection, xs.length) : null;
  }

  function readView() {
    const r = model.get("view_range");
    if (Array.isArray(r) && r.length === 4 && r.every(Number.isFinite) && r[0] !== r[1] && r[2] !== r[3]) {
      view = { x: [r[0], r[1]], y: [r[2], r[3]] };
    } else {
      // no usable range from Python: fall back to the data's extent
      const ex = finiteExtent(xs) || [0, 1];
      const ey = finiteExtent(ys) || [0, 1];
      view = { x: ex, y: ey };
    }
  }

  function densityMode() {
    const d = model.get("density");
    if (d === "on") return true;
    if (d === "off") return false;
    return nFinite > model.get("density_threshold");
  }

  function colorRange() {
    const r = model.get("c_range");
    if (Array.isArray(r) && r.length === 2 && r.every(Number.isFinite)) return r;
    return cs ? finiteExtent(cs) || [0, 1] : [0, 1];
  }

  // ---- drawing ----
  function scheduleDraw() {
    if (!frame) frame = requestAnimationFrame(draw);
  }

  function draw() {
    frame = 0;
    const t0 = performance.now();
    const W = model.get("width");
    const H = model.get("height");
    const dense = densityMode();
    const hasBar = dense || cs !== null;
    const right = hasBar ? MARGIN.rightBar : MARGIN.rightBare;
    const rect = { left: MARGIN.left, top: MARGIN.top, width: Math.max(20, W - MARGIN.left - right), height: Math.max(20, H - MARGIN.top - MARGIN.bottom) };
    const dpr = sizeCanvas(canvas, W, H);
    sizeCanvas(overlay, W, H);
    stage.style.width = `${W}px`;
    stage.style.height = `${H}px`;
    let xd = view.x;
    let yd = view.y;
    if (model.get("equal_aspect")) [xd, yd] = equalAspect(xd, yd, rect.width, rect.height);
    // device-pixel maps inside the plot rectangle
    const pw = Math.round(rect.width * dpr);
    const ph = Math.round(rect.height * dpr);
    const sx = linearScale(xd[0], xd[1], 0, pw);
    const sy = linearScale(yd[0], yd[1], ph, 0);
    if (!imageData || imageData.width !== pw || imageData.height !== ph) imageData = ctx.createImageData(pw, ph);
    const pixels = imageData.data;
    clearPixels(pixels, 255, 255, 255);
    const size = Math.max(1, Math.round(model.get("point_size") * dpr));
    const alpha = model.get("opacity");
    const [vmin, vmax] = colorRange();
    let drawn = 0;
    let maxCount = 0;
    if (dense) {
      const bin = Math.max(1, Math.round(model.get("density_bin_px") * dpr));
      const nx = Math.ceil(pw / bin);
      const ny = Math.ceil(ph / bin);
      const grid = binPoints(xs, ys, cs, sx.invert(0), sx.invert(nx * bin), sy.invert(ph), sy.invert(ph - ny * bin), nx, ny);
      maxCount = grid.maxCount;
      drawDensity(pixels, pw, ph, grid, bin, LUT, { vmin, vmax, useValues: cs !== null });
      for (let k = 0; k < grid.counts.length; k++) drawn += grid.counts[k];
      if (selMask) {
        drawPoints(pixels, pw, ph, xs, ys, sx.k, sx.b, sy.k, sy.b, size, 1, { rgb: HIGHLIGHT_RGB, mask: selMask, want: 1 });
      }
    } else if (selMask) {
      drawn += drawPoints(pixels, pw, ph, xs, ys, sx.k, sx.b, sy.k, sy.b, size, alpha * 0.6, { rgb: UNSELECTED_RGB, mask: selMask, want: 0 });
      drawn += drawPoints(pixels, pw, ph, xs, ys, sx.k, sx.b, sy.k, sy.b, size, alpha, { values: cs, vmin, vmax, lut: LUT, mask: selMask, want: 1 });
    } else {
      drawn = drawPoints(pixels, pw, ph, xs, ys, sx.k, sx.b, sy.k, sy.b, size, alpha, { values: cs, vmin, vmax, lut: LUT });
    }
    ctx.setTransform(1, 0, 0, 1, 0, 0);
    ctx.fillStyle = "#fff";
    ctx.fillRect(0, 0, canvas.width, canvas.height);
    ctx.putImageData(imageData, Math.round(rect.left * dpr), Math.round(rect.top * dpr));
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    drawAxes(ctx, rect, xd, yd, axisTitle(model.get("x_label"), model.get("x_unit")), axisTitle(model.get("y_label"), model.get("y_unit")), {
      xAngular: model.get("x_unit") === "deg",
      yAngular: model.get("y_unit") === "deg",
    });
    if (hasBar) {
      const barRect = { left: rect.left + rect.width + 12, top: rect.top, width: BAR_WIDTH, height: rect.height };
      if (dense && cs === null) {
        const ticks = densityTicks(Math.max(1, maxCount)).map((v) => ({ t: densityLevel(v, maxCount), label: String(v) }));
        drawColorBar(ctx, barRect, ticks, "stars per bin");
      } else {
        const span = vmax - vmin || 1;
        const { step, ticks: values } = tickValues(vmin, vmax, 5);
        const ticks = values.map((v) => ({ t: (v - vmin) / span, label: formatTick(v, step) }));
        drawColorBar(ctx, barRect, ticks, axisTitle(model.get("c_label"), model.get("c_unit")) + (dense ? " (bin mean)" : ""));
      }
    }
    layout = { rect, dpr, xd, yd, sx: linearScale(xd[0], xd[1], rect.left, rect.left + rect.width), sy: linearScale(yd[0], yd[1], rect.top + rect.height, rect.top) };
    drawOverlay();
    updateStatus(dense, drawn);
    const count = (model.get("draw_count") || 0) + 1;
    el.dataset.drawCount = String(count);
    el.dataset.drawMs = (performance.now() - t0).toFixed(2);
    el.dataset.mode = dense ? "density" : "points";
    el.dataset.plotRect = JSON.stringify([rect.left, rect.top, rect.width, rect.height]);
    el.dataset.domain = JSON.stringify([xd[0], xd[1], yd[0], yd[1]]);
    if (lastDataMessage) el.dataset.dataToDrawMs = (performance.now() - lastDataMessage).toFixed(2);
    lastDataMessage = 0;
    model.set("draw_count", count);
    model.save_changes();
  }

  function updateStatus(dense, drawn) {
    const n = xs.length;
    const parts = [`${n.toLocaleString("en-US")} stars`];
    if (n - nFinite > 0) parts.push(`${(n - nFinite).toLocaleString("en-US")} without both coordinates (not drawn)`);
    if (dense) parts.push("density shading");
    if (selection.length > 0) parts.push(`${selection.length.toLocaleString("en-US")} selected`);
    status.textContent = parts.join(" · ");
    el.dataset.pointsInView = String(drawn);
  }

  function drawOverlay() {
    const dpr = layout ? layout.dpr : 1;
    octx.setTransform(1, 0, 0, 1, 0, 0);
    octx.clearRect(0, 0, overlay.width, overlay.height);
    if (!layout) return;
    octx.setTransform(dpr, 0, 0, dpr, 0, 0);
    const { rect } = layout;
    octx.save();
    octx.beginPath();
    octx.rect(rect.left, rect.top, rect.width, rect.height);
    octx.clip();
    if (gesture && gesture.kind === "brush" && gesture.moved) {
      const x = Math.min(gesture.x0, gesture.x1);
      const y = Math.min(gesture.y0, gesture.y1);
      octx.fillStyle = "rgba(214,39,90,0.08)";
      octx.strokeStyle = "rgb(214,39,90)";
      octx.setLineDash([4, 3]);
      octx.fillRect(x, y, Math.abs(gesture.x1 - gesture.x0), Math.abs(gesture.y1 - gesture.y0));
      octx.strokeRect(x + 0.5, y + 0.5, Math.abs(gesture.x1 - gesture.x0), Math.abs(gesture.y1 - gesture.y0));
    } else if (gesture && gesture.kind === "lasso" && gesture.path.length >= 4) {
      octx.fillStyle = "rgba(214,39,90,0.08)";
      octx.strokeStyle = "rgb(214,39,90)";
      octx.setLineDash([4, 3]);
      octx.beginPath();
      octx.moveTo(gesture.path[0], gesture.path[1]);
      for (let i = 2; i < gesture.path.length; i += 2) octx.lineTo(gesture.path[i], gesture.path[i + 1]);
      octx.closePath();
      octx.fill();
      octx.stroke();
    }
    if (hoverIndex >= 0 && !gesture) {
      const px = layout.sx.map(xs[hoverIndex]);
      const py = layout.sy.map(ys[hoverIndex]);
      octx.setLineDash([]);
      octx.strokeStyle = INK;
      octx.lineWidth = 1.5;
      octx.beginPath();
      octx.arc(px, py, 5, 0, 2 * Math.PI);
      octx.stroke();
    }
    octx.restore();
  }

  function setReadout() {
    if (hoverIndex < 0) {
      readout.textContent = "";
      delete el.dataset.hoverIndex;
      return;
    }
    const i = hoverIndex;
    const item = (label, unit, v) => `${label || "?"} = ${formatValue(v)}${unit ? " " + unit : ""}`;
    const parts = [`star #${i}`, item(model.get("x_label"), model.get("x_unit"), xs[i]), item(model.get("y_label"), model.get("y_unit"), ys[i])];
    if (cs) parts.push(item(model.get("c_label"), model.get("c_unit"), cs[i]));
    readout.textContent = parts.join("   ");
    el.dataset.hoverIndex = String(i);
  }

  // ---- interaction ----
  function localPos(e) {
    const r = overlay.getBoundingClientRect();
    return [e.clientX - r.left, e.clientY - r.top];
  }

  function inPlot(x, y) {
    if (!layout) return false;
    const { rect } = layout;
    return x >= rect.left && x <= rect.left + rect.width && y >= rect.top && y <= rect.top + rect.height;
  }

  function setSelection(indices, region, t0) {
    if (t0 !== undefined) el.dataset.selectMs = (performance.now() - t0).toFixed(2);
    selection = indices;
    selMask = indices.length > 0 ? maskFromIndices(indices, xs.length) : null;
    lastSentSelected = encodeUint32(indices);
    model.set("selected", lastSentSelected);
    model.set("selection_region", region);
    model.save_changes();
    // wall-clock time the selection left the browser (comparable with the kernel's time.time())
    el.dataset.selectSentAt = String(performance.timeOrigin + performance.now());
    scheduleDraw();
  }

  function commitView() {
    clearTimeout(viewCommitTimer);
    viewCommitTimer = 0;
    model.set("view_range", [view.x[0], view.x[1], view.y[0], view.y[1]]);
    model.save_changes();
  }

  function commitViewSoon() {
    clearTimeout(viewCommitTimer);
    viewCommitTimer = setTimeout(commitView, 300);
  }

  function onPointerDown(e) {
    if (e.button !== 0 || !layout) return;
    const [x, y] = localPos(e);
    if (!inPlot(x, y)) return;
    let kind = model.get("selection_mode");
    if (e.shiftKey) kind = "brush";
    else if (e.altKey) kind = "lasso";
    overlay.setPointerCapture(e.pointerId);
    overlay.focus({ preventScroll: true });
    gesture = { kind, x0: x, y0: y, x1: x, y1: y, moved: false, path: [x, y], view0: { x: view.x.slice(), y: view.y.slice() }, layout0: layout };
    hoverIndex = -1;
    setReadout();
    e.preventDefault();
  }

  function onPointerMove(e) {
    const [x, y] = localPos(e);
    if (!gesture) {
      hoverPos = inPlot(x, y) ? [x, y] : null;
      if (!hoverFrame) hoverFrame = requestAnimationFrame(updateHover);
      return;
    }
    gesture.x1 = x;
    gesture.y1 = y;
    if (Math.hypot(x - gesture.x0, y - gesture.y0) >= DRAG_THRESHOLD_PX) gesture.moved = true;
    if (gesture.kind === "pan") {
      if (!gesture.moved) return;
      const { sx, sy } = gesture.layout0;
      const dx = (x - gesture.x0) / sx.k;
      const dy = (y - gesture.y0) / sy.k;
      view = { x: [gesture.view0.x[0] - dx, gesture.view0.x[1] - dx], y: [gesture.view0.y[0] - dy, gesture.view0.y[1] - dy] };
      scheduleDraw();
    } else {
      if (gesture.kind === "lasso") gesture.path.push(x, y);
      drawOverlay();
    }
  }

  function onPointerUp(e) {
    if (!gesture) return;
    const g = gesture;
    gesture = null;
    const t0 = performance.now();
    if (overlay.hasPointerCapture(e.pointerId)) overlay.releasePointerCapture(e.pointerId);
    if (g.kind === "pan") {
      if (g.moved) commitView();
    } else if (!g.moved) {
      setSelection(new Uint32Array(0), {});
    } else if (g.kind === "brush") {
      const { sx, sy } = g.layout0;
      const xa = sx.invert(g.x0);
      const xb = sx.invert(g.x1);
      const ya = sy.invert(g.y0);
      const yb = sy.invert(g.y1);
      const region = { kind: "box", x: [Math.min(xa, xb), Math.max(xa, xb)], y: [Math.min(ya, yb), Math.max(ya, yb)] };
      setSelection(indicesInRect(xs, ys, xa, xb, ya, yb), region, t0);
    } else if (g.kind === "lasso") {
      const { sx, sy } = g.layout0;
      const screen = simplifyPath(g.path, 2);
      const poly = new Float64Array(screen.length);
      for (let i = 0; i < screen.length; i += 2) {
        poly[i] = sx.invert(screen[i]);
        poly[i + 1] = sy.invert(screen[i + 1]);
      }
      const region = { kind: "lasso", x: Array.from(poly.filter((_, i) => i % 2 === 0)), y: Array.from(poly.filter((_, i) => i % 2 === 1)) };
      setSelection(indicesInPolygon(xs, ys, poly), region, t0);
    }
    drawOverlay();
  }

  function updateHover() {
    hoverFrame = 0;
    let idx = -1;
    if (hoverPos && layout && !gesture) {
      if (!gridIndex) gridIndex = buildGridIndex(xs, ys);
      const { sx, sy } = layout;
      idx = nearestIndex(gridIndex, xs, ys, sx.invert(hoverPos[0]), sy.invert(hoverPos[1]), sx.k, sy.k, model.get("hover_radius_px"));
    }
    if (idx !== hoverIndex) {
      hoverIndex = idx;
      setReadout();
      drawOverlay();
    }
  }

  function onPointerLeave() {
    hoverPos = null;
    if (!hoverFrame) hoverFrame = requestAnimationFrame(updateHover);
  }

  function onWheel(e) {
    if (!layout) return;
    const [x, y] = localPos(e);
    if (!inPlot(x, y)) return;
    e.preventDefault();
    const factor = Math.exp(Math.max(-1, Math.min(1, e.deltaY * 0.002)));
    const { sx, sy } = layout;
    view = { x: zoomDomain(view.x[0], view.x[1], sx.invert(x), factor), y: zoomDomain(view.y[0], view.y[1], sy.invert(y), factor) };
    scheduleDraw();
    commitViewSoon();
  }

  function resetView() {
    const h = model.get("home_range");
    if (Array.isArray(h) && h.length === 4) {
      model.set("view_range", h.slice());
      model.save_changes();
    }
    readView();
    scheduleDraw();
  }

  function onKeyDown(e) {
    if (e.key === "Escape") setSelection(new Uint32Array(0), {});
  }

  function styleModeButtons() {
    const mode = model.get("selection_mode");
    for (const [m, b] of Object.entries(modeButtons)) {
      b.style.background = m === mode ? "#dde6f3" : "#f7f7f7";
      b.style.borderColor = m === mode ? "#6b8fc7" : "#bbb";
    }
    overlay.style.cursor = mode === "pan" ? "grab" : "crosshair";
  }

  const domListeners = [
    [overlay, "pointerdown", onPointerDown],
    [overlay, "pointermove", onPointerMove],
    [overlay, "pointerup", onPointerUp],
    [overlay, "pointercancel", onPointerUp],
    [overlay, "pointerleave", onPointerLeave],
    [overlay, "wheel", onWheel, { passive: false }],
    [overlay, "dblclick", resetView],
    [overlay, "keydown", onKeyDown],
    [resetButton, "click", resetView],
    [clearButton, "click", () => setSelection(new Uint32Array(0), {})],
  ];
  for (const [m, b] of Object.entries(modeButtons)) {
    domListeners.push([b, "click", () => {
      model.set("selection_mode", m);
      model.save_changes();
    }]);
  }
  for (const [target, type, fn, opts] of domListeners) target.addEventListener(type, fn, opts);

  // ---- model listeners (removed by anywidget with the view) ----
  const onData = () => {
    lastDataMessage = performance.now();
    readData();
    scheduleDraw();
  };
  for (const name of ["x", "y", "c"]) model.on(`change:${name}`, onData);
  model.on("change:selected", () => {
    if (model.get("selected") === lastSentSelected) return; // our own change
    readSelection();
    scheduleDraw();
  });
  model.on("change:view_range", () => {
    readView();
    scheduleDraw();
  });
  model.on("change:selection_mode", styleModeButtons);
  for (const name of ["x_label", "y_label", "c_label", "x_unit", "y_unit", "c_unit", "c_range", "width", "height", "point_size", "opacity", "density", "density_threshold", "density_bin_px", "equal_aspect"]) {
    model.on(`change:${name}`, scheduleDraw);
  }

  readData();
  readView();
  styleModeButtons();
  scheduleDraw();

  return () => {
    cancelAnimationFrame(frame);
    cancelAnimationFrame(hoverFrame);
    clearTimeout(viewCommitTimer);
    for (const [target, type, fn, opts] of domListeners) target.removeEventListener(type, fn, opts);
    root.remove();
  };
}

export default { render };
