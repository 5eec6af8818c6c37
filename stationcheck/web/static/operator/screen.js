// Operator screen: follows the station through server-sent events (api/stream) and shows the
// camera picture as multipart JPEG (api/video.mjpg). Reconnects by itself; while not
// connected, or when no update came for a while, it says so instead of showing old news.
"use strict";

const MEANINGS = ["normal", "abnormal", "fault", "action", "neutral"];
const STALE_MS = 2000;
const RETRY_MS = 1000;
const LONG_HEADLINE = 32; // characters: a longer headline gets a smaller size to stay on one line

const screen = {
  source: null,
  connected: false,
  lastTickAt: 0,
  videoGen: 0,
  videoWaiting: false,
  state: null,
  tick: null,
};

function $(id) { return document.getElementById(id); }

function esc(text) {
  return String(text ?? "").replace(/[&<>"']/g, (c) => (
    { "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" }[c]));
}

function symbol(meaning, extra = "") {
  return `<svg class="sym ${extra}" aria-hidden="true"><use href="#sym-${meaning}"/></svg>`;
}

function setMeaning(el, meaning) {
  for (const m of MEANINGS) el.classList.remove(`meaning-${m}`);
  if (meaning) el.classList.add(`meaning-${meaning}`);
  el.dataset.meaning = meaning || "";
  const use = el.querySelector(":scope > svg.sym use");
  if (use && meaning) use.setAttribute("href", `#sym-${meaning}`);
}

function setConn(text, meaning) {
  const el = $("conn");
  el.innerHTML = `${symbol(meaning)}<span>${esc(text)}</span>`;
  setMeaning(el, meaning);
}

function showInstruction(text, detail, meaning, kind) {
  $("instr-text").textContent = text;
  $("instr-detail").textContent = detail || "";
  const box = $("instruction");
  box.dataset.kind = kind || "";
  box.classList.toggle("long", text.length > LONG_HEADLINE);
  setMeaning(box, meaning);
}

function renderUnit(s) {
  const unit = s.unit;
  $("serial").textContent = unit ? unit.serial : "no unit";
  $("rework-tag").hidden = !(unit && unit.rework);
  const result = $("unit-result");
  if (unit && unit.result) {
    result.hidden = false;
    result.innerHTML = `${symbol(unit.result.meaning)}${esc(unit.result.word)}`;
    setMeaning(result, unit.result.meaning);
  } else {
    result.hidden = true;
  }
  $("progress-count").textContent = unit && unit.total ? `${unit.done} of ${unit.total} done` : "";
  $("positions").innerHTML = s.positions.map((p) => (
    `<li class="state-${p.state} meaning-${p.meaning}" data-zone="${esc(p.zone)}" ` +
    `data-state="${p.state}" title="${esc(p.label)}">` +
    `<span class="num">${esc(p.name)}</span>` +
    `<span class="word">${symbol(p.meaning)}${esc(p.word)}</span></li>`)).join("");
}

function fmt(value, digits, unit) {
  return value === null || value === undefined ? "" : `${Number(value).toFixed(digits)} ${unit}`;
}

function renderResult(r) {
  const body = $("result-body");
  if (!r) {
    body.className = "small";
    body.textContent = "none yet";
    return;
  }
  body.className = "";
  body.dataset.ok = r.ok ? "yes" : "no";
  const values = [fmt(r.torque_nm, 2, "Nm"), fmt(r.angle_deg, 1, "°")].filter(Boolean);
  body.innerHTML =
    `<div>Position <strong>${esc(r.position)}</strong>, attempt ${esc(r.attempt)}</div>` +
    `<div><span class="verdict meaning-${r.meaning}">${symbol(r.meaning)}${esc(r.word)}</span>` +
    `<span class="values">${esc(values.join(" · "))}</span></div>`;
}

function renderAlarms(alarms) {
  $("alarms").innerHTML = alarms.map((a) => (
    `<li class="meaning-${a.meaning}" data-code="${esc(a.code)}">${symbol(a.meaning)}` +
    `<div><div class="what">${esc(a.words)}</div>` +
    (a.todo ? `<div class="todo">${esc(a.todo)}</div>` : "") + "</div></li>")).join("");
}

function renderAck(ack) {
  const button = $("ack");
  button.hidden = !ack.needed;
  button.disabled = !ack.allowed;
  if (!ack.needed) $("ack-note").textContent = "";
  else if (!ack.allowed) $("ack-note").textContent = ack.why_not;
}

function renderPicture(p) {
  const box = $("picture");
  box.hidden = !p;
  if (!p) return;
  setMeaning(box, p.meaning);
  $("picture-words").innerHTML = `${symbol(p.meaning)}${esc(p.words)}` +
    (p.reason ? ` (${esc(p.reason)})` : "");
  $("picture-figures").textContent = p.figures.map(([name, value]) => `${name} ${value}`)
    .join(" · ");
}

function renderTool(tool) {
  $("tool-words").textContent = tool.words;
  $("tool-reason").textContent = tool.reason;
  setMeaning($("tool"), tool.meaning);
}

