"""A station process killed with SIGKILL mid-unit loses no committed event; on restart the open
unit is rebuilt from its events and finished."""

from __future__ import annotations

import itertools
import json
import os
import selectors
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from step_log_helpers import Batch, append_all, sequencer_batches

from stationcheck.core.progress import UnitProgress, rebuild_unit
from stationcheck.core.sequencer import Sequencer
from stationcheck.store import SqliteStepLog
from stationcheck.store.synthetic import POSITIONS, StationScript, demo_plan

CHILD = Path(__file__).with_name("append_child.py")
REPO = Path(__file__).resolve().parents[2]
DEADLINE_S = 60.0


def read_lines_until(proc: subprocess.Popen[bytes], done: str, deadline_s: float) -> list[str]:
    """Lines from the child's stdout until one starts with ``done`` (raw fd reads: a buffered
    reader could hold lines back while select waits)."""
    assert proc.stdout is not None
    fd = proc.stdout.fileno()
    selector = selectors.DefaultSelector()
    selector.register(fd, selectors.EVENT_READ)
    end, buffer, lines = time.monotonic() + deadline_s, b"", []
    while time.monotonic() < end:
        if not selector.select(timeout=end - time.monotonic()):
            continue
        chunk = os.read(fd, 65536)
        if not chunk:
            raise AssertionError(f"child ended early (rc {proc.poll()}) after {lines[-3:]}")
        buffer += chunk
        *complete, buffer = buffer.split(b"\n")
        for raw in complete:
            lines.append(raw.decode())
            if lines[-1].startswith(done):
                return lines
    raise AssertionError(f"no line {done!r} within {deadline_s} s; got {lines[-3:]}")


def finish(unit: UnitProgress, start_t_s: float) -> StationScript:
    """What the operator does after the restart: the rest of the current unit."""
    script = StationScript(start_t_s)
    assert unit.current_step is not None
    for step in unit.steps[unit.step_index:]:
        if step.kind == "fasten":
            for zone in (ref.zone for ref in unit.unfinished_positions):
                script.tighten(zone, True)
        elif step.kind == "check":
            script.verdict("present")
        else:
            raise AssertionError(f"unexpected step {step.kind} after the kill point")
    return script


@pytest.mark.parametrize("child_stops", ["at_kill_point", "at_end"])
def test_sigkill_mid_unit_loses_no_committed_event(tmp_path: Path, child_stops: str) -> None:
    """``at_kill_point``: the child waits right after the reported commit (the unit resumes
    mid-fasten); ``at_end``: it keeps committing while the test kills it."""
    script = StationScript().unit("PC-100", {}).frames(None, 500)
    script.start("PC-101").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    script.fasten(POSITIONS, {"p2": 1})
    batches, _ = sequencer_batches(script)
    results = [i for i, b in enumerate(batches) for e in b
               if e.kind == "tightening_result" and e.serial == "PC-101"]
    kill_after = results[1]  # PC-101's second tightening result is committed
    stream = tmp_path / "batches.jsonl"
    stream.write_text("".join(json.dumps([e.to_dict() for e in b]) + "\n" for b in batches))
    log_path = tmp_path / "station.sqlite"

    env = {**os.environ, "PYTHONPATH": str(REPO)}
    proc = subprocess.Popen(
        [sys.executable, str(CHILD), str(log_path), str(stream),
         str(kill_after if child_stops == "at_kill_point" else len(batches) - 1)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, env=env,
    )
    try:
        lines = read_lines_until(proc, f"committed {kill_after} ", DEADLINE_S)
        proc.send_signal(signal.SIGKILL)
        assert proc.wait(timeout=DEADLINE_S) == -signal.SIGKILL
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        for pipe in (proc.stdin, proc.stdout):
            if pipe is not None:
                pipe.close()
    reported_seq = int(lines[-1].split()[2])

    # SQLite's own checker: the file is sound after the kill (https://www.sqlite.org/pragma.html)
    conn = sqlite3.connect(log_path)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()

    flat = [e for b in batches for e in b]
    batch_ends = list(itertools.accumulate(len(b) for b in batches))
    with SqliteStepLog(log_path) as log:
        stored = log.events()
        assert [s.seq for s in stored] == list(range(1, len(stored) + 1))
        assert len(stored) >= reported_seq  # every reported commit is there
        assert len(stored) in batch_ends  # whole batches only: a step is saved or not at all
        assert [s.event for s in stored] == flat[: len(stored)]

        unit = log.open_unit()
        assert unit is not None and unit.serial == "PC-101" and unit.is_open
        assert unit == rebuild_unit(flat[: len(stored)])
        assert sum(p.result == "OK" for p in unit.positions) >= 2
        if child_stops == "at_kill_point":
            assert len(stored) == batch_ends[kill_after]
            assert unit.current_step is not None and unit.current_step.kind == "fasten"

        sequencer = Sequencer(demo_plan())
        state = sequencer.rebuild(log.open_unit_events())
        more: list[Batch]
        more, _ = sequencer_batches(finish(unit, stored[-1].event.t_s + 1.0), state)
        append_all(log, more)

        nok_before_kill = sum(e.kind == "tightening_result" and e.serial == "PC-101"
                              and e.result == "NotOK" for e in flat[: len(stored)])
        finished = log.unit("PC-101")
        assert finished is not None
        assert (finished.status, finished.passes) == ("OK", 1)
        assert finished.retries == nok_before_kill
        decided = [s.position for s in log.steps("PC-101") if s.position_result == "OK"]
        assert decided == list(POSITIONS)
        first = log.unit("PC-100")
        assert first is not None and first.first_time_through
