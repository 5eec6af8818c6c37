"use strict";
// The review screen: plain DOM, no framework. Data arrives as JSON from /api/*; charts arrive
// as SVG made by the server (the same pictures as the offline report).

// the shown result words (the server maps the log's OPC UA words NotOK / NotDecidable to these)
const STATUS = {
  OK: ["meaning-normal", "\u2714 OK"],
  NOK: ["meaning-fault", "\u2716 NOK"],
  aborted: ["meaning-neutral", "\u25CB aborted"],
  open: ["meaning-neutral", "\u25CC open"],
};
const state = { info: null, unitParams: null, pages: [], after: null };
const plant = () => Boolean(state.info && state.info.stations);

function $(id) { return document.getElementById(id); }

function el(tag, attrs, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs || {})) {
    if (value === null || value === undefined || value === false) continue;
    if (key === "class") node.className = value;
    else node.setAttribute(key, value);
  }
  for (const child of children) {
    if (child === null || child === undefined) continue;
    node.append(child instanceof Node ? child : String(child));
  }
  return node;
}

function badge(status) {
  const [cls, text] = STATUS[status] || ["meaning-neutral", status];
  return el("span", { class: `badge ${cls}` }, text);
}

function showError(message) {
  const box = $("error");
  box.textContent = message ? `\u2716 ${message}` : "";
  box.hidden = !message;
}

async function getJSON(url) {
  const response = await fetch(url);
  const body = await response.json().catch(() => ({ error: response.statusText }));
  if (!response.ok) throw new Error(body.error || response.statusText);
  return body;
}

function localTime(epochS) {
  if (epochS === null || epochS === undefined) return "";
  const d = new Date(epochS * 1000);
  const pad = (n) => String(n).padStart(2, "0");
  return `${d.getFullYear()}-${pad(d.getMonth() + 1)}-${pad(d.getDate())} ` +
    `${pad(d.getHours())}:${pad(d.getMinutes())}:${pad(d.getSeconds())}`;
}

function seconds(value) { return value === null || value === undefined ? "" : `${value.toFixed(1)} s`; }

function number(n) { return Number(n).toLocaleString("en-US"); }

// datetime-local inputs <-> epoch seconds in the query string
function formParams(form) {
  const params = new URLSearchParams();
  for (const [key, value] of new FormData(form).entries()) {
    if (value === "") continue;
    if (form.elements[key].type === "datetime-local") params.set(key, String(new Date(value).getTime() / 1000));
    else params.set(key, value);
  }
  return params;
}

function fillForm(form, params) {
  for (const input of form.elements) {
    if (!input.name) continue;
    const value = params.get(input.name);
    if (input.type === "datetime-local") {
      if (value) {
        const d = new Date(Number(value) * 1000);
        d.setMinutes(d.getMinutes() - d.getTimezoneOffset());
        input.value = d.toISOString().slice(0, 16);
      } else input.value = "";
    } else if (value !== null) input.value = value;
    else if (input.tagName === "SELECT") input.selectedIndex = 0;
    else if (input.type !== "number") input.value = "";
  }
}

// ---- units
async function showUnits(params) {
  const key = params.toString();
  if (state.unitParams !== key) { state.unitParams = key; state.pages = [null]; }
  fillForm($("unit-filters"), params);
  $("export-units-csv").href = `/api/export/units.csv?${key}`;
  $("export-units-json").href = `/api/export/units.json?${key}`;
  await loadUnitPage();
}

async function loadUnitPage() {
  const params = new URLSearchParams(state.unitParams);
  const after = state.pages[state.pages.length - 1];
  if (after) params.set("after", after);
  const page = await getJSON(`/api/units?${params}`);
  const body = $("unit-table").querySelector("tbody");
  body.replaceChildren(...page.units.map(unitRow));
  if (!page.units.length) body.append(el("tr", {}, el("td", { colspan: 9 }, "No units match.")));
  state.after = page.next_after;
  $("next-page").disabled = !page.next_after;
  $("first-page").disabled = state.pages.length <= 1;
  const count = $("unit-count");
  const pageNo = state.pages.length;
  const shown = `page ${pageNo}`;
  if (page.count_is_exact) {
    count.textContent = `${number(page.count)} unit${page.count === 1 ? "" : "s"} \u00b7 ${shown}`;
  } else {
    count.textContent = `more than ${number(page.count)} units (counting\u2026) \u00b7 ${shown}`;
    const asked = state.unitParams;
    getJSON(`/api/units/count?${new URLSearchParams(asked)}`).then((full) => {
      if (state.unitParams === asked) count.textContent = `${number(full.count)} units \u00b7 ${shown}`;
    }).catch((err) => showError(err.message));
  }
}

