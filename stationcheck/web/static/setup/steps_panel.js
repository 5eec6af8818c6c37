// The Steps tab: station-wide timing, and the ordered step list (drag the grip to reorder).

import { S, change, render, uniqueId } from "./state.js";
import { el, boundInput, boundSelect, findingsFor } from "./dom.js";

const ZONE_KIND = { fasten: "fastener", pick: "bin", check: "check" };
const NEW_STEP = {
  fasten: () => ({ kind: "fasten", zones: [], max_attempts: 2, on_failure: "continue" }),
  pick: () => ({ kind: "pick", zone: "", min_time_ms: 300 }),
  check: () => ({ kind: "check", zone: "", expect: "present" }),
  confirm: () => ({ kind: "confirm", prompt: "Confirm the manual action" }),
};

export function stepsPanel() {
  const steps = S.data.steps || [];
  return [
    el("h2", {}, "Timing for the whole station"),
    el("div", { class: "fields" },
      el("label", {}, "dwell before enable (ms)"),
      boundInput(["thresholds", "dwell_ms"], { type: "number", name: "dwell_ms" }),
      el("label", {}, "leave-zone margin (px)"),
      boundInput(["thresholds", "hysteresis_px"], { type: "number", name: "hysteresis_px" }),
      el("label", {}, "tool unseen grace (ms)"),
      boundInput(["thresholds", "lost_track_grace_ms"], { type: "number" })),
    findingsFor("thresholds"),
    el("h2", {}, `Steps, in order (${steps.length})`),
    el("div", { class: "line" }, "Add:",
      Object.keys(NEW_STEP).map((kind) => el("button", {
        class: "small", "data-add": kind, onclick: () => addStep(kind) }, kind))),
    el("div", { id: "step-list" }, steps.map(stepCard)),
  ];
}

function addStep(kind) {
  change(() => {
    S.data.steps = S.data.steps || [];
    S.data.steps.push({ id: uniqueId(`${kind}_`, S.data.steps.map((s) => s.id)),
                        ...NEW_STEP[kind]() });
  });
}

function zonesOfKind(kind) {
  return (S.check.zones || []).filter((z) => z.kind === kind).map((z) => z.id);
}

function stepCard(step, index) {
  const kind = step.kind;
  const body = {
    fasten: () => fastenFields(step, index),
    pick: () => [line("bin", boundSelect(["steps", index, "zone"], zonesOfKind("bin"),
                                         { allowEmpty: true, name: "step-zone" }),
                      pickButton(index)),
                 line("min. activity (ms)", boundInput(["steps", index, "min_time_ms"],
                                                       { type: "number" }))],
    check: () => [line("check zone", boundSelect(["steps", index, "zone"], zonesOfKind("check"),
                                                 { allowEmpty: true, name: "step-zone" }),
                       pickButton(index)),
                  line("pass when", boundSelect(["steps", index, "expect"],
                                                ["present", "absent"]))],
    confirm: () => [line("prompt", boundInput(["steps", index, "prompt"]))],
  }[kind];
  return el("div", { class: "row step", "data-index": index, "data-id": step.id },
    el("div", { class: "line" },
      el("span", { class: "grip", title: "Drag to move this step",
                   onpointerdown: (evt) => startDrag(evt, index) }, "\u2261"),
      el("span", { class: "kind" }, `${index + 1}. ${kind}`),
      boundInput(["steps", index, "id"], { name: "step-id" }),
      el("button", { class: "small", title: "Move up", disabled: index === 0,
                     onclick: () => move(index, index - 1) }, "\u2191"),
      el("button", { class: "small", title: "Move down",
                     disabled: index === (S.data.steps.length - 1),
                     onclick: () => move(index, index + 1) }, "\u2193"),
      el("button", { class: "small", onclick: () => change(() => S.data.steps.splice(index, 1)) },
         "Delete")),
    body ? body() : el("p", { class: "note" }, `unknown kind '${kind}'`),
    findingsFor("steps", index));
}

