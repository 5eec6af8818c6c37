// The picture with its zones: draw zones by clicking corners, drag points and whole zones,
// place a bolt circle, zoom (wheel, buttons) and pan (drag the background).

import { S, change, snapshot, render, findingsAt, uniqueId } from "./state.js";

const NS = "http://www.w3.org/2000/svg";
const svg = document.getElementById("canvas");
const picture = document.getElementById("picture");
const edge = document.getElementById("frame-edge");
const zonesLayer = document.getElementById("zones");
const handlesLayer = document.getElementById("handles");
const draftLayer = document.getElementById("draft");
const hint = document.getElementById("hint");
const zoomLevel = document.getElementById("zoom-level");
const emptyState = document.getElementById("empty-state");
let failedHref = null;

const HINTS = {
  select: "Click a zone to select it; drag its points or the zone; double-click an edge to add a "
    + "point; Delete removes the selected point (or zone). Drag the background to pan, wheel to zoom.",
  draw: "Click the corners of the new zone; click the first corner again (or press Enter) to "
    + "close it; Esc cancels.",
  circle: "Click the centre of the bolt circle, then one fastener (it becomes number 1; the "
    + "others follow clockwise).",
};

let view = { x: 0, y: 0, w: 640, h: 480 };
let draft = [];
let cursor = null;
let drag = null;
export const circleDraft = { centre: null, first: null };

function svgEl(tag, attrs = {}) {
  const node = document.createElementNS(NS, tag);
  for (const [key, value] of Object.entries(attrs)) node.setAttribute(key, value);
  return node;
}

export function pictureSize() {
  const camera = S.data.camera || {};
  const ok = (v) => Number.isInteger(v) && v > 0;
  return { w: ok(camera.width_px) ? camera.width_px : 640,
           h: ok(camera.height_px) ? camera.height_px : 480 };
}

const round1 = (v) => Math.round(v * 10) / 10;

function toImage(evt) {
  const point = svg.createSVGPoint();
  point.x = evt.clientX;
  point.y = evt.clientY;
  const p = point.matrixTransform(svg.getScreenCTM().inverse());
  return [round1(p.x), round1(p.y)];
}

function screenPerUnit() { return svg.getScreenCTM().a || 1; }

function applyView() {
  svg.setAttribute("viewBox", `${view.x} ${view.y} ${view.w} ${view.h}`);
  const { w } = pictureSize();
  zoomLevel.textContent = `${Math.round((w / view.w) * 100)} %`;
}

export function fit() {
  const { w, h } = pictureSize();
  view = { x: 0, y: 0, w, h };
  applyView();
  render();
}

export function zoom(factor, centre) {
  const c = centre || [view.x + view.w / 2, view.y + view.h / 2];
  const w = Math.min(Math.max(view.w / factor, 20), pictureSize().w * 4);
  const scale = w / view.w;
  view = { x: c[0] - (c[0] - view.x) * scale, y: c[1] - (c[1] - view.y) * scale,
           w, h: view.h * scale };
  applyView();
  render();
}

export function setMode(mode) {
  S.mode = mode;
  draft = [];
  circleDraft.centre = circleDraft.first = null;
  render();
}

function polygonOf(index) {
  const entry = (S.data.zones || [])[index];
  return entry && Array.isArray(entry.polygon) && !entry.bolt_circle ? entry.polygon : null;
}

function drawnZones() {
  // Polygon entries from the document as edited (immediate), bolt circles as last checked.
  const out = [];
  const numbers = new Map((S.check.zones || []).map((z) => [z.id, z]));
  (S.data.zones || []).forEach((entry, index) => {
    const polygon = polygonOf(index);
    if (polygon) {
      const points = polygon.filter((p) => Array.isArray(p) && p.length === 2
        && p.every((v) => typeof v === "number"));
      out.push({ id: String(entry.id ?? "?"), kind: entry.kind, polygon: points, entry: index,
                 generated: false, number: (numbers.get(entry.id) || {}).number,
                 of: (numbers.get(entry.id) || {}).of });
    }
  });
  for (const zone of S.check.zones || []) if (zone.generated) out.push(zone);
  return out;
}

