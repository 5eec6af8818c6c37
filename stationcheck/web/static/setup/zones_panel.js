// The Zones tab: one row per zone entry (id, kind, label, findings), and the bolt-circle form.

import { S, api, change, render } from "./state.js";
import { el, boundInput, boundSelect, findingsFor } from "./dom.js";
import { circleDraft, setMode } from "./stage.js";

const KINDS = ["fastener", "bin", "check"];

export function zonesPanel() {
  const zones = S.data.zones || [];
  const rows = zones.map((entry, index) => entry.bolt_circle ? circleRow(entry, index)
                                                              : zoneRow(entry, index));
  return [
    circleDraft.first ? circleForm() : null,
    el("h2", {}, `Zones (${zones.length} entries)`),
    zones.length ? null : el("p", { class: "note" },
      "No zones yet: choose Draw zone or Bolt circle above the picture."),
    ...rows,
  ];
}

function zoneRow(entry, index) {
  const points = Array.isArray(entry.polygon) ? entry.polygon.length : 0;
  return el("div", {
    class: `row zone-row${index === S.selected ? " selected" : ""}`, "data-index": index,
    onclick: (evt) => {
      if (evt.target.closest("input,select,button")) return;
      S.selected = index; S.vertex = null; render();
    } },
    el("div", { class: "line" },
      el("span", { class: "kind" }, "id"), boundInput(["zones", index, "id"], { name: "zone-id" }),
      boundSelect(["zones", index, "kind"], KINDS, { name: "zone-kind" }),
      el("button", { class: "small", title: "Delete this zone", onclick: () => change(() => {
        zones().splice(index, 1); S.selected = null; S.vertex = null; }) }, "Delete")),
    el("div", { class: "line" },
      el("span", { class: "kind" }, "label"),
      boundInput(["zones", index, "label"], { name: "zone-label", placeholder: "words for people" }),
      el("span", { class: "note" }, `${points} points`)),
    findingsFor("zones", index));
}

function zones() { return S.data.zones; }

function circleRow(entry, index) {
  const circle = entry.bolt_circle || {};
  return el("div", { class: "row zone-row", "data-index": index },
    el("div", { class: "line" },
      el("span", { class: "kind" }, "bolt circle"),
      el("span", { class: "grow" }, `${circle.id_prefix ?? "?"}1 \u2026 ${circle.id_prefix ?? "?"}`
        + `${circle.count ?? "?"}, radius ${circle.radius_px ?? "?"} px`),
      el("button", { class: "small", title: "Replace the shorthand by one zone per bolt, each "
        + "adjustable", onclick: () => writeOut(index) }, "Write out as zones"),
      el("button", { class: "small", onclick: () => change(() => zones().splice(index, 1)) },
         "Delete")),
    findingsFor("zones", index));
}

function writeOut(index) {
  const generated = (S.check.zones || []).filter((z) => z.generated && z.entry === index);
  const circle = S.data.zones[index].bolt_circle || {};
  const labelPrefix = (circle.label_prefix || "").trim();
  change(() => {
    S.data.zones.splice(index, 1, ...generated.map((z, k) => ({
      id: z.id, kind: "fastener", ...(labelPrefix ? { label: `${labelPrefix} ${k + 1}` } : {}),
      polygon: z.polygon.map((p) => [...p]) })));
  });
}

function circleForm() {
  const [cx, cy] = circleDraft.centre;
  const [fx, fy] = circleDraft.first;
  const radius = Math.hypot(fx - cx, fy - cy).toFixed(1);
  const count = el("input", { name: "circle-count", value: "6", size: 4 });
  const size = el("input", { name: "circle-size", value: "34", size: 4 });
  const prefix = el("input", { name: "circle-prefix", value: "screw_", size: 10 });
  const label = el("input", { name: "circle-label", value: "", size: 12, placeholder: "e.g. cover screw" });
  const addStep = el("input", { type: "checkbox", name: "circle-step", checked: true });
  const message = el("div");
  const place = async () => {
    try {
      const out = await api("POST", "/api/bolt-circle", {
        centre_px: circleDraft.centre, first_px: circleDraft.first, count: Number(count.value),
        zone_size_px: Number(size.value), id_prefix: prefix.value, label_prefix: label.value });
      circleDraft.centre = circleDraft.first = null;
      change(() => {
        S.data.zones = S.data.zones || [];
        S.data.zones.push(...out.zones);
        if (addStep.checked) {
          S.data.steps = S.data.steps || [];
          const taken = new Set(S.data.steps.map((s) => s.id));
          let id = `fasten_${prefix.value.replace(/[_-]+$/, "") || "bolts"}`;
          while (taken.has(id)) id += "_";
          S.data.steps.push({ id, kind: "fasten", zones: out.cross_order, max_attempts: 2,
                              on_failure: "continue" });
        }
        S.mode = "select";
      });
    } catch (err) {
      message.replaceChildren(el("div", { class: "finding error" }, `\u2716 ${err.message}`));
    }
  };
  return el("div", { class: "row", id: "circle-form" },
    el("h2", {}, "New bolt circle"),
    el("p", { class: "note" }, `Centre ${cx}, ${cy}; radius ${radius} px; the clicked fastener `
      + "is number 1, the rest follow clockwise."),
    el("div", { class: "fields" },
      el("label", {}, "fasteners"), count, el("label", {}, "zone size (px across)"), size,
      el("label", {}, "id prefix"), prefix, el("label", {}, "label prefix"), label,
      el("label", {}, "fasten step"),
      el("span", {}, addStep, " add one, in cross order")),
    el("div", { class: "line" },
      el("button", { class: "primary", id: "circle-place", onclick: place }, "Place bolt circle"),
      el("button", { onclick: () => setMode("circle") }, "Cancel")),
    message);
}
