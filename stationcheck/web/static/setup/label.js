// The Label tab: click the tool's tip and rear on frames of a recorded video (or mark the tool
// not visible), carry the clicks along by optical flow, review, save as the station's COCO
// dataset, and start the fine-tune. The frame view lives in the picture area.

import { S, api, render } from "./state.js";
import { el, filePicker } from "./dom.js";

const NS = "http://www.w3.org/2000/svg";
const MARGIN = 0.12;  // the view shows this much around the picture: a rear may lie outside
const ZOOM_STEP = 4;
const REVIEW_COUNT = 12;
const GUESS_SCORE = 0.5;  // a weaker guess is not drawn: the model sees no tool there
export const KEYS = [
  ["click", "tip, then rear"], ["Enter / Space", "confirm the shown points"],
  ["N", "tool not visible"], ["\u2192 / D", "next frame"], ["\u2190 / A", "previous frame"],
  ["Z", "zoom in / out at the cursor (or the wheel)"], ["X", "clear this frame's clicks"],
  ["P", "propagate"], ["V", "the whole run in the out-of-view strip shows no tool"],
];

const L = {
  video: "", info: null, order: [], pos: 0, note: null,
  clicked: new Map(),      // frame -> { tip, rear } (tip null: not visible)
  propagated: new Map(),   // frame -> { tip, rear } (tip null: inside a run marked out of view)
  outOfView: [],           // [first, last] runs the engineer marked: the tool stays out of view
  hiddenRuns: [],          // unlabelled runs beside "not visible" clicks, with their strips
  guesses: new Map(),      // frame -> { tip, rear, score, model }
  draft: [],               // points clicked on the current frame so far
  view: null, cursor: null, training: null, busy: false,
};

// ---- the frame view (created here so the page's HTML only gains a tab) ----
const box = el("div", { id: "labeller", hidden: true });
const svg = document.createElementNS(NS, "svg");
svg.setAttribute("id", "label-canvas");
const picture = document.createElementNS(NS, "image");
const marks = document.createElementNS(NS, "g");
svg.append(picture, marks);
const bar = el("div", { id: "label-bar" });
const strip = el("div", { id: "label-strip", title: "propagated labels near this frame" });
const legend = el("div", { id: "label-legend" },
  el("span", { class: "clicked" }, "\u25cf clicked"),
  el("span", { class: "propagated" }, "\u25cb propagated"),
  el("span", { class: "guess" }, "\u25cc model guess (not a label until confirmed)"),
  el("span", { class: "keys" }, KEYS.map(([k, w]) => el("span", {}, el("kbd", {}, k), ` ${w}`))));
const hiddenStrip = el("div", { id: "label-hidden-strip", hidden: true });
box.append(el("div", { id: "label-head" }), svg, legend, bar, strip, hiddenStrip);

function svgEl(tag, attrs) {
  const node = document.createElementNS(NS, tag);
  for (const [key, value] of Object.entries(attrs)) node.setAttribute(key, value);
  return node;
}

const current = () => L.order[L.pos];
const fit = () => {
  const { width_px: w, height_px: h } = L.info;
  L.view = { x: -w * MARGIN, y: -h * MARGIN, w: w * (1 + 2 * MARGIN), h: h * (1 + 2 * MARGIN) };
};
function frameUrl(index) {
  return `/api/label/frame?video=${encodeURIComponent(L.info.video)}&i=${index}`;
}
function toImage(evt) {
  const point = svg.createSVGPoint();
  point.x = evt.clientX;
  point.y = evt.clientY;
  const p = point.matrixTransform(svg.getScreenCTM().inverse());
  return [Math.round(p.x * 10) / 10, Math.round(p.y * 10) / 10];
}

function zoomAt(factor, at) {
  const v = L.view;
  const [cx, cy] = at || [v.x + v.w / 2, v.y + v.h / 2];
  L.view = { x: cx - (cx - v.x) / factor, y: cy - (cy - v.y) / factor, w: v.w / factor,
             h: v.h / factor };
  drawFrame();
}

// What the frame shows: the engineer's clicks, else a stored label, else the model's guess.
function shown(index) {
  if (index === current() && L.draft.length) return { kind: "draft", tip: L.draft[0], rear: L.draft[1] };
  if (L.clicked.has(index)) return { kind: "clicked", ...L.clicked.get(index) };
  if (L.propagated.has(index)) return { kind: "propagated", ...L.propagated.get(index) };
  const guess = L.guesses.get(index);
  if (guess && guess.score >= GUESS_SCORE) return { kind: "guess", ...guess };
  return null;
}

