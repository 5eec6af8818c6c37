// The document being edited (the whole config as plain JSON), the last check, undo.
// Every change goes through change(): snapshot for undo, edit, redraw, check again.

export const S = {
  data: {},
  check: { findings: [], zones: [], summary: "" },
  configPath: null,
  defaultVideo: null,
  tab: "zones",
  mode: "select",
  selected: null,     // index into data.zones
  vertex: null,       // index into the selected zone's polygon
  pickFor: null,      // step index that takes fastener zones clicked on the picture
  undo: [],
  dirty: false,
  pictureVersion: 0,
};

const renderers = [];
export function onRender(fn) { renderers.push(fn); }
export function render() { for (const fn of renderers) fn(); }

let checkTimer = null;
let checkSeq = 0;

export async function api(method, path, body) {
  // every write carries the header the server requires of the screen's own page
  const opts = { method, headers: method === "GET" ? {} : { "X-Stationcheck-Request": "1" } };
  if (body !== undefined) {
    opts.body = JSON.stringify(body);
    opts.headers["Content-Type"] = "application/json";
  }
  const resp = await fetch(path, opts);
  const type = resp.headers.get("Content-Type") || "";
  const out = type.startsWith("application/json") ? await resp.json() : await resp.blob();
  if (!resp.ok) throw new Error(out.error || `${resp.status}`);
  return out;
}

export function snapshot() {
  S.undo.push(JSON.stringify(S.data));
  if (S.undo.length > 200) S.undo.shift();
}

export function change(edit, { record = true } = {}) {
  if (record) snapshot();
  edit();
  S.dirty = true;
  render();
  scheduleCheck();
}

export function undo() {
  const last = S.undo.pop();
  if (last === undefined) return;
  change(() => {
    S.data = JSON.parse(last);
    const zones = S.data.zones || [];
    if (S.selected !== null && S.selected >= zones.length) S.selected = null;
    S.vertex = null;
  }, { record: false });
}

export function scheduleCheck(delayMs = 150) {
  clearTimeout(checkTimer);
  checkTimer = setTimeout(runCheck, delayMs);
}

export async function runCheck() {
  const seq = ++checkSeq;
  try {
    const result = await api("POST", "/api/check", { data: S.data });
    if (seq !== checkSeq) return;
    S.check = result;
  } catch (err) {
    S.check = { findings: [], zones: S.check.zones, summary: `cannot check: ${err.message}`,
                errors: 1, warnings: 0, ok: false };
  }
  render();
}

// Findings whose path starts with the given parts, e.g. findingsAt("steps", 2).
export function findingsAt(...prefix) {
  return S.check.findings.filter((f) => prefix.every((p, i) => f.where[i] === p));
}

// The first `${stem}1`, `${stem}2`, ... not among the ids taken.
export function uniqueId(stem, taken) {
  const ids = new Set(taken);
  for (let n = 1; ; n++) if (!ids.has(`${stem}${n}`)) return `${stem}${n}`;
}

export function setPath(obj, keys, value) {
  let node = obj;
  for (const key of keys.slice(0, -1)) {
    if (typeof node[key] !== "object" || node[key] === null) node[key] = {};
    node = node[key];
  }
  const last = keys[keys.length - 1];
  if (value === undefined) delete node[last]; else node[last] = value;
}

export function getPath(obj, keys) {
  let node = obj;
  for (const key of keys) {
    if (node === undefined || node === null) return undefined;
    node = node[key];
  }
  return node;
}
