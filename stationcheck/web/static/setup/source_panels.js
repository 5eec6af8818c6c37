// The Picture, Teach and Dry run tabs: everything that takes frames from a source.

import { S, api, change, render, findingsAt, scheduleCheck } from "./state.js";
import { el, boundInput, findingsFor, findingList, filePicker } from "./dom.js";
import { showPlayer } from "./player.js";

// Source choice shared by the Picture and Teach tabs (kept while the page is open).
const source = { kind: "video", video: null, at_s: 0, camera: 0, url: "" };
let teachZone = null;
let teachInfo = null;
const dryRun = { video: null, inputs: "", start_s: 0, seconds: 4, result: null };
const teachSettings = { count: 1, every_s: 1 };
// What the last action of each tab said: { text, ok } (ok: a success, not an error).
const notes = { picture: null, teach: null, dryrun: null };

// After a save into another folder the page's paths start there: forget the old ones.
export function forgetPaths() {
  source.video = null;
  dryRun.video = null;
  dryRun.inputs = "";
  teachInfo = null;
}

// An input bound to a key of this module's own settings (`source`, `dryRun`), not the document.
function settingInput(settings, prefix, key, attrs = {}) {
  const input = el("input", { name: `${prefix}-${key}`, value: String(settings[key]), ...attrs });
  input.addEventListener("change", () => {
    settings[key] = attrs.inputmode ? Number(input.value) : input.value;
  });
  return input;
}

// A path field with the picker of the setup folder's files beside it.
function pathField(input, kind) {
  return el("span", { class: "path-field" }, input, filePicker(kind, input, api));
}

function sourceFields() {
  if (source.video === null) source.video = S.defaultVideo || "";
  const bind = (key, attrs) => settingInput(source, "source", key, attrs);
  const radio = (kind, text) => el("label", {},
    el("input", { type: "radio", name: "source-kind", value: kind, checked: source.kind === kind,
                  onchange: () => { source.kind = kind; render(); } }), ` ${text} `);
  return [
    el("div", { class: "line" }, radio("video", "video file"), radio("camera", "camera"),
       radio("stream", "stream")),
    el("div", { class: "fields" },
      ...(source.kind === "video" ? [
        el("label", {}, "video (from the config's folder)"),
        pathField(bind("video", { size: 22 }), "video"),
        el("label", {}, "at (seconds)"), bind("at_s", { inputmode: "decimal", size: 6 })] : []),
      ...(source.kind === "camera" ? [el("label", {}, "camera index"),
                                      bind("camera", { inputmode: "numeric", size: 3 })] : []),
      ...(source.kind === "stream" ? [el("label", {}, "stream URL"),
                                      bind("url", { size: 28, placeholder: "rtsp://..." })] : [])),
  ];
}

function sourceBody() {
  return { source: source.kind, video: source.video, at_s: source.at_s,
           camera: source.camera, url: source.url };
}

function busy(button, tab, work) {
  return async () => {
    button.disabled = true;
    notes[tab] = null;
    try { await work(); } catch (err) { notes[tab] = { text: err.message, ok: false }; }
    button.disabled = false;
    render();
  };
}

function noteOf(tab, id) {
  const note = notes[tab];
  if (!note) return null;
  return note.ok ? el("p", { class: "note done-note", id, role: "status" }, `\u2714 ${note.text}`)
    : el("div", { class: "finding error", id, role: "alert" }, `\u2716 ${note.text}`);
}