function drawPoints(layer, label, scale) {
  if (!label || !label.tip) return;
  const cls = label.kind === "draft" ? "clicked" : label.kind;
  if (label.rear) {
    layer.append(svgEl("line", { class: `axis ${cls}`, x1: label.tip[0], y1: label.tip[1],
                                 x2: label.rear[0], y2: label.rear[1] }));
  }
  for (const [name, point] of [["tip", label.tip], ["rear", label.rear]]) {
    if (!point) continue;
    layer.append(svgEl("circle", { class: `point ${cls} ${name}`, cx: point[0], cy: point[1],
                                   r: 5 * scale }));
    const text = svgEl("text", { class: `point-name ${cls}`, x: point[0] + 8 * scale,
                                 y: point[1] - 8 * scale, "font-size": 13 * scale });
    text.textContent = name;
    layer.append(text);
  }
}

function drawFrame() {
  if (!L.info) return;
  const index = current();
  box.dataset.frame = String(index);
  const v = L.view;
  svg.setAttribute("viewBox", `${v.x} ${v.y} ${v.w} ${v.h}`);
  picture.setAttribute("width", L.info.width_px);
  picture.setAttribute("height", L.info.height_px);
  picture.setAttribute("href", frameUrl(index));
  marks.replaceChildren(svgEl("rect", { class: "edge", x: 0, y: 0, width: L.info.width_px,
                                        height: L.info.height_px }));
  const scale = v.w / Math.max(1, svg.clientWidth || 800);
  drawPoints(marks, shown(index), scale);
  const label = shown(index);
  const state = L.clicked.has(index) ? (L.clicked.get(index).tip ? "clicked" : "clicked: tool not visible")
    : L.propagated.has(index) ? (L.propagated.get(index).tip ? "propagated" : "marked out of view")
      : L.guesses.has(index) ? (L.guesses.get(index).score >= GUESS_SCORE
        ? `model guess (score ${L.guesses.get(index).score}), press Enter to confirm`
        : `the model sees no tool here (score ${L.guesses.get(index).score}): N if it is out `
          + "of view, else click tip and rear") : "no label";
  document.getElementById("label-head").replaceChildren(
    el("b", {}, `frame ${index}`), ` at ${(index / L.info.fps).toFixed(2)} s \u00b7 `,
    el("span", { id: "label-state" }, label && label.kind === "draft"
      ? `tip clicked, now click the rear` : state),
    ` \u00b7 ${L.pos + 1} of ${L.order.length} in the queue`);
  drawBar();
  drawStrip();
  drawHiddenStrip();
}

function drawBar() {
  const n = L.info.frames || 1;
  const cells = [];
  const mark = (index, cls) => cells.push(el("i", { class: cls,
    style: `left:${(100 * index / n).toFixed(3)}%` }));
  for (const [index, label] of L.propagated) mark(index, label.tip ? "propagated" : "marked-out");
  for (const [index, label] of L.clicked) mark(index, label.tip ? "clicked" : "hidden-tool");
  mark(current(), "here");
  bar.replaceChildren(...cells);
}

function drawStrip() {
  const here = current();
  const near = [...L.propagated.keys()].filter((index) => L.propagated.get(index).tip).sort((a, b) => Math.abs(a - here) - Math.abs(b - here))
    .slice(0, REVIEW_COUNT).sort((a, b) => a - b);
  strip.replaceChildren(...near.map((index) => {
    const label = L.propagated.get(index);
    const thumb = document.createElementNS(NS, "svg");
    thumb.setAttribute("viewBox", `${label.tip[0] - 40} ${label.tip[1] - 40} 80 80`);
    thumb.append(svgEl("image", { href: frameUrl(index), width: L.info.width_px,
                                  height: L.info.height_px }));
    drawPoints(thumb, { kind: "propagated", ...label }, 0.5);
    const cell = el("figure", { "data-frame": index, title: `frame ${index}: open it` }, thumb,
                    el("figcaption", {}, `${index}`));
    cell.addEventListener("click", () => goTo(index));
    return cell;
  }));
}

// The unlabelled run beside a "not visible" frame nearest the current frame, as a strip: the
// engineer looks it over and marks where the tool stays out of view (flow has nothing to follow).
function nearestHiddenRun() {
  const here = current();
  const away = (run) => (here < run.first ? run.first - here : here > run.last ? here - run.last : 0);
  return [...L.hiddenRuns].sort((a, b) => away(a) - away(b))[0] || null;
}

function markOutOfView(first, last) {
  L.outOfView = [...L.outOfView, [first, last]];
  runPropagate();
}

