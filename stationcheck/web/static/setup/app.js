// The setup page: loads the config, wires the tabs, the top bar, keys, checking and saving.

import { S, api, onRender, render, undo } from "./state.js";
import { el, findingList } from "./dom.js";
import { installStage, renderStage, finishDraft, cancelDraft, deleteSelection, setMode, zoom,
         fit } from "./stage.js";
import { zonesPanel } from "./zones_panel.js";
import { stepsPanel } from "./steps_panel.js";
import { picturePanel, teachPanel, dryRunPanel, isTeachFinding, forgetPaths }
  from "./source_panels.js";
import { installPlayer, setPlayerVisible } from "./player.js";
import { installLabeller, labelKey, labelPanel, setLabelVisible } from "./label.js";

const PANELS = { picture: picturePanel, zones: zonesPanel, steps: stepsPanel, teach: teachPanel,
                 dryrun: dryRunPanel, label: labelPanel };
// Which tab shows the findings under each top-level key (the rest go below the panel).
const TAB_OF = { zones: "zones", steps: "steps", thresholds: "steps", station: "picture",
                 camera: "picture" };
const panel = document.getElementById("panel");
const summary = document.getElementById("check-summary");
const saveNote = document.getElementById("save-note");

function renderTop() {
  document.getElementById("file-name").textContent = S.configPath || "(new config, not saved)";
  const check = S.check;
  const meaning = check.errors ? "fault" : check.warnings ? "abnormal" : "normal";
  const symbol = check.errors ? "\u2716" : check.warnings ? "!" : "\u2714";
  const words = check.errors
    ? `NOT usable: ${check.errors} error(s), ${check.warnings} warning(s)`
    : check.warnings ? `usable with ${check.warnings} warning(s)` : "OK, no findings";
  summary.className = `badge meaning-${meaning}`;
  summary.textContent = `${symbol} ${words}`;
  summary.title = check.summary || "";
  renderModelBadge(check.model);
  document.getElementById("undo").disabled = S.undo.length === 0;
  document.title = `${S.dirty ? "* " : ""}stationcheck setup`;
}

// Whether the station's model was proven on this station (its fitness report); the words
// carry the meaning, the colour doubles it (IEC 60073: green normal, yellow abnormal, red fault).
const MODEL_WORDS = {
  fit: ["normal", "\u2714", "model fit"],
  demo: ["neutral", "i", "demo model"],
  unproven: ["abnormal", "!", "model UNPROVEN"],
  unfit: ["fault", "\u2716", "model NOT FIT"],
};
function renderModelBadge(model) {
  const badge = document.getElementById("model-badge");
  if (!model) { badge.hidden = true; return; }
  const [meaning, symbol, words] = MODEL_WORDS[model.state] || MODEL_WORDS.unproven;
  const f = model.fitness;
  const figures = f && f.tip_p95_px != null
    ? `\nheld out: tip p95 ${f.tip_p95_px.toFixed(1)} px (inner radius ${f.inner_radius_px.toFixed(1)} px), `
      + `misses ${(100 * (f.miss_rate || 0)).toFixed(1)} %, `
      + `false detections ${(100 * (f.false_detection_rate || 0)).toFixed(1)} %`
    : "";
  badge.hidden = false;
  badge.className = `badge meaning-${meaning}`;
  badge.textContent = `${symbol} ${words}`;
  badge.title = model.message + figures;
}

function renderTabs() {
  for (const button of document.querySelectorAll("#tabs button")) {
    const tab = button.dataset.tab;
    button.classList.toggle("on", tab === S.tab);
    button.setAttribute("aria-selected", String(tab === S.tab));
    const count = S.check.findings.filter((f) => TAB_OF[f.where[0]] === tab).length;
    button.replaceChildren(button.dataset.label,
      count ? el("span", { class: "count" }, `(${count})`) : "");
  }
  setPlayerVisible(S.tab === "dryrun");
  setLabelVisible(S.tab === "label");
  document.getElementById("stage").classList.toggle("playing", ["dryrun", "label"].includes(S.tab));
}

function renderPanel() {
  const active = document.activeElement;
  if (active && panel.contains(active) && active.dataset.dirty === "1") return;
  const scroll = panel.scrollTop;
  panel.replaceChildren(...PANELS[S.tab]().flat().filter((n) => n !== null && n !== undefined));
  panel.scrollTop = scroll;
  renderOtherFindings();
}

