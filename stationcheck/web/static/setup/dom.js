// Small DOM helpers and the field builders the panels share.

import { S, change, getPath, setPath, findingsAt } from "./state.js";

export function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs)) {
    if (value === undefined || value === null || value === false) continue;
    if (key.startsWith("on")) node.addEventListener(key.slice(2), value);
    else if (key === "text") node.textContent = value;
    else node.setAttribute(key, value === true ? "" : value);
  }
  for (const child of children.flat()) {
    if (child === null || child === undefined || child === false) continue;
    node.append(child instanceof Node ? child : document.createTextNode(String(child)));
  }
  return node;
}

// Text from an input: a number when it reads as one, the text otherwise (so the check can say
// what is wrong), undefined when empty (the key is then left out).
export function parseValue(raw, type) {
  const text = raw.trim();
  if (text === "") return undefined;
  if (type === "number") {
    const value = Number(text);
    return Number.isFinite(value) ? value : text;
  }
  return text;
}

// An input bound to a path in the document; it writes on change (Enter or leaving the field).
export function boundInput(keys, { type = "text", name, placeholder, size } = {}) {
  const value = getPath(S.data, keys);
  const input = el("input", {
    type: "text", inputmode: type === "number" ? "decimal" : null,
    name: name || keys.join("."), value: value === undefined ? "" : String(value),
    placeholder, size: size || (type === "number" ? 7 : null),
    class: type === "number" ? "num" : null,
  });
  input.addEventListener("input", () => { input.dataset.dirty = "1"; });
  input.addEventListener("change", () => {
    delete input.dataset.dirty;
    change(() => setPath(S.data, keys, parseValue(input.value, type)));
  });
  return input;
}

export function boundSelect(keys, options, { name, allowEmpty = false } = {}) {
  const value = getPath(S.data, keys);
  const select = el("select", { name: name || keys.join(".") },
    allowEmpty ? el("option", { value: "" }, "(none)") : null,
    options.map((o) => el("option", { value: o, selected: o === value }, o)));
  if (value !== undefined && !options.includes(value)) {
    select.append(el("option", { value, selected: true }, `${value} (?)`));
  }
  select.addEventListener("change", () => {
    change(() => setPath(S.data, keys, select.value === "" ? undefined : select.value));
  });
  return select;
}

export function findingList(findings) {
  return findings.map((f) => el("div", { class: `finding ${f.severity}`, role: "note" },
    f.severity === "error" ? "\u2716 " : "! ",
    el("span", { class: "where" }, f.path, ": "), f.message));
}

export function findingsFor(...prefix) { return findingList(findingsAt(...prefix)); }

// A list of the setup folder's files of one kind (video, inputs, config) that fills `input`:
// the page may only name files inside the setup folder, so that is all it offers.
const fileLists = {};
export function filePicker(kind, input, api) {
  const select = el("select", { name: `pick-${kind}`, class: "file-picker",
                                title: "files of this kind inside the setup folder" },
    el("option", { value: "" }, "choose\u2026"));
  const fill = (files) => {
    for (const file of files) select.append(el("option", { value: file }, file));
    if (!files.length) select.append(el("option", { value: "", disabled: true }, "(none)"));
  };
  if (fileLists[kind]) fill(fileLists[kind]);
  else {
    api("GET", `/api/files?kind=${kind}`).then((out) => { fileLists[kind] = out.files;
                                                          fill(out.files); })
      .catch(() => {});
  }
  select.addEventListener("change", () => {
    if (!select.value) return;
    input.value = select.value;
    input.dispatchEvent(new Event("change"));
  });
  return select;
}