function markFrom(run, index) {
  // from the picked frame to the "not visible" click beside the run (the nearer one if both)
  const toEnd = run.hidden_after && (!run.hidden_before || index - run.first > run.last - index);
  if (toEnd) markOutOfView(index, run.last);
  else markOutOfView(run.first, index);
}

function drawHiddenStrip() {
  const run = nearestHiddenRun();
  hiddenStrip.hidden = !run;
  if (!run) { hiddenStrip.replaceChildren(); return; }
  const beside = [run.hidden_before ? run.first - 1 : null, run.hidden_after ? run.last + 1 : null]
    .filter((i) => i !== null).join(" and ");
  const all = el("button", { id: "label-hidden-all" }, "No tool in any of them (V)");
  all.addEventListener("click", () => markOutOfView(run.first, run.last));
  const cells = run.strip.map((index) => {
    const thumb = document.createElementNS(NS, "svg");
    thumb.setAttribute("viewBox", `0 0 ${L.info.width_px} ${L.info.height_px}`);
    thumb.append(svgEl("image", { href: frameUrl(index), width: L.info.width_px,
                                  height: L.info.height_px }));
    const cell = el("figure", { "data-frame": index,
      title: `frame ${index}: click to mark out of view from here to the "not visible" frame; `
        + "double-click to open it" }, thumb, el("figcaption", {}, `${index}`));
    cell.addEventListener("click", () => markFrom(run, index));
    cell.addEventListener("dblclick", () => goTo(index));
    return cell;
  });
  hiddenStrip.replaceChildren(
    el("p", { class: "note" }, `Frames ${run.first}\u2013${run.last} lie beside the "not visible" `
      + `frame ${beside}; flow cannot follow a tool that is not there. Look them over: click the `
      + "last picture that still shows no tool to mark the frames up to the \"not visible\" one, "
      + "or, if none shows the tool, ", all, `. ${L.hiddenRuns.length} such run(s) left.`),
    el("div", { class: "strip" }, ...cells));
}

// ---- actions ----
async function loadGuess(index) {
  if (L.guesses.has(index) || L.clicked.has(index) || L.propagated.has(index)) return;
  try {
    const out = await api("POST", "/api/label/guess", { data: S.data, video: L.info.video, i: index });
    if (out.tip) L.guesses.set(index, out);
  } catch (err) {
    L.note = { text: `no model guess: ${err.message}`, ok: false };
  }
  if (index === current()) drawFrame();
}

function goTo(index) {
  if (index === current()) return;
  let pos = L.order.indexOf(index);
  if (pos < 0) { L.order.push(index); L.order.sort((a, b) => a - b); pos = L.order.indexOf(index); }
  L.pos = pos;
  L.draft = [];
  drawFrame();
  loadGuess(index);
}

function step(by) {
  if (!L.order.length) return;
  L.pos = Math.max(0, Math.min(L.order.length - 1, L.pos + by));
  L.draft = [];
  drawFrame();
  loadGuess(current());
}

function setClicked(label) {
  const index = current();
  L.clicked.set(index, label);
  L.propagated.delete(index);
  L.draft = [];
  render();
  step(1);
}

function confirm() {
  const index = current();
  const label = shown(index);
  if (!label || !label.tip) return;
  if (label.kind === "draft" && !label.rear) return;
  setClicked({ tip: label.tip, rear: label.rear || null });
}

function clickAt(evt) {
  if (!L.info || evt.button !== 0) return;
  L.draft.push(toImage(evt));
  if (L.draft.length === 2) setClicked({ tip: L.draft[0], rear: L.draft[1] });
  else drawFrame();
}

const labelList = (map, source) => [...map].map(([frame, label]) => ({ frame_index: frame,
  tip: label.tip, rear: label.rear || null, source }));

async function runPropagate() {
  L.busy = true;
  L.note = { text: "propagating\u2026", ok: true };
  render();
  try {
    const out = await api("POST", "/api/label/propagate", { video: L.info.video,
      clicked: labelList(L.clicked, "clicked"), out_of_view: L.outOfView });
    L.propagated = new Map(out.labels.map((l) => [l.frame_index, { tip: l.tip, rear: l.rear }]));
    L.hiddenRuns = out.hidden_runs;
    const marked = out.labels.filter((l) => !l.tip).length;
    const queued = out.queued.filter((i) => !L.clicked.has(i));
    L.order = [...new Set([...L.order, ...queued])].sort((a, b) => a - b);
    const visible = [...L.clicked.values()].filter((l) => l.tip).length;
    L.note = { text: `${out.labels.length - marked} frames propagated from ${L.clicked.size} `
      + `clicked (${visible} with the tool), ${marked} marked out of view; ${queued.length} `
      + "frame(s) where the flow check failed are queued for a click"
      + (out.hidden_runs.length ? `; ${out.hidden_runs.length} run(s) beside "not visible" `
        + "frames to look over (strip below the picture)" : "")
      + (out.smear && out.smear.observations ? `; moving tool: points set ${out.smear.share} `
        + `of a frame's move ahead of the smear, as ${out.smear.observations} moving clicks show`
        : ""), ok: true };
    // next: the middle of the longest unlabelled run (the server lists those first)
    if (queued.length) { L.pos = L.order.indexOf(queued[0]); L.draft = []; loadGuess(current()); }
  } catch (err) {
    L.note = { text: `not propagated: ${err.message}`, ok: false };
  }
  L.busy = false;
  render();
  drawFrame();
}