// Every finding the badge counts is shown as text: those of the open tab in its panel, the
// rest here, each saying which tab it belongs to (a click opens that tab).
const SHOWN_ELSEWHERE = 8;
function renderOtherFindings() {
  const elsewhere = S.check.findings.filter((f) => TAB_OF[f.where[0]] !== S.tab
                                             && !(S.tab === "teach" && isTeachFinding(f)))
    .sort((a, b) => (a.severity === b.severity ? 0 : a.severity === "error" ? -1 : 1));
  const rows = findingList(elsewhere.slice(0, SHOWN_ELSEWHERE)).map((row, i) => {
    const tab = TAB_OF[elsewhere[i].where[0]];
    if (!tab) return row;
    row.prepend(el("span", { class: "tab-name" }, `${tab} tab \u203a `));
    row.classList.add("link");
    row.addEventListener("click", () => { S.tab = tab; render(); });
    return row;
  });
  const more = elsewhere.length - SHOWN_ELSEWHERE;
  document.getElementById("other-findings").replaceChildren(...(elsewhere.length
    ? [el("h2", {}, `Findings on other tabs (${elsewhere.length})`), ...rows,
       more > 0 ? el("p", { class: "note" }, `and ${more} more`) : null]
    : []).filter((n) => n !== null));
}

async function save(saveAs = false) {
  const body = { data: S.data };
  if (S.configPath === null || saveAs === true) {
    body.path = document.getElementById("save-path").value;
  }
  try {
    const out = await api("POST", "/api/save", body);
    const folderOf = (path) => (path || "").split("/").slice(0, -1).join("/");
    if (folderOf(out.path) !== folderOf(S.configPath)) {
      S.defaultVideo = out.video;
      forgetPaths();
    }
    S.configPath = out.path;
    S.data = out.data;
    S.check = out.check;
    S.dirty = false;
    S.pictureVersion += 1;
    saveNote.textContent = `saved ${out.path} at ${new Date().toLocaleTimeString()}`
      + (out.carried.length ? "; its files came along (details: hover)" : "")
      + (out.check.errors ? " (with errors: the station cannot run it yet)" : "");
    saveNote.title = out.carried.join("\n");
  } catch (err) {
    saveNote.textContent = `not saved: ${err.message}`;
  }
  render();
}

function typing(evt) {
  const tag = evt.target.tagName;
  return tag === "INPUT" || tag === "SELECT" || tag === "TEXTAREA";
}

function onKey(evt) {
  const ctrl = evt.ctrlKey || evt.metaKey;
  if (ctrl && evt.key.toLowerCase() === "s") { evt.preventDefault(); save(false); return; }
  if (typing(evt)) return;
  if (S.tab === "label" && labelKey(evt)) return;
  if (ctrl && evt.key.toLowerCase() === "z") { evt.preventDefault(); undo(); return; }
  const actions = {
    Enter: finishDraft, Escape: cancelDraft, Delete: deleteSelection, Backspace: deleteSelection,
    v: () => setMode("select"), z: () => setMode("draw"), b: () => setMode("circle"),
    "+": () => zoom(1.25), "-": () => zoom(0.8), "0": fit,
  };
  const action = actions[evt.key];
  if (action) { evt.preventDefault(); action(); }
}

async function start() {
  for (const button of document.querySelectorAll("#tabs button")) {
    button.dataset.label = button.textContent;
    button.addEventListener("click", () => { S.tab = button.dataset.tab; render(); });
  }
  document.getElementById("undo").addEventListener("click", undo);
  document.getElementById("save").addEventListener("click", () => save(false));
  document.getElementById("save-as-button").addEventListener("click", () => save(true));
  document.addEventListener("keydown", onKey);
  window.addEventListener("beforeunload", (evt) => { if (S.dirty) evt.preventDefault(); });
  const state = await api("GET", "/api/state");
  S.data = state.data;
  S.check = state.check;
  S.configPath = state.config_path;
  // paths on this page start at the config's folder: the file's own name means the file
  if (S.configPath !== null) {
    document.getElementById("save-path").value = S.configPath.split("/").pop();
  }
  S.defaultVideo = state.video;
  S.tab = state.exists ? "zones" : "picture";
  onRender(renderTop);
  onRender(renderTabs);
  onRender(renderStage);
  onRender(renderPanel);
  installStage();
  installPlayer();
  installLabeller();
  const caution = await fetch("/common/caution.html");
  document.getElementById("caution").innerHTML = await caution.text();
  render();
  document.body.dataset.ready = "1";
}

start();
