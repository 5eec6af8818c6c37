"""The enable coil watched from outside, as a PLC would: a real pymodbus client polls coil 0 of
the station simulator (a real pymodbus server on 127.0.0.1) every few milliseconds while the
live loop drives it through its Modbus client link. Each fault must turn the coil off within its
limit plus 100 ms, and the loop must go on.

The coil address (0) and the FC01 read come from the station's default address map and the
Modbus Application Protocol specification (read coils); the pymodbus client is not ours.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import onnx
import pytest
from pymodbus.client import ModbusTcpClient

from stationcheck.core.plan import Thresholds
from stationcheck.core.records import Frame, Keypoint, Keypoints
from stationcheck.live.grabber import FrameGrabber
from stationcheck.live.linked_station import LiveLoop
from stationcheck.live.watchdog import WatchdogLimits
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.simulator import StationSimulator
from stationcheck.plc.worker import LinkWorker
from stationcheck.vision.detector import load_detector
from tests.live.conftest import AT_A, PLAN
from tests.plc.conftest import free_port, wait_until
from tests.vision.conftest import blob_model_proto, coarse_info

BOUND_S = 0.100
FPS = 100.0


@dataclass
class Source:
    """Noisy frames (so the frozen-picture check learns the noise), then ``mode`` from frame
    ``switch_at``: ``freeze`` repeats the last picture, ``black`` gives black frames."""

    switch_at: int
    mode: str = "normal"
    name: str = "scripted frames"
    fps: float = FPS
    frame_count: int | None = None
    release: threading.Event = field(default_factory=threading.Event)
    yielded_at: dict[int, float] = field(default_factory=dict)

    def __iter__(self) -> Iterator[Frame]:
        rng = np.random.default_rng(0)
        base = rng.integers(40, 200, (120, 160, 3)).astype(np.float32)
        image = base.astype(np.uint8)
        for index in range(3000):
            if self.release.is_set():
                return
            if index < self.switch_at or self.mode == "normal":
                noise = rng.normal(0.0, 2.0, base.shape)
                image = np.clip(np.round(base + noise), 0, 255).astype(np.uint8)
            elif self.mode == "black":
                image = np.zeros_like(image)
            self.yielded_at[index] = time.perf_counter()
            yield Frame(index, index / self.fps, image)

    def close(self) -> None:
        self.release.set()


class TipAtA:
    """The tip at position A, unseen on black frames; from ``nan_from`` on a real onnxruntime
    session of a tiny onnx-built model whose output is NaN answers instead."""

    keypoint_names = ("tip",)

    def __init__(self, nan_model: Path | None = None, nan_from: int | None = None) -> None:
        self.nan = load_detector(nan_model) if nan_model is not None else None
        self.nan_from = nan_from

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        if self.nan is not None and self.nan_from is not None and frame.index >= self.nan_from:
            self.nan.detect(frame, tip_hint_px)  # raises: the model's output is NaN
        score = 0.0 if not frame.image.any() else 0.99
        return Keypoints(frame.index, frame.t_s, (Keypoint("tip", *AT_A, score),))


class CoilWatch:
    """A Modbus TCP client polling coil 0 every ~5 ms on its own thread."""

    def __init__(self, port: int) -> None:
        self.client = ModbusTcpClient("127.0.0.1", port=port, timeout=1, retries=0)
        self.samples: list[tuple[float, bool]] = []
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._poll, daemon=True)

    def __enter__(self) -> CoilWatch:
        self.client.connect()
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join(2.0)
        self.client.close()

    def _poll(self) -> None:
        while not self._stop.is_set():
            reply = self.client.read_coils(0, count=1, device_id=1)
            if not reply.isError():
                self.samples.append((time.perf_counter(), bool(reply.bits[0])))
            self._stop.wait(0.005)

    @property
    def on(self) -> bool:
        return bool(self.samples) and self.samples[-1][1]

    def off_after(self, t: float) -> float:
        """Seconds from ``t`` to the first poll after it that saw the coil off."""
        wait_until(lambda: any(s >= t and not v for s, v in self.samples), timeout_s=3.0,
                   what="coil off")
        return min(s for s, v in self.samples if s >= t and not v) - t


@dataclass
class Station:
    sim: StationSimulator
    loop: LiveLoop
    source: Source
    watch: CoilWatch
    error: list[BaseException]


def station(source: Source, detector: object, max_run_ms: float = 5000.0) -> Iterator[Station]:
    plan = replace(PLAN, thresholds=replace(PLAN.thresholds, max_run_ms=max_run_ms))
    assert isinstance(plan.thresholds, Thresholds)
    sim = StationSimulator("127.0.0.1", free_port()).serve()
    sim._set(serial="PC-000777", unit_sequence=1)
    link = ModbusClientLink("127.0.0.1", sim.port, timeout_ms=100.0)
    path = FramePath(plan, detector, DecisionCore(plan))  # type: ignore[arg-type]
    grabber = FrameGrabber(lambda: source, pace=True, retry=False).start()
    loop = LiveLoop(path, grabber, LinkWorker(link).start(), limits=WatchdogLimits())
    errors: list[BaseException] = []

    def run() -> None:
        try:
            loop.run()
        except BaseException as exc:  # noqa: BLE001 - the test inspects it
            errors.append(exc)

    thread = threading.Thread(target=run, daemon=True)
    thread.start()
    try:
        with CoilWatch(sim.port) as watch:
            wait_until(lambda: watch.on, timeout_s=5.0, what="enable at position A")
            yield Station(sim, loop, source, watch, errors)
    finally:
        source.release.set()
        thread.join(5.0)
        sim.stop()
    assert not thread.is_alive(), "the live loop did not end"


def test_stuck_tool_running_drops_the_coil_within_the_run_limit() -> None:
    source = Source(switch_at=10**9)
    for st in station(source, TipAtA(), max_run_ms=300.0):
        stuck_at = time.perf_counter()
        st.sim._set(tool_running=True)  # and it never comes back to 0
        assert st.watch.off_after(stuck_at) <= 0.300 + BOUND_S
        assert "run_too_long" in (st.loop.decisions.last_output or object()).alarms  # type: ignore[attr-defined]
        time.sleep(0.3)  # the coil stays off while the signal stays stuck
        assert not st.watch.on
    assert not st.error


@pytest.mark.parametrize("mode", ["freeze", "black"])
def test_a_frozen_or_black_picture_drops_the_coil_within_the_stale_time(mode: str) -> None:
    source = Source(switch_at=60, mode=mode)
    for st in station(source, TipAtA()):
        wait_until(lambda: 60 in source.yielded_at, what="the picture changes")
        if mode == "black":  # a tightening started on the last good frames
            st.sim._set(tool_running=True)
        last_change = source.yielded_at[59 if mode == "freeze" else 60]
        stale_s = PLAN.thresholds.stale_frame_ms / 1000.0
        assert st.watch.off_after(last_change) <= stale_s + BOUND_S + 0.010  # pacing: 1 frame
        alarms = (st.loop.decisions.last_output or object()).alarms  # type: ignore[attr-defined]
        assert "image_frozen" in alarms
        frames = st.loop.stats.frames
        wait_until(lambda: st.loop.stats.frames > frames + 5, what="the loop goes on")
    assert not st.error


def test_nan_from_a_real_onnx_model_drops_the_coil_and_the_loop_goes_on(tmp_path: Path) -> None:
    path = tmp_path / "nan.onnx"
    onnx.save(blob_model_proto(coarse_info(), make_nan=True), str(path))
    source = Source(switch_at=10**9)
    for st in station(source, TipAtA(nan_model=path, nan_from=60)):
        wait_until(lambda: 60 in source.yielded_at, what="the first NaN frame")
        assert st.watch.off_after(source.yielded_at[60]) <= BOUND_S + 0.010
        frames = st.loop.stats.frames
        wait_until(lambda: st.loop.stats.frames > frames + 40, what="the loop goes on")
        alarms = (st.loop.decisions.last_output or object()).alarms  # type: ignore[attr-defined]
        assert "detector_fault" in alarms
        assert not st.watch.on
    assert not st.error


def test_a_huge_grace_is_refused_by_check_and_run(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    import yaml

    from stationcheck.cli import main

    repo = Path(__file__).resolve().parents[2]
    data = yaml.safe_load((repo / "configs" / "demo_station.yaml").read_text())
    data["thresholds"]["lost_track_grace_ms"] = 1.0e12
    data["station"]["reference_frame"] = str(repo / "configs" / "demo_station" / "reference.png")
    data["camera"]["source"] = str(repo / "sample_video" / "demo_station.mp4")
    config = tmp_path / "huge_grace.yaml"
    config.write_text(yaml.safe_dump(data))
    assert main(["check", str(config)]) == 1
    assert "lost_track_grace_ms: 1e+12 ms is above the allowed 1000 ms" in capsys.readouterr().out
    sim = StationSimulator("127.0.0.1", free_port()).serve()
    try:
        code = main(["run", "--config", str(config), "--link", "client", "--port",
                     str(sim.port), "--log", str(tmp_path / "log.sqlite")])
        assert code == 2
        assert "lost_track_grace_ms" in capsys.readouterr().err
        with ModbusTcpClient("127.0.0.1", port=sim.port, timeout=1, retries=0) as client:
            assert client.read_coils(0, count=1, device_id=1).bits[0] is False
    finally:
        sim.stop()