export function renderStage() {
  const { w, h } = pictureSize();
  picture.setAttribute("width", w);
  picture.setAttribute("height", h);
  edge.setAttribute("width", w);
  edge.setAttribute("height", h);
  const ref = (S.data.station || {}).reference_frame;
  const href = ref ? `/api/reference-image?path=${encodeURIComponent(ref)}&v=${S.pictureVersion}` : "";
  // a picture that failed is not asked for again (nor drawn as a broken image) until the
  // reference frame's name or version changes
  if (href !== failedHref && picture.getAttribute("href") !== href) {
    if (href) picture.setAttribute("href", href); else picture.removeAttribute("href");
  }
  emptyState.hidden = Boolean(href) && href !== failedHref;
  svg.setAttribute("class", `mode-${S.mode}`);
  for (const button of document.querySelectorAll("button.mode")) {
    button.classList.toggle("on", button.dataset.mode === S.mode);
  }
  hint.textContent = S.pickFor !== null
    ? `Click fastener zones to add them to step ${S.pickFor + 1} in order; Esc ends.`
    : HINTS[S.mode];
  const unit = 1 / screenPerUnit();
  zonesLayer.replaceChildren();
  for (const zone of drawnZones()) {
    const errors = findingsAt("zones", zone.entry).filter((f) => f.severity === "error");
    const classes = ["zone", ["fastener", "bin", "check"].includes(zone.kind) ? zone.kind : "none"];
    if (zone.generated) classes.push("generated");
    if (!zone.generated && zone.entry === S.selected) classes.push("selected");
    if (errors.length) classes.push("has-error");
    const group = svgEl("g", { class: classes.join(" "), "data-zone": zone.entry,
                                "data-id": zone.id });
    group.append(svgEl("polygon", { points: zone.polygon.map((p) => p.join(",")).join(" "),
                                     "data-zone": zone.entry }));
    if (zone.polygon.length) {
      const cx = zone.polygon.reduce((s, p) => s + p[0], 0) / zone.polygon.length;
      const cy = zone.polygon.reduce((s, p) => s + p[1], 0) / zone.polygon.length;
      const label = svgEl("text", { x: cx, y: cy, "text-anchor": "middle",
                                     "dominant-baseline": "middle",
                                     style: `font-size:${12 * unit}px;stroke-width:${3 * unit}px` });
      // the fastener by its name; its place in the step's order on a second, smaller line
      label.append(svgEl("tspan", { x: cx, dy: zone.number ? `${-0.45}em` : "0" }));
      label.lastChild.textContent = zone.id;
      if (zone.number) {
        const order = svgEl("tspan", { x: cx, dy: "1.15em", class: "order",
                                       style: `font-size:${10 * unit}px` });
        order.textContent = `order ${zone.number} of ${zone.of}`;
        label.append(order);
      }
      group.append(label);
      if (errors.length) {
        const mark = svgEl("text", { x: cx, y: cy - 14 * unit, "text-anchor": "middle",
                                      class: "mark-error",
                                      style: `font-size:${14 * unit}px;stroke-width:${3 * unit}px` });
        mark.textContent = "\u2716";
        group.append(mark);
      }
    }
    zonesLayer.append(group);
  }
  handlesLayer.replaceChildren();
  const polygon = S.selected !== null ? polygonOf(S.selected) : null;
  if (polygon && S.mode === "select") {
    polygon.forEach((p, j) => {
      handlesLayer.append(svgEl("circle", {
        cx: p[0], cy: p[1], r: 5 * unit, "data-vertex": j,
        class: j === S.vertex ? "handle picked" : "handle" }));
    });
  }
  renderDraft(unit);
}

