"""``run`` on the sample video's first unit with the station simulator presenting the
sample's station inputs over Modbus TCP (real pymodbus server and client on loopback) gives
the same steps as ``replay`` of the same frames with the same inputs.

The live run paces the video at its frame rate and the simulator presents each input at its
time, both started together, so inputs land within a frame or two of where replay applies
them: the step log must agree on every step's position, attempt, result, torque and angle
(times are not compared). About 16 s of wall time (the first unit is 467 frames at 30 fps).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.live.session import LiveSettings, run_live
from stationcheck.pipeline.session import ReplaySettings, run_replay
from stationcheck.pipeline.station_inputs import read_station_inputs
from stationcheck.plc.simulator import StationSimulator
from stationcheck.store.sqlite_log import SqliteStepLog
from tests.plc.conftest import free_port

REPO = Path(__file__).resolve().parents[2]
CONFIG = REPO / "configs" / "demo_station.yaml"
VIDEO = REPO / "sample_video" / "demo_station.mp4"
INPUTS = REPO / "sample_video" / "demo_station_inputs.jsonl"
FIRST_UNIT_FRAMES = 467  # PC-000101, the clean unit (sample_video/README.md)
FPS = 30.0


def steps_of(log_path: Path) -> list[tuple[object, ...]]:
    log = SqliteStepLog(log_path)
    try:
        rows = []
        for unit in log.units().rows:
            for step in log.steps(unit.serial):
                rows.append((step.serial, step.pass_no, step.step, step.kind, step.result,
                             step.position, step.attempt, step.torque_nm, step.angle_deg))
        return rows
    finally:
        log.close()


@pytest.mark.slow
@pytest.mark.skipif(not (VIDEO.is_file() and INPUTS.is_file()), reason="no sample video")
def test_first_unit_live_with_simulator_matches_replay(tmp_path: Path) -> None:
    end_s = FIRST_UNIT_FRAMES / FPS
    script = [o for o in read_station_inputs(INPUTS) if o.t_s < end_s]
    sim = StationSimulator("127.0.0.1", free_port(), script=script).serve()
    try:
        stats = run_live(
            LiveSettings(config_path=CONFIG, log_path=tmp_path / "live.sqlite",
                         source=str(VIDEO), link="client", host="127.0.0.1", port=sim.port,
                         max_frames=FIRST_UNIT_FRAMES,
                         # the simulator shares this process (and its GIL) with the model
                         timeout_ms=250.0),
            on_ready=lambda loop: sim.begin())
    finally:
        sim.stop()
    assert stats.frames >= FIRST_UNIT_FRAMES * 0.9  # paced: few frames dropped
    inputs_file = tmp_path / "inputs.jsonl"
    inputs_file.write_text("".join(line for line in INPUTS.read_text().splitlines(True)
                                   if float(line.split('"t_s": ')[1].split(",")[0]) < end_s))
    run_replay(ReplaySettings(config_path=CONFIG, log_path=tmp_path / "replay.sqlite",
                              video=VIDEO, inputs=inputs_file, max_frames=FIRST_UNIT_FRAMES))
    live, replayed = steps_of(tmp_path / "live.sqlite"), steps_of(tmp_path / "replay.sqlite")
    assert sum(row[3] == "fasten" for row in replayed) >= 6  # the unit's six positions
    assert live == replayed