function line(label, ...parts) {
  return el("div", { class: "line" }, el("span", { class: "kind" }, label), ...parts);
}

function pickButton(index) {
  const on = S.pickFor === index;
  return el("button", { class: `small${on ? " on" : ""}`, "data-pick": index,
                        title: "Click zones on the picture to take them",
                        onclick: () => { S.pickFor = on ? null : index; S.mode = "select";
                                         render(); } },
            on ? "Done picking" : "Pick on picture");
}

function fastenFields(step, index) {
  const zones = Array.isArray(step.zones) ? step.zones : [];
  // a zone's place in the step's tightening order (cross order comes from the last check)
  const checked = new Map((S.check.zones || []).map((z) => [z.id, z.number]));
  const orderOf = (zone, k) => (step.order === "cross" ? checked.get(zone) || "?" : k + 1);
  const free = zonesOfKind("fastener").filter((z) => !zones.includes(z));
  const adder = el("select", { name: "add-zone" }, el("option", { value: "" }, "add zone\u2026"),
                   free.map((z) => el("option", { value: z }, z)));
  adder.addEventListener("change", () => change(() => {
    step.zones = [...zones, adder.value];
  }));
  const limits = (key, unit) => line(`${key.split("_")[0]} (${unit})`,
    boundInput(["steps", index, key, "low"], { type: "number", placeholder: "low" }),
    "to", boundInput(["steps", index, key, "high"], { type: "number", placeholder: "high" }),
    el("button", { class: "small", title: "No limits", onclick: () => change(() => {
      delete step[key]; }) }, "\u2715"));
  return [
    line("zones", adder, pickButton(index)),
    el("div", { class: "chips" }, zones.length ? null : el("span", { class: "note" },
      "no zones yet"), zones.map((z, k) => el("span",
      { class: "chip", title: `${z}: fastened in place ${orderOf(z, k)} of this step` },
      el("b", {}, `order ${orderOf(z, k)}`), " ", z,
      el("button", { class: "small", title: `Remove ${z}`, onclick: () => change(() => {
        step.zones = zones.filter((_, j) => j !== k); }) }, "\u00d7")))),
    line("order", boundSelect(["steps", index, "order"], ["listed", "cross"],
                              { name: "order" }),
         "tries", boundInput(["steps", index, "max_attempts"], { type: "number",
                                                                  name: "max_attempts" }),
         "after last NOK", boundSelect(["steps", index, "on_failure"],
                                       ["continue", "stop_unit"], { name: "on_failure" })),
    limits("torque_nm", "N\u00b7m"),
    limits("angle_deg", "\u00b0"),
  ];
}

function move(from, to) {
  if (to < 0 || to >= S.data.steps.length || from === to) return;
  change(() => {
    const [step] = S.data.steps.splice(from, 1);
    S.data.steps.splice(to, 0, step);
  });
}

// Pointer-driven reorder: the grip follows the pointer; a line shows where the step will land.
function startDrag(evt, index) {
  evt.preventDefault();
  const list = document.getElementById("step-list");
  const cards = [...list.querySelectorAll(".step")];
  cards[index].classList.add("dragging");
  const marker = el("div", { class: "drop-line" });
  let target = index;
  const onMove = (e) => {
    target = cards.length;
    for (let k = 0; k < cards.length; k++) {
      const box = cards[k].getBoundingClientRect();
      if (e.clientY < box.top + box.height / 2) { target = k; break; }
    }
    list.insertBefore(marker, cards[target] || null);
  };
  const onUp = () => {
    window.removeEventListener("pointermove", onMove);
    window.removeEventListener("pointerup", onUp);
    marker.remove();
    cards[index].classList.remove("dragging");
    const to = target > index ? target - 1 : target;
    if (to !== index) move(index, to); else render();
  };
  window.addEventListener("pointermove", onMove);
  window.addEventListener("pointerup", onUp);
}