function renderDraft(unit) {
  draftLayer.replaceChildren();
  draftLayer.setAttribute("class", "draft");
  const points = [...draft];
  if (S.mode === "draw" && points.length && cursor) points.push(cursor);
  if (points.length) {
    draftLayer.append(svgEl("polyline", { points: points.map((p) => p.join(",")).join(" ") }));
    for (const p of draft) draftLayer.append(svgEl("circle", { class: "dot", cx: p[0], cy: p[1],
                                                               r: 3.5 * unit }));
  }
  const { centre, first } = circleDraft;
  if (S.mode === "circle" && centre) {
    draftLayer.append(svgEl("circle", { class: "dot", cx: centre[0], cy: centre[1], r: 3 * unit }));
    const other = first || cursor;
    if (other) {
      const r = Math.hypot(other[0] - centre[0], other[1] - centre[1]);
      draftLayer.append(svgEl("circle", { class: "guide", cx: centre[0], cy: centre[1], r }));
      draftLayer.append(svgEl("circle", { class: "dot", cx: other[0], cy: other[1], r: 3 * unit }));
    }
  }
}

export function finishDraft() {
  if (draft.length < 3) return;
  const points = draft;
  draft = [];
  change(() => {
    S.data.zones = S.data.zones || [];
    const kind = document.getElementById("new-kind").value;
    const stem = { fastener: "fastener_", bin: "bin_", check: "check_" }[kind];
    const id = uniqueId(stem, [...(S.check.zones || []), ...S.data.zones].map((z) => z.id));
    S.data.zones.push({ id, kind, polygon: points });
    S.selected = S.data.zones.length - 1;
    S.vertex = null;
    S.mode = "select";
  });
}

export function cancelDraft() {
  draft = [];
  circleDraft.centre = circleDraft.first = null;
  S.pickFor = null;
  render();
}

export function deleteSelection() {
  const polygon = S.selected !== null ? polygonOf(S.selected) : null;
  if (polygon && S.vertex !== null) {
    change(() => { polygon.splice(S.vertex, 1); S.vertex = null; });
  } else if (S.selected !== null) {
    change(() => { S.data.zones.splice(S.selected, 1); S.selected = null; S.vertex = null; });
  }
}

function zoneIndexAt(target) {
  const node = target.closest ? target.closest("[data-zone]") : null;
  return node ? Number(node.getAttribute("data-zone")) : null;
}

function onPointerDown(evt) {
  if (evt.button !== 0 && evt.button !== 1) return;
  svg.focus();
  const at = toImage(evt);
  if (S.mode === "draw" && evt.button === 0) {
    const closeR = 8 / screenPerUnit();
    if (draft.length >= 3 && Math.hypot(at[0] - draft[0][0], at[1] - draft[0][1]) <= closeR) {
      finishDraft();
    } else {
      draft.push(at);
      render();
    }
    return;
  }
  if (S.mode === "circle" && evt.button === 0) {
    if (!circleDraft.centre || circleDraft.first) {
      circleDraft.centre = at;
      circleDraft.first = null;
    } else {
      circleDraft.first = at;
      S.tab = "zones";
    }
    render();
    return;
  }
  const vertex = evt.target.getAttribute && evt.target.getAttribute("data-vertex");
  if (vertex !== null && vertex !== undefined && evt.button === 0) {
    S.vertex = Number(vertex);
    drag = { kind: "vertex", start: at, moved: false };
    render();
  } else {
    const index = evt.button === 0 ? zoneIndexAt(evt.target) : null;
    if (index !== null && S.pickFor !== null) {
      pickZone(index, evt.target);
      return;
    }
    if (index !== null) {
      S.selected = index;
      S.vertex = null;
      drag = polygonOf(index) ? { kind: "zone", start: at, moved: false } : null;
      render();
    } else {
      if (evt.button === 0) { S.selected = null; S.vertex = null; render(); }
      drag = { kind: "pan", startClient: [evt.clientX, evt.clientY], view: { ...view } };
      svg.classList.add("panning");
    }
  }
  svg.setPointerCapture(evt.pointerId);
}