export function picturePanel() {
  const take = el("button", { class: "primary", id: "take-reference" }, "Take reference frame");
  take.addEventListener("click", busy(take, "picture", async () => {
    const camera = S.data.camera || {};
    const out = await api("POST", "/api/reference", {
      ...sourceBody(), reference_frame: (S.data.station || {}).reference_frame,
      width_px: camera.width_px, height_px: camera.height_px });
    // a config built from a video plays that video until its camera is named
    const fromVideo = source.kind === "video" && typeof camera.source !== "string";
    change(() => {
      S.data.camera = S.data.camera || {};
      S.data.camera.width_px = out.width_px;
      S.data.camera.height_px = out.height_px;
      if (fromVideo) {
        S.data.camera.source = source.video;
        if (out.fps > 0) S.data.camera.fps = Math.round(out.fps * 1000) / 1000;
      }
      S.pictureVersion += 1;
    });
    notes.picture = { text: `taken: ${out.source}` + (fromVideo ? `; camera source set to `
      + `${source.video} (write the camera index or URL there for the live station)` : ""),
                      ok: true };
  }));
  return [
    el("h2", {}, "Reference frame"),
    el("p", { class: "note" }, "Zones are drawn on this picture, in its pixels. Take it with the "
      + "station empty and the camera where it will stay."),
    el("div", { class: "fields" }, el("label", {}, "saved as"),
       boundInput(["station", "reference_frame"], { name: "reference_frame" })),
    ...sourceFields(),
    el("div", { class: "line" }, take), noteOf("picture", "picture-note"),
    findingsFor("station"),
    el("h2", {}, "Station and camera"),
    el("div", { class: "fields" },
      el("label", {}, "station name"), boundInput(["station", "name"], { name: "station-name" }),
      el("label", {}, "camera source"), boundInput(["camera", "source"], { name: "camera-source" }),
      el("label", {}, "width (px)"), boundInput(["camera", "width_px"], { type: "number" }),
      el("label", {}, "height (px)"), boundInput(["camera", "height_px"], { type: "number" }),
      el("label", {}, "frames per second"), boundInput(["camera", "fps"], { type: "number" })),
    findingsFor("camera"),
  ];
}

export function teachPanel() {
  const checks = (S.check.zones || []).filter((z) => z.kind === "check").map((z) => z.id);
  if (!checks.includes(teachZone)) { teachZone = checks[0] || null; teachInfo = null; }
  if (!teachZone) {
    return [el("h2", {}, "Teach check zones"),
            el("p", { class: "note" }, "No check zone yet: draw one (kind check) first.")];
  }
  if (teachInfo === null || teachInfo.zone !== teachZone) loadTeach();
  const select = el("select", { name: "teach-zone" },
                    checks.map((z) => el("option", { value: z, selected: z === teachZone }, z)));
  select.addEventListener("change", () => { teachZone = select.value; teachInfo = null; render(); });
  const count = settingInput(teachSettings, "teach", "count", { inputmode: "numeric", size: 3 });
  const every = settingInput(teachSettings, "teach", "every_s",
                             { inputmode: "decimal", size: 3 });
  const teachButton = (label) => {
    const button = el("button", { "data-teach": label }, `Teach ${label}`);
    button.addEventListener("click", busy(button, "teach", async () => {
      teachInfo = await api("POST", "/api/teach", { data: S.data, zone: teachZone, label,
        ...sourceBody(), count: teachSettings.count, every_s: teachSettings.every_s });
      notes.teach = { text: `taught ${label}: now ${teachInfo.present} present, `
                      + `${teachInfo.absent} absent`, ok: true };
      scheduleCheck(0);
    }));
    return button;
  };
  const clearButton = (label) => {
    const button = el("button", { class: "small" }, `Forget ${label}`);
    button.addEventListener("click", busy(button, "teach", async () => {
      teachInfo = await api("POST", "/api/teach/clear", { data: S.data, zone: teachZone, label });
      notes.teach = { text: `forgot the ${label} images`, ok: true };
      scheduleCheck(0);
    }));
    return button;
  };
  const reference = encodeURIComponent((S.data.station || {}).reference_frame || "");
  const thumbs = (teachInfo && teachInfo.images || []).map((image) => el("figure",
    { class: image.misfit ? "misfit" : null },
    el("img", { src: `/api/teach-image?reference=${reference}&zone=${teachZone}`
                + `&file=${image.file}`, alt: image.file, title: image.source }),
    el("figcaption", {}, `${image.label === "present" ? "\u25cf" : "\u25cb"} ${image.file}`
       + (image.misfit ? " \u2716 looks like the other class" : ""))));
  return [
    el("h2", {}, "Teach check zones"),
    el("p", { class: "note" }, "Show the zone with the part present, teach; then absent, "
      + "teach. A few images of each, with the usual light, make a steady check."),
    el("div", { class: "fields" }, el("label", {}, "check zone"), select),
    findingList(findingsAt("zones").filter(isTeachFinding)),
    ...sourceFields(),
    el("div", { class: "fields" }, el("label", {}, "frames"), count,
       el("label", {}, "every (seconds)"), every),
    el("div", { class: "line" }, teachButton("present"), teachButton("absent"),
       clearButton("present"), clearButton("absent")),
    noteOf("teach", "teach-action-note"),
    teachInfo && teachInfo.loaded && teachInfo.images.length
      ? el("p", { class: "note", id: "teach-loaded" }, `Loaded ${teachInfo.images.length} `
        + `image(s) taught earlier, found in ${teachInfo.folder}; they count for this zone. `
        + "Forget present / absent to start over.") : null,
    teachInfo ? el("p", { class: "note", id: "teach-note" }, `${teachInfo.present} present, `
      + `${teachInfo.absent} absent: ${teachInfo.note}`) : null,
    el("div", { class: "thumbs" }, thumbs),
  ];
}