function unitRow(u) {
  const status = el("td", {}, badge(u.status));
  if (u.reworked) status.append(" ", el("span", { class: "badge meaning-abnormal" }, "! reworked"));
  const only = u.station ? `?station=${encodeURIComponent(u.station)}` : "";
  const link = el("a", { href: `#/unit/${encodeURIComponent(u.serial)}${only}` }, u.serial);
  const others = (u.stations || []).filter((s) => s !== u.station);
  const stations = plant() ? el("td", {}, u.station || "",
    others.length ? el("span", { class: "muted" }, ` (also ${others.join(", ")})`) : null) : null;
  return el("tr", {},
    el("td", {}, link), el("td", {}, localTime(u.started_at_s)), status,
    el("td", { class: "num" }, u.passes), el("td", { class: "num" }, u.retries),
    el("td", { class: "num" }, u.nok_results), el("td", {}, u.failed_positions.join(", ")),
    el("td", { class: "num" }, seconds(u.cycle_time_s)), el("td", { class: "num" }, u.alarm_count), stations);
}

// ---- one unit
function measured(value, low, high, digits) {
  if (value === null || value === undefined) return "";
  const outside = (low !== null && value < low) || (high !== null && value > high);
  const limits = low !== null || high !== null ? ` [${low ?? "\u2013"}\u2013${high ?? "\u2013"}]` : "";
  return el("span", { class: outside ? "off-limits" : null, title: outside ? "outside its limits" : null },
    `${value.toFixed(digits)}${limits}`);
}

function modelsText(models) {
  // the hash of the model that decided each pass, shortened; older logs did not record it
  if (models.every((m) => !m)) return "not recorded";
  return models.map((m, i) => `${i ? `rework ${i}` : "first"} ${m ? m.slice(0, 12) + "\u2026" : "not recorded"}`).join(", ");
}

async function showUnit(serial, params) {
  const scope = new URLSearchParams();
  for (const key of ["station", "line"]) if (params.get(key)) scope.set(key, params.get(key));
  const data = await getJSON(`/api/unit?serial=${encodeURIComponent(serial)}${scope.size ? "&" + scope : ""}`);
  const u = data.unit;
  if (plant()) {
    const shown = params.get("station") || (data.stations || [])[0] || "";
    const links = (data.stations || []).map((s) => s === shown ? el("strong", {}, s)
      : el("a", { href: `#/unit/${encodeURIComponent(serial)}?station=${encodeURIComponent(s)}` }, s));
    $("unit-stations").replaceChildren(`Station ${shown}. Logged at: `,
      ...links.flatMap((l, i) => (i ? [", ", l] : [l])));
  }
  $("unit-serial").textContent = u.serial;
  const status = $("unit-status");
  status.replaceChildren(badge(u.status));
  if (u.reworked) status.append(" ", el("span", { class: "badge meaning-abnormal" }, "! reworked"));
  if (u.first_time_through) status.append(" ", el("span", { class: "badge meaning-normal" }, "\u2714 first-time-through"));
  const q = `serial=${encodeURIComponent(u.serial)}`;
  $("export-unit-csv").href = `/api/export/unit.csv?${q}`;
  $("export-unit-json").href = `/api/export/unit.json?${q}`;
  const facts = [
    ["Started", localTime(u.started_at_s)], ["Ended", u.ended_at_s === null ? "open" : localTime(u.ended_at_s)],
    ["Cycle time (first pass)", seconds(u.cycle_time_s)], ["Rework time", seconds(u.rework_time_s)],
    ["Passes", u.passes], ["Released", u.released ? "yes" : "no"],
    ["Retries", u.retries], ["NOK results", u.nok_results],
    ["Failed positions", u.failed_positions.join(", ") || "none"],
    ["Unfinished positions", u.unfinished_positions.join(", ") || "none"],
    ["Alarms", u.alarm_count], ["Current step", u.current_step || "-"],
    ["Keypoint model (SHA-256)", modelsText(data.models || [])],
  ];
  if (u.nok_reason) facts.unshift([u.status === "NOK" ? "Why NOK" : "Why the first pass was NOK", u.nok_reason]);
  $("unit-facts").replaceChildren(...facts.flatMap(([k, v]) => [el("dt", {}, k),
    el("dd", { id: k.startsWith("Why") ? "unit-nok-reason" : null }, v)]));
  $("step-table").querySelector("tbody").replaceChildren(...data.steps.map((s) => {
    const result = el("td", {}, badge(s.result));
    if (s.position_result === "NOK") result.append(" ", el("span", { class: "badge meaning-abnormal" }, "! left for rework"));
    const evidence = s.evidence_path
      ? el("a", { href: `/api/evidence?${q}&seq=${s.seq}`, target: "_blank" }, "image") : "";
    return el("tr", { class: s.rework ? "rework" : null },
      el("td", {}, s.rework ? `rework ${s.pass_no - 1}` : "first"), el("td", {}, s.step),
      el("td", {}, s.position ?? ""), el("td", { class: "num" }, s.kind === "fasten" ? `${s.attempt}${s.max_attempts ? " of " + s.max_attempts : ""}` : ""),
      result, el("td", { class: "num" }, measured(s.torque_nm, s.torque_low_nm, s.torque_high_nm, 2)),
      el("td", { class: "num" }, measured(s.angle_deg, s.angle_low_deg, s.angle_high_deg, 1)),
      el("td", { class: "num", title: s.recorded_at }, `+${(s.ended_t_s - u.started_t_s).toFixed(1)} s`),
      el("td", {}, evidence));
  }));
  const alarms = data.alarms.map((a) => el("tr", {},
    el("td", {}, el("span", { class: `badge ${a.severity === "warning" ? "meaning-abnormal" : "meaning-fault"}` },
      `${a.severity === "warning" ? "!" : "\u2716"} ${a.code}`)),
    el("td", {}, a.severity), el("td", {}, a.subject), el("td", {}, a.message),
    el("td", {}, a.recorded_at ? a.recorded_at.replace("T", " ") : ""),
    el("td", {}, a.cleared_t_s === null ? "" : `after ${(a.cleared_t_s - a.t_s).toFixed(1)} s`)));
  $("alarm-table").querySelector("tbody").replaceChildren(...(alarms.length ? alarms
    : [el("tr", {}, el("td", { colspan: 6 }, "No alarms for this unit."))]));
}