function pickZone(index, target) {
  const node = target.closest("[data-id]");
  const id = node ? node.getAttribute("data-id") : null;
  const step = (S.data.steps || [])[S.pickFor];
  if (!id || !step) return;
  change(() => {
    if (step.kind === "fasten") {
      step.zones = Array.isArray(step.zones) ? step.zones : [];
      if (!step.zones.includes(id)) step.zones.push(id);
    } else {
      step.zone = id;
      S.pickFor = null;
    }
  });
}

function onPointerMove(evt) {
  if (S.mode === "draw" || S.mode === "circle") {
    cursor = toImage(evt);
    if (draft.length || circleDraft.centre) renderDraft(1 / screenPerUnit());
    return;
  }
  if (!drag) return;
  if (drag.kind === "pan") {
    const k = view.w / svg.clientWidth;
    const scale = Math.max(k, view.h / svg.clientHeight);
    view.x = drag.view.x - (evt.clientX - drag.startClient[0]) * scale;
    view.y = drag.view.y - (evt.clientY - drag.startClient[1]) * scale;
    applyView();
    return;
  }
  const at = toImage(evt);
  const polygon = polygonOf(S.selected);
  if (!polygon) return;
  if (!drag.moved) snapshot();
  drag.moved = true;
  change(() => {
    if (drag.kind === "vertex") {
      polygon[S.vertex] = at;
    } else {
      const dx = at[0] - drag.start[0];
      const dy = at[1] - drag.start[1];
      for (const p of polygon) { p[0] = round1(p[0] + dx); p[1] = round1(p[1] + dy); }
      drag.start = at;
    }
  }, { record: false });
}

function onPointerUp(evt) {
  drag = null;
  svg.classList.remove("panning");
  if (svg.hasPointerCapture(evt.pointerId)) svg.releasePointerCapture(evt.pointerId);
}

function onDoubleClick(evt) {
  if (S.mode !== "select") return;
  const index = zoneIndexAt(evt.target);
  const polygon = index !== null ? polygonOf(index) : null;
  if (!polygon || polygon.length < 2) return;
  const at = toImage(evt);
  let best = { d: Infinity, j: 0 };
  polygon.forEach((a, j) => {
    const b = polygon[(j + 1) % polygon.length];
    const [dx, dy] = [b[0] - a[0], b[1] - a[1]];
    const t = Math.max(0, Math.min(1, ((at[0] - a[0]) * dx + (at[1] - a[1]) * dy)
                                      / (dx * dx + dy * dy || 1)));
    const d = Math.hypot(a[0] + t * dx - at[0], a[1] + t * dy - at[1]);
    if (d < best.d) best = { d, j };
  });
  change(() => { polygon.splice(best.j + 1, 0, at); S.vertex = best.j + 1; });
}

function onWheel(evt) {
  evt.preventDefault();
  zoom(evt.deltaY < 0 ? 1.25 : 0.8, toImage(evt));
}

export function installStage() {
  svg.addEventListener("pointerdown", onPointerDown);
  svg.addEventListener("pointermove", onPointerMove);
  svg.addEventListener("pointerup", onPointerUp);
  svg.addEventListener("dblclick", onDoubleClick);
  svg.addEventListener("wheel", onWheel, { passive: false });
  picture.addEventListener("error", async () => {
    failedHref = picture.getAttribute("href");
    picture.removeAttribute("href");
    emptyState.hidden = false;
    try {
      const resp = await fetch(failedHref);
      document.getElementById("empty-tried").textContent = (await resp.json()).error || "";
    } catch (err) { /* the steps above say what to do */ }
  });
  picture.addEventListener("load", () => {
    emptyState.hidden = true;
    picture.dataset.loaded = picture.getAttribute("href");
  });
  document.getElementById("empty-go").addEventListener("click", () => {
    S.tab = "picture"; render();
  });
  for (const button of document.querySelectorAll("button.mode")) {
    button.addEventListener("click", () => setMode(button.dataset.mode));
  }
  document.getElementById("zoom-in").addEventListener("click", () => zoom(1.25));
  document.getElementById("zoom-out").addEventListener("click", () => zoom(0.8));
  document.getElementById("zoom-fit").addEventListener("click", fit);
  fit();
}