// Findings about the teaching of check zones (not taught, classes that do not stand apart,
// missing files): the Teach tab shows them all.
export const isTeachFinding = (f) => f.where[0] === "zones"
  && f.message.startsWith("check zone '");

async function loadTeach() {
  teachInfo = { zone: teachZone, images: [], present: 0, absent: 0, note: "loading\u2026" };
  try {
    teachInfo = { ...await api("POST", "/api/teach/list", { data: S.data, zone: teachZone }),
                  loaded: true };
  } catch (err) {
    teachInfo = { zone: teachZone, images: [], present: 0, absent: 0, note: err.message };
  }
  render();
}

export function dryRunPanel() {
  if (dryRun.video === null) dryRun.video = S.defaultVideo || "";
  const field = (key, attrs) => settingInput(dryRun, "dry", key, attrs);
  const run = el("button", { class: "primary", id: "dry-run" }, "Run");
  run.addEventListener("click", busy(run, "dryrun", async () => {
    dryRun.result = null;
    notes.dryrun = { text: "running\u2026", ok: true };
    render();
    dryRun.result = await api("POST", "/api/dry-run", {
      data: S.data, video: dryRun.video, inputs: dryRun.inputs || null,
      start_s: dryRun.start_s, seconds: dryRun.seconds });
    notes.dryrun = null;
    showPlayer(dryRun.result);
  }));
  const result = dryRun.result;
  return [
    el("h2", {}, "Dry run on a recorded video"),
    el("p", { class: "note" }, "Runs the config as it is now (saved or not) through the tool "
      + "detection, zones, image checks and step sequence; nothing is written to disk. Station "
      + "inputs (serials, tightening results) come from the video's _inputs.jsonl file."),
    el("div", { class: "fields" },
      el("label", {}, "video"), pathField(field("video", { size: 22 }), "video"),
      el("label", {}, "inputs (optional)"), pathField(field("inputs", { size: 22,
        placeholder: "beside the video" }), "inputs"),
      el("label", {}, "start at (s)"), field("start_s", { inputmode: "decimal", size: 6 }),
      el("label", {}, "seconds (up to 20)"), field("seconds", { inputmode: "decimal", size: 6 })),
    el("div", { class: "line" }, run), noteOf("dryrun", "dry-note"),
    result ? el("p", { class: "note", id: "dry-summary" }, `${result.run_frames} frames run; `
      + `tool enabled in ${result.enabled_frames} of them. The player shows ${result.frames} `
      + `(every ${result.every === 2 ? "2nd" : `${result.every}th`}). `
      + `Inputs: ${result.inputs || "none"}`) : null,
    result ? el("div", { class: "timeline", id: "timeline" }, result.timeline.map((entry) =>
      el("div", { class: entry.kind === "enable" ? "enable" : null,
                  onclick: () => showPlayer(result, entry.t_s) },
         `${entry.t_s === null ? "" : entry.t_s.toFixed(2).padStart(7)} s  ${entry.text}`)))
      : null,
  ];
}