async function save() {
  try {
    const out = await api("POST", "/api/label/save", { video: L.info.video,
      labels: [...labelList(L.clicked, "clicked"), ...labelList(L.propagated, "propagated")] });
    L.note = { text: `saved ${out.path}: ${out.images} frames, ${out.annotations} with the tool `
      + `(${out.written} new image files)`, ok: true };
  } catch (err) {
    L.note = { text: `not saved: ${err.message}`, ok: false };
  }
  render();
}

// The marks behind stored "not visible" propagated labels: their runs of consecutive frames.
function storedMarks(stored) {
  const frames = stored.filter((l) => l.source !== "clicked" && !l.tip).map((l) => l.frame_index)
    .sort((a, b) => a - b);
  const runs = [];
  for (const index of frames) {
    const last = runs[runs.length - 1];
    if (last && last[1] === index - 1) last[1] = index; else runs.push([index, index]);
  }
  return runs;
}

async function openVideo() {
  L.note = { text: "reading the video\u2026", ok: true };
  render();
  try {
    const info = await api("GET", `/api/label/open?video=${encodeURIComponent(L.video)}`);
    L.info = info;
    L.clicked = new Map();
    L.propagated = new Map();
    L.guesses = new Map();
    L.hiddenRuns = [];
    for (const label of info.stored) {
      (label.source === "clicked" ? L.clicked : L.propagated).set(label.frame_index,
        { tip: label.tip, rear: label.rear });
    }
    L.outOfView = storedMarks(info.stored);
    L.order = [...new Set([...info.proposals, ...L.clicked.keys()])].sort((a, b) => a - b);
    L.pos = 0;
    L.draft = [];
    fit();
    L.note = { text: `${info.frames} frames; ${info.proposals.length} proposed (even in time and `
      + `unlike each other)` + (info.stored.length ? `; ${info.stored.length} stored labels loaded`
        : ""), ok: true };
    setLabelVisible(true);
    loadGuess(current());
  } catch (err) {
    L.note = { text: err.message, ok: false };
  }
  render();
}

// ---- training ----
async function pollTraining() {
  try { L.training = await api("GET", "/api/label/train"); } catch (err) {
    L.training = { running: false, result: { error: err.message }, progress: {} };
  }
  render();
  if (L.training.running || (!L.training.result && L.trainingStarted)) {
    setTimeout(pollTraining, 1000);
  }
}

async function startTraining() {
  try {
    L.training = await api("POST", "/api/label/train", {});
    L.trainingStarted = true;
    pollTraining();
  } catch (err) {
    L.training = { running: false, result: { error: err.message }, progress: {} };
  }
  render();
}

function trainingView() {
  const t = L.training;
  const start = el("button", { id: "train-start", disabled: !!(t && t.running) },
                   "Train this station's model");
  start.addEventListener("click", startTraining);
  const parts = [el("div", { class: "line" }, start)];
  if (!t) return parts;
  const p = t.progress || {};
  if (t.running) {
    const cancel = el("button", { id: "train-cancel" }, "Cancel");
    cancel.addEventListener("click", async () => {
      L.training = await api("POST", "/api/label/train/cancel", {});
      render();
    });
    const left = Number.isFinite(p.left_s) ? `${Math.ceil(p.left_s / 60)} min left`
      + ` (${Math.round(p.left_s)} s)` : "estimating time left";
    parts.push(el("div", { class: "line" },
      el("progress", { id: "train-progress", max: p.max_steps || 1, value: p.step || 0 }),
      el("span", { id: "train-left" }, `${p.phase || "starting"}: ${left}`), cancel));
  } else if (t.result && t.result.done) {
    parts.push(el("p", { class: "note done-note", id: "train-result", role: "status" },
      `\u2714 trained: ${t.result.model}`));
  } else if (t.result && t.result.error) {
    parts.push(el("div", { class: "finding error", id: "train-result", role: "alert" },
      `\u2716 training: ${t.result.error}`));
  }
  return parts;
}

