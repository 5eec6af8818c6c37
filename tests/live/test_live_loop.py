"""The live loop with an in-memory link: enable decisions reach the coil; the watchdogs drop
it when frames stop, when the link fails, and when the loop itself fails."""

from __future__ import annotations

import threading

import pytest

from stationcheck.core.observations import Observation
from stationcheck.core.records import Frame, Keypoints
from stationcheck.errors import ModelError
from stationcheck.plc.link import MemoryLink
from tests.live.conftest import AT_A, StallingSource, live_loop, memory_link_with_unit
from tests.plc.conftest import wait_until

ENABLE_DEADLINE_S = 0.100  # drop enable within 100 ms of the cause


def run_in_thread(loop: object) -> tuple[threading.Thread, dict[str, object]]:
    box: dict[str, object] = {}

    def target() -> None:
        try:
            box["stats"] = loop.run()  # type: ignore[attr-defined]
        except BaseException as exc:  # noqa: BLE001 - inspected by the test
            box["error"] = exc

    thread = threading.Thread(target=target, daemon=True)
    thread.start()
    return thread, box


def coil_on(link: MemoryLink) -> bool:
    return link.value("tool_enable") == [1]


def test_enable_then_no_new_frame_drops_it_within_100_ms() -> None:
    source = StallingSource(frames=40)
    link = memory_link_with_unit()
    loop = live_loop(source, link)
    thread, box = run_in_thread(loop)
    try:
        wait_until(lambda: coil_on(link), what="enable at the first position")
        wait_until(lambda: loop.grabber.counts.grabbed == 40, what="frames end")
        last_frame_at = loop._last_frame_at  # when the loop had the last frame in hand
        wait_until(lambda: not coil_on(link), timeout_s=1.0, what="enable dropped")
    finally:
        source.release.set()
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"
    first_off = min(t for t, address, on in link.coil_writes
                    if address == 0 and not on and t > last_frame_at)
    assert first_off - last_frame_at < ENABLE_DEADLINE_S, first_off - last_frame_at
    assert "error" not in box
    assert any("no new frame" in alarm for alarm in loop.watchdogs.alarms)
    assert loop.decisions.last_output is not None
    assert not loop.decisions.last_output.tool_enabled


def test_link_failure_inhibits_and_alarms() -> None:
    source = StallingSource(frames=400)
    link = memory_link_with_unit()
    loop = live_loop(source, link)
    thread, box = run_in_thread(loop)
    try:
        wait_until(lambda: coil_on(link), what="enable")
        link.fail = ConnectionError("cable pulled")
        wait_until(lambda: loop.watchdogs.link_ok is False, timeout_s=ENABLE_DEADLINE_S * 5,
                   what="link loss seen by the loop")
        output = loop.decisions.last_output
        assert output is not None
        wait_until(lambda: loop.decisions.last_output is not None
                   and not loop.decisions.last_output.tool_enabled, what="inhibit")
        assert "link_lost" in loop.decisions.last_output.alarms
        link.fail = None
        wait_until(lambda: loop.watchdogs.link_ok is True, what="link back")
    finally:
        source.release.set()
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"
    assert "error" not in box


class FailingDetector:
    """Sees the tool at A, then raises a stationcheck error (which ends the loop)."""

    keypoint_names = ("tip",)

    def __init__(self, fail_at: int) -> None:
        self.fail_at = fail_at

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        from stationcheck.core.records import Keypoint

        if frame.index >= self.fail_at:
            raise ModelError("model file vanished")
        return Keypoints(frame.index, frame.t_s, (Keypoint("tip", *AT_A, 0.99),))


def test_error_in_the_loop_ends_with_enable_off() -> None:
    source = StallingSource(frames=60)
    link = memory_link_with_unit()
    loop = live_loop(source, link, detector=FailingDetector(fail_at=40))
    thread, box = run_in_thread(loop)
    try:
        wait_until(lambda: "error" in box or coil_on(link), what="enable or error")
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"
    finally:
        source.release.set()
    assert isinstance(box.get("error"), ModelError)
    assert any(on for _, address, on in link.coil_writes if address == 0)  # it was enabled
    assert link.value("tool_enable") == [0]  # and the last write is off


class BrokenJudge:
    """An image judgement that fails on one frame (on the judging thread)."""

    def __init__(self, fail_at: int) -> None:
        self.fail_at = fail_at

    def judge(self, frame: Frame, pose: object, output: object) -> list[Observation]:
        if frame.index == self.fail_at:
            raise RuntimeError(f"judgement broke on frame {frame.index}")
        return []


def test_an_error_on_the_judging_thread_ends_the_loop_with_enable_off() -> None:
    source = StallingSource(frames=60)
    link = memory_link_with_unit()
    loop = live_loop(source, link, judges=[BrokenJudge(fail_at=40)])
    thread, box = run_in_thread(loop)
    try:
        wait_until(lambda: "error" in box, what="the judgement's error")
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"
    finally:
        source.release.set()
    assert "judgement broke on frame 40" in str(box["error"])
    assert any(on for _, address, on in link.coil_writes if address == 0)  # it was enabled
    assert link.value("tool_enable") == [0]  # and the last write is off
    assert loop.path._executor is None  # the judging thread was stopped


@pytest.mark.parametrize("healthy_frames", [30])
def test_heartbeat_counts_only_while_frames_come(healthy_frames: int) -> None:
    source = StallingSource(frames=healthy_frames)
    link = memory_link_with_unit()
    loop = live_loop(source, link)
    thread, _ = run_in_thread(loop)
    try:
        wait_until(lambda: loop.grabber.counts.grabbed == healthy_frames, what="frames")
        wait_until(lambda: loop.watchdogs.frame_stale, what="stale")
        beat = link.value("heartbeat")[0]
        cycles = loop.stats.cycles
        wait_until(lambda: loop.stats.cycles > cycles + 5, what="more loop cycles")
        assert link.value("heartbeat")[0] == beat  # stale: no counting
        assert 0 < beat <= healthy_frames
    finally:
        source.release.set()
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"


class NanDetector:
    """Sees the tool at A, then its model output turns to NaN (the record refuses it)."""

    keypoint_names = ("tip",)

    def __init__(self, nan_from: int) -> None:
        self.nan_from = nan_from

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        from stationcheck.core.records import Keypoint

        x = float("nan") if frame.index >= self.nan_from else AT_A[0]
        return Keypoints(frame.index, frame.t_s, (Keypoint("tip", x, AT_A[1], 0.99),))


def test_nan_detector_output_inhibits_and_the_loop_goes_on() -> None:
    source = StallingSource(frames=400)
    link = memory_link_with_unit()
    loop = live_loop(source, link, detector=NanDetector(nan_from=60))
    thread, box = run_in_thread(loop)
    try:
        wait_until(lambda: coil_on(link), what="enable")
        wait_until(lambda: loop.stats.frames >= 62, what="the NaN frames reached")

        def inhibited_for_the_detector() -> bool:
            output = loop.decisions.last_output
            return (output is not None and "detector_fault" in output.alarms
                    and not output.tool_enabled and not coil_on(link))

        wait_until(inhibited_for_the_detector, what="enable dropped for the detector fault")
    finally:
        source.release.set()
        thread.join(5.0)
        assert not thread.is_alive(), "the live loop did not end"
    assert "error" not in box
    assert loop.stats.frames >= 60  # the NaN frames were reached and the loop went on
