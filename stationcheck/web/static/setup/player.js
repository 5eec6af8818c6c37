// Plays a dry run's annotated frames (fetched one by one from the server) in the picture area.

const box = document.getElementById("player");
const image = document.getElementById("player-frame");
const play = document.getElementById("player-play");
const seek = document.getElementById("player-seek");
const time = document.getElementById("player-time");

let run = null;
let timer = null;

function show(index) {
  if (!run || !run.frames) return;
  const i = Math.max(0, Math.min(run.frames - 1, index));
  seek.value = String(i);
  image.src = `/api/dry-run/frame?run=${run.run}&i=${i}`;
  image.hidden = false;
  document.getElementById("player-empty").hidden = true;
  time.textContent = `${run.frame_times_s[i].toFixed(2)} s`;
}

function stop() {
  clearInterval(timer);
  timer = null;
  play.textContent = "Play";
}

export function showPlayer(result, atS) {
  run = result;
  stop();
  seek.max = String(Math.max(0, result.frames - 1));
  let index = 0;
  if (atS !== undefined && atS !== null) {
    index = result.frame_times_s.findIndex((t) => t >= atS - 1e-6);
    if (index < 0) index = result.frames - 1;
  }
  show(index);
}

export function setPlayerVisible(visible) {
  box.hidden = !visible;
  if (!visible) stop();
}

export function installPlayer() {
  seek.addEventListener("input", () => { stop(); show(Number(seek.value)); });
  play.addEventListener("click", () => {
    if (timer) { stop(); return; }
    if (!run) return;
    const period = run.frame_times_s.length > 1
      ? (run.frame_times_s[1] - run.frame_times_s[0]) * 1000 : 66;
    play.textContent = "Pause";
    timer = setInterval(() => {
      const next = Number(seek.value) + 1;
      if (next >= run.frames) { stop(); return; }
      show(next);
    }, period);
  });
}