// ---- station figures
function card(label, big, small) {
  return el("div", { class: "card" }, el("div", { class: "small" }, label), el("div", { class: "big" }, big),
    small ? el("div", { class: "small" }, small) : null);
}

function percent(v) { return v === null ? "-" : `${(100 * v).toFixed(1)} %`; }

function svgBox(id, markup) {
  const box = $(id);
  box.innerHTML = markup; // made by the server from numbers; the text in it is escaped there
}

async function showFigures(params) {
  fillForm($("figure-filters"), params);
  $("report-link").href = `/api/report.html?${params}`;
  const f = await getJSON(`/api/figures?${params}`);
  const ci = f.ftt_interval_95 ? `95 % Wilson ${percent(f.ftt_interval_95[0])} to ${percent(f.ftt_interval_95[1])}` : "";
  const ct = f.cycle_time;
  $("figure-cards").replaceChildren(
    card("Units started", number(f.units), f.period.text),
    card("First-time-through", percent(f.ftt_rate),
      `${number(f.first_time_through)} of ${number(f.ended)} ended units; ${ci}`),
    card("OK (released)", number(f.ok)), card("NOK", number(f.nok)),
    card("Reworked", number(f.reworked)), card("Aborted", number(f.aborted)),
    card("Open", number(f.open), "not finished: not in first-time-through"),
    card("NOK results", number(f.nok_results), `retries ${number(f.retries)}`),
    card("Cycle time", ct.median_s === null ? "-" : `${ct.median_s.toFixed(1)} s`,
      ct.p90_s === null ? "" : `median; p90 ${ct.p90_s.toFixed(1)} s`));
  svgBox("chart-nok", f.charts.nok);
  svgBox("chart-retries", f.charts.retries);
  svgBox("chart-cycle", f.charts.cycle_time);
  const rows = f.alarms.map((a) => el("tr", {}, el("td", {}, a.code), el("td", { class: "num" }, number(a.count)),
    el("td", { class: "num" }, number(a.of_units))));
  $("alarm-kinds").querySelector("tbody").replaceChildren(...(rows.length ? rows
    : [el("tr", {}, el("td", { colspan: 3 }, "No alarms in this period."))]));
}

// ---- trends
async function showTrends(params) {
  const select = $("trend-position");
  if (!params.get("position") && select.options.length) params.set("position", select.options[0].value);
  fillForm($("trend-filters"), params);
  if (!params.get("position")) {
    $("trend-findings").replaceChildren(el("li", {}, "No fastener results in this log yet."));
    return;
  }
  const t = await getJSON(`/api/trend?${params}`);
  const findings = t.findings.length ? t.findings.map((f) => el("li", { class: "signal" }, f))
    : [el("li", { class: "calm" }, "No signal: within its control limits and run rules.")];
  $("trend-findings").replaceChildren(...findings);
  svgBox("trend-chart", t.chart);
  $("trend-basis").textContent = t.sigma === null ? "" :
    `Centre ${t.centre.toFixed(3)} and sigma ${t.sigma.toFixed(3)} ${t.unit} from the first ${t.baseline} ` +
    `values (moving ranges); EWMA \u03bb ${t.ewma.weight}, ${t.ewma.width}-sigma limits; ` +
    `CUSUM k ${t.cusum.k.toFixed(3)}, h ${t.cusum.h.toFixed(3)}; Western Electric rules 1-4.`;
}