// ---- the panel and the keys ----
export function labelPanel() {
  if (L.training === null) {  // a fine-tune started before the page was (re)loaded
    L.training = { running: false, progress: {}, result: null };
    pollTraining();
  }
  const input = el("input", { name: "label-video", value: L.video, size: 22 });
  input.addEventListener("change", () => { L.video = input.value; });
  const open = el("button", { class: "primary", id: "label-open" }, "Open");
  open.addEventListener("click", openVideo);
  const prop = el("button", { id: "label-propagate", disabled: !L.info || L.busy },
                  "Propagate (P)");
  prop.addEventListener("click", runPropagate);
  const saveButton = el("button", { id: "label-save", disabled: !L.info }, "Save labels");
  saveButton.addEventListener("click", save);
  const hidden = el("button", { id: "label-hidden", disabled: !L.info }, "Tool not visible (N)");
  hidden.addEventListener("click", () => setClicked({ tip: null, rear: null }));
  const note = L.note && (L.note.ok
    ? el("p", { class: "note done-note", id: "label-note", role: "status" }, L.note.text)
    : el("div", { class: "finding error", id: "label-note", role: "alert" }, `\u2716 ${L.note.text}`));
  const jump = el("input", { name: "label-goto", inputmode: "numeric", size: 6,
                            placeholder: "frame" });
  jump.addEventListener("change", () => {
    const index = Number(jump.value);
    if (L.info && Number.isInteger(index) && index >= 0 && index < L.info.frames) goTo(index);
    jump.blur();  // the keys act on the frame again
  });
  const visible = [...L.clicked.values()].filter((l) => l.tip).length;
  return [
    el("h2", {}, "Label the station's tool"),
    el("p", { class: "note" }, "Open a video recorded at this station (stationcheck record). "
      + "For each proposed frame click the tool's tip, then its rear (the rear may lie outside "
      + "the picture), or mark the tool not visible. The model's guess is shown first: Enter "
      + "confirms it. Then propagate: the clicks are carried along the video and frames where "
      + "that is not sure are queued for a click."),
    el("div", { class: "fields" }, el("label", {}, "video (from the config's folder)"),
       el("span", { class: "path-field" }, input, filePicker("video", input, api))),
    el("div", { class: "line" }, open, hidden, prop, saveButton),
    L.info ? el("div", { class: "fields" }, el("label", {}, "go to frame"), jump) : null,
    note,
    L.info ? el("p", { class: "note", id: "label-counts" }, `${L.clicked.size} clicked (${visible} `
      + `with the tool, ${L.clicked.size - visible} not visible), ${L.propagated.size} propagated `
      + `(${[...L.propagated.values()].filter((l) => !l.tip).length} marked out of view). `
      + `Stored in ${L.info.folder || "(save the config first)"}`) : null,
    el("h2", {}, "Train"),
    el("p", { class: "note" }, "Fine-tunes the model on the saved labels (a few minutes on this "
      + "PC); the fitness report then says whether it may go live."),
    ...trainingView(),
  ];
}

export function setLabelVisible(visible) {
  box.hidden = !visible || !L.info;
  if (!box.hidden) drawFrame();
}

export function labelKey(evt) {
  if (!L.info || box.hidden) return false;
  const key = evt.key.length === 1 ? evt.key.toLowerCase() : evt.key;
  const actions = {
    Enter: confirm, " ": confirm, n: () => setClicked({ tip: null, rear: null }),
    ArrowRight: () => step(1), d: () => step(1), ArrowLeft: () => step(-1), a: () => step(-1),
    x: () => { L.clicked.delete(current()); L.draft = []; render(); drawFrame(); },
    v: () => { const run = nearestHiddenRun(); if (run) markOutOfView(run.first, run.last); },
    z: () => { if (L.view.w < L.info.width_px) fit(); else zoomAt(ZOOM_STEP, L.cursor); drawFrame(); },
    p: runPropagate, "0": () => { fit(); drawFrame(); },
  };
  const action = actions[key];
  if (!action) return false;
  evt.preventDefault();
  action();
  return true;
}

export function installLabeller() {
  document.getElementById("canvas-box").append(box);
  svg.addEventListener("mousedown", clickAt);
  svg.addEventListener("mousemove", (evt) => { L.cursor = toImage(evt); });
  svg.addEventListener("wheel", (evt) => {
    evt.preventDefault();
    zoomAt(evt.deltaY < 0 ? 1.25 : 0.8, toImage(evt));
  }, { passive: false });
  window.addEventListener("resize", () => { if (!box.hidden) drawFrame(); });
}