function render(s) {
  $("station-name").textContent = s.station || "stationcheck";
  $("mode-tag").textContent = s.mode === "replay" ? "REPLAY of a recording" : "LIVE";
  const i = s.instruction;
  showInstruction(i.text, i.detail, i.meaning, i.kind);
  renderTool(s.tool);
  renderUnit(s);
  renderResult(s.last_result);
  renderAlarms(s.alarms);
  renderPicture(s.picture);
  renderAck(s.ack);
  const ended = $("ended");
  ended.hidden = !s.ended;
  if (s.ended) {
    ended.textContent = endedWords(s.ended);
    setMeaning(ended, ordinaryEnd(s.ended) ? "neutral" : "fault");
  }
}

function ordinaryEnd(ended) { return ended === "ended" || ended === "stopped"; }

function endedWords(ended) {
  return ended === "ended" ? "The run has ended. The tool is off."
    : ended === "stopped" ? "The station program was stopped. The tool is off."
    : `The station program stopped (${ended}). The tool is off.`;
}

function showEnded() {
  // The program closed the stream after saying the run ended (a replay or demo that finished,
  // or Ctrl-C): an ordinary end, not a lost connection. The screen still reconnects by itself
  // if a new run starts on the same address.
  document.body.classList.add("ended");
  setConn("Run over", "neutral");
  $("camera-note").textContent = "Last picture of the run";
  const s = screen.state;
  render(s);
}

function startVideo() {
  // The picture is an endless multipart stream: start it only after the page's load event,
  // or the page would never finish loading.
  if (document.readyState !== "complete") {
    if (!screen.videoWaiting) {
      screen.videoWaiting = true;
      window.addEventListener("load", () => {
        screen.videoWaiting = false;
        startVideo();
      }, { once: true });
    }
    return;
  }
  const img = $("video");
  screen.videoGen += 1;
  img.src = `api/video.mjpg?n=${screen.videoGen}`;
}

function goOffline(text) {
  screen.connected = false;
  document.body.classList.add("offline");
  setConn(text, "fault");
  $("camera-note").textContent = "Picture not current";
  showInstruction("Screen not connected", "Do not go on from this screen. It reconnects by "
    + "itself; if it does not within a minute, call maintenance.", "fault", "offline");
  renderTool({ words: "NO DATA", reason: "no connection: treat the tool as off",
    meaning: "neutral" });
}

function connect() {
  const source = new EventSource("api/stream");
  screen.source = source;
  source.addEventListener("open", () => {
    screen.connected = true;
    screen.lastTickAt = performance.now();
    document.body.classList.remove("offline", "ended");
    setConn("Connected", "normal");
    $("camera-note").textContent = "";
    startVideo();
    if (screen.state) render(screen.state);
  });
  source.addEventListener("state", (e) => {
    screen.state = JSON.parse(e.data);
    render(screen.state);
  });
  source.addEventListener("tick", (e) => {
    screen.tick = JSON.parse(e.data);
    screen.lastTickAt = performance.now();
    document.body.dataset.frame = screen.tick.frame;
    if (screen.connected && $("conn").dataset.meaning !== "normal") setConn("Connected", "normal");
  });
  source.addEventListener("error", () => {
    if (screen.source !== source) return;
    if (screen.state && screen.state.ended && ordinaryEnd(screen.state.ended)) showEnded();
    else goOffline("Not connected: retrying");
    if (source.readyState === EventSource.CLOSED) {
      source.close();
      setTimeout(connect, RETRY_MS);
    }
  });
}

function watchStaleness() {
  if (!screen.connected || (screen.state && screen.state.ended)) return;
  const quiet = performance.now() - screen.lastTickAt;
  if (quiet > STALE_MS) {
    setConn(`No update for ${Math.round(quiet / 1000)} s`, "abnormal");
  }
}

async function acknowledge() {
  const ack = screen.state && screen.state.ack;
  if (!ack || !ack.allowed) return;
  const note = $("ack-note");
  $("ack").disabled = true;
  try {
    const response = await fetch("api/ack", {
      method: "POST",
      headers: { "Content-Type": "application/json", "X-Stationcheck-Request": "1" },
      body: JSON.stringify({ serial: ack.serial, step: ack.step }),
    });
    const body = await response.json().catch(() => ({}));
    note.textContent = response.ok ? "Acknowledge sent" : (body.error || "Not accepted");
  } catch (err) {
    note.textContent = "Not sent: no connection";
  } finally {
    $("ack").disabled = !(screen.state && screen.state.ack.allowed);
  }
}

function init() {
  $("video").addEventListener("error", () => {
    if (screen.connected) setTimeout(startVideo, RETRY_MS);
  });
  $("ack").addEventListener("click", acknowledge);
  // the safety and privacy notes stay on screen; the shared text replaces the built-in one
  fetch("/common/caution.html").then((r) => (r.ok ? r.text() : null)).then((text) => {
    if (text) $("notes").innerHTML = text;
  }).catch(() => { /* the built-in text stays */ });
  goOffline("Connecting");
  showInstruction("Connecting to the station", "", "neutral", "offline");
  setInterval(watchStaleness, 500);
  connect();
}

init();