// ---- stations side by side (plant database)
async function showStations(params) {
  fillForm($("station-filters"), params);
  const body = await getJSON(`/api/stations?${params}`);
  const rows = body.stations.map((r) => el("tr", {},
    el("td", {}, el("a", { href: `#/figures?station=${encodeURIComponent(r.station_id)}` }, r.station_id)),
    el("td", {}, r.line), el("td", { class: "num" }, number(r.units)),
    el("td", { class: "num" }, percent(r.ftt_rate)),
    el("td", { class: "num" }, r.ftt_interval_95 ? `${percent(r.ftt_interval_95[0])} to ${percent(r.ftt_interval_95[1])}` : "-"),
    el("td", { class: "num" }, number(r.ok)), el("td", { class: "num" }, number(r.nok)),
    el("td", { class: "num" }, number(r.reworked)), el("td", { class: "num" }, number(r.nok_results)),
    el("td", { class: "num" }, number(r.retries)), el("td", { class: "num" }, seconds(r.cycle_time_median_s)),
    el("td", { class: "num" }, `${number(r.forwarded_seq)} / ${number(r.folded_seq)}`)));
  $("station-table").querySelector("tbody").replaceChildren(...(rows.length ? rows
    : [el("tr", {}, el("td", { colspan: 12 }, "No stations match."))]));
  const trends = $("station-trends");
  trends.replaceChildren(...body.trends.map((t) => {
    const box = el("div", { class: "station-trend" }, el("h3", {}, t.station_id),
      el("p", { class: t.findings.length ? "signal" : "calm" }, t.findings.length ? t.findings.join("; ")
        : "No signal: within its control limits and run rules."));
    const chart = el("div", {});
    chart.innerHTML = t.chart; // made by the server from numbers; the text in it is escaped there
    box.append(chart);
    return box;
  }));
}

// ---- navigation
async function route() {
  showError("");
  const hash = location.hash || "#/units";
  const [path, query] = hash.slice(1).split("?");
  const params = new URLSearchParams(query || "");
  const view = path.startsWith("/unit/") ? "unit" : (path.slice(1) || "units");
  for (const section of document.querySelectorAll("main > section")) section.hidden = section.id !== `view-${view}`;
  for (const link of document.querySelectorAll("nav a")) {
    link.classList.toggle("active", link.dataset.view === view || (view === "unit" && link.dataset.view === "units"));
  }
  try {
    if (view === "unit") await showUnit(decodeURIComponent(path.slice("/unit/".length)), params);
    else if (view === "stations") await showStations(params);
    else if (view === "figures") await showFigures(params);
    else if (view === "trends") await showTrends(params);
    else await showUnits(params);
  } catch (err) {
    showError(err.message);
  }
  document.body.dataset.loaded = hash;
}

function submitTo(formId, view) {
  $(formId).addEventListener("submit", (event) => {
    event.preventDefault();
    const target = `#/${view}?${formParams(event.target)}`;
    if (location.hash === target) route(); else location.hash = target;
  });
}

async function start() {
  fetch("/common/caution.html").then((r) => r.text()).then((t) => { $("caution").innerHTML = t; });
  try {
    state.info = await getJSON("/api/info");
    $("log-name").textContent = state.info.log;
    $("demo-flag").hidden = !state.info.demo_data;
    for (const p of state.info.positions) {
      $("position-filter").append(el("option", { value: p }, p));
      $("trend-position").append(el("option", { value: p }, p));
    }
    for (const code of state.info.alarm_codes) $("alarm-filter").append(el("option", { value: code }, code));
    if (plant()) {
      $("log-name").textContent = `plant database ${state.info.log}`;
      for (const node of document.querySelectorAll(".plant-only")) node.hidden = false;
      const lines = [...new Set(state.info.stations.map((s) => s.line))];
      for (const select of document.querySelectorAll(".station-filter")) {
        for (const s of state.info.stations) select.append(el("option", { value: s.station_id }, `${s.station_id} (${s.line})`));
      }
      for (const select of document.querySelectorAll(".line-filter")) {
        for (const line of lines) select.append(el("option", { value: line }, line));
      }
      for (const p of state.info.positions) $("stations-position").append(el("option", { value: p }, p));
    }
  } catch (err) {
    showError(err.message);
  }
  submitTo("unit-filters", "units");
  submitTo("figure-filters", "figures");
  submitTo("trend-filters", "trends");
  submitTo("station-filters", "stations");
  $("next-page").addEventListener("click", () => {
    if (state.after) { state.pages.push(state.after); loadUnitPage().catch((e) => showError(e.message)); }
  });
  $("first-page").addEventListener("click", () => {
    state.pages = [null]; loadUnitPage().catch((e) => showError(e.message));
  });
  window.addEventListener("hashchange", route);
  await route();
}

start();
