"""The screen's feed and routes without a browser: latest-only hand-over, the two streams,
acknowledge presses on their way to the sequencer, real-time pacing."""

from __future__ import annotations

import http.client
import json
import threading
from collections.abc import Callable
from typing import Any

import cv2
import numpy as np
import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.observations import OperatorAck, UnitStarted
from stationcheck.core.plan import StationPlan
from stationcheck.web.operator.feed import OperatorFeed
from stationcheck.web.operator.operator_routes import PART_HEAD
from stationcheck.web.operator.pacing import RealTimePacer
from tests.web.operator.conftest import Served, Station, blank_image, wait_for, wait_frame


def open_stream(served: Served, path: str) -> tuple[http.client.HTTPConnection, Any]:
    host, port = served.server.server_address[:2]
    conn = http.client.HTTPConnection(str(host), int(port), timeout=10)
    conn.request("GET", path)
    return conn, conn.getresponse()


def read_event(response: Any, name: str) -> dict[str, Any]:
    """The data of the next server-sent event called ``name``."""
    current = None
    while True:
        line = response.fp.readline().decode().rstrip("\n")
        if line.startswith("event: "):
            current = line[len("event: "):]
        elif line.startswith("data: ") and current == name:
            data: dict[str, Any] = json.loads(line[len("data: "):])
            return data


def test_loop_hands_over_without_waiting_for_a_stalled_screen(confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    feed = OperatorFeed(confirm_plan, mode="live")
    go_on = threading.Event()
    drawing = threading.Event()
    draw = feed._picture

    def stalled(handed: Any) -> bytes:
        drawing.set()
        go_on.wait(10)
        return draw(handed)

    feed._picture = stalled  # type: ignore[method-assign]
    try:
        with feed.watching_pictures():
            feed.on_frame(station.frame())
            drawing.wait(10)  # the drawing thread is now stuck on frame 0
            for _ in range(300):
                feed.on_frame(station.frame())  # returns at once every time
            assert feed.frames_handed == 301
            assert feed.frames_rendered == 0
            go_on.set()
            newest = wait_frame(feed, lambda f: f.frame_index == 300, "the newest frame")
        assert newest.jpeg is not None
        assert feed.frames_rendered <= 3, "frames in between must be skipped, not queued"
    finally:
        go_on.set()
        feed.close()


def test_state_stream_sends_the_state_then_a_tick_per_frame(
        served_factory: Callable[..., Served], confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    station.apply(lambda t_s: UnitStarted(t_s=t_s, serial="TEST-002"))
    served = served_factory(confirm_plan, mode="live", decisions=station.decisions)
    served.feed.on_frame(station.frame())
    conn, response = open_stream(served, "/api/stream")
    try:
        assert response.getheader("Content-Type").startswith("text/event-stream")
        state = read_event(response, "state")
        assert state["instruction"]["text"] == "Fit the type label"
        assert state["unit"]["serial"] == "TEST-002"
        assert state["ack"] == {"needed": True, "allowed": True, "serial": "TEST-002",
                                "step": "fit_label", "why_not": ""}
        served.feed.on_frame(station.frame())
        tick = read_event(response, "tick")
        assert tick["frame"] >= 0
    finally:
        conn.close()


def test_picture_stream_gives_the_frame_with_its_marks_as_jpeg(
        served_factory: Callable[..., Served], confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    served = served_factory(confirm_plan, mode="live")
    served.feed.on_frame(station.frame(tip_px=(100.0, 100.0)))
    conn, response = open_stream(served, "/api/video.mjpg")
    try:
        assert "multipart/x-mixed-replace" in response.getheader("Content-Type")
        assert response.fp.read(len(PART_HEAD)) == PART_HEAD
        data = b""
        while PART_HEAD not in data:
            data += response.fp.read1(65536)
        jpeg = data[: data.index(b"\r\n" + PART_HEAD)]
        image = cv2.imdecode(np.frombuffer(jpeg, np.uint8), cv2.IMREAD_COLOR)  # OpenCV decodes
        assert image is not None and image.shape == (240, 320, 3)
        marked = np.abs(image.astype(int) - blank_image().astype(int)).max(axis=2) > 40
        assert marked[80:120, 80:120].any(), "zone outline and tip drawn at screw 1"
        assert not marked[200:, 250:].any(), "nothing drawn far from the zones"
    finally:
        conn.close()


@pytest.mark.parametrize(("mode", "body", "status"), [
    ("live", {"serial": "TEST-003", "step": "fit_label"}, 202),
    ("replay", {"serial": "TEST-003", "step": "fit_label"}, 403),
    ("live", {"serial": "TEST-003", "step": "fasten"}, 409),
    ("live", {"serial": "OTHER", "step": "fit_label"}, 409),
    ("live", {"serial": "", "step": "fit_label"}, 400),
    ("live", ["not", "an", "object"], 400),
])
def test_acknowledge_press_is_checked_then_applied_by_the_loop(
        served_factory: Callable[..., Served], confirm_plan: StationPlan, mode: str,
        body: Any, status: int) -> None:
    station = Station(confirm_plan)
    station.apply(lambda t_s: UnitStarted(t_s=t_s, serial="TEST-003"))
    decisions = station.decisions if mode == "live" else None
    served = served_factory(confirm_plan, mode=mode, decisions=decisions)
    served.feed.on_frame(station.frame())
    wait_frame(served.feed, lambda f: f.steady["ack"]["needed"], "the acknowledge step")
    got, answer = served.request("POST", "/api/ack", json.dumps(body).encode(),
                                 {"Content-Type": "application/json",
                                  "X-Stationcheck-Request": "1"})
    assert got == status, answer
    assert station.output.guidance.kind == "acknowledge"  # nothing applied on the web thread
    served.feed.on_frame(station.frame())
    assert served.feed.acks.applied == (1 if status == 202 else 0)
    moved_on = station.output.guidance.kind == "fasten"
    assert moved_on == (status == 202)


def test_a_press_for_a_step_that_moved_on_is_dropped(confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    station.apply(lambda t_s: UnitStarted(t_s=t_s, serial="TEST-004"))
    feed = OperatorFeed(confirm_plan, mode="live", decisions=station.decisions)
    try:
        feed.on_frame(station.frame())
        from stationcheck.web.operator.acknowledge import AckPress

        feed.acks.post(AckPress("TEST-004", "fit_label"))
        station.apply(lambda t_s: OperatorAck(t_s=t_s))  # acknowledged by the PLC meanwhile
        feed.on_frame(station.frame())
        assert (feed.acks.applied, feed.acks.dropped) == (0, 1)
        assert station.output.step_id == "fasten"  # one step on, not two
    finally:
        feed.close()


def test_end_of_run_shows_the_tool_off(confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    feed = OperatorFeed(confirm_plan, mode="replay")
    try:
        feed.on_frame(station.frame())
        feed.on_stop(RuntimeError("camera unplugged"))
        ended = wait_frame(feed, lambda f: "ended" in f.steady, "the end of the run")
        assert ended.steady["ended"] == "stopped: camera unplugged"
        assert ended.steady["tool"]["words"] == "TOOL OFF"
        assert ended.steady["tool"]["enabled"] is False
    finally:
        feed.close()


@pytest.mark.parametrize(("speed", "frame_times_s", "clock_s", "sleeps_s"), [
    (1.0, [0.0, 0.5, 1.0], [10.0, 10.1, 10.9], [0.4, 0.1]),
    (2.0, [0.0, 0.5, 1.0], [10.0, 10.1, 10.9], [0.15]),  # late for the third: no sleep
    (1.0, [3.0, 3.2], [0.0, 5.0], []),  # behind already: never sleeps
])
def test_pacer_holds_each_frame_until_its_time(speed: float, frame_times_s: list[float],
                                               clock_s: list[float],
                                               sleeps_s: list[float]) -> None:
    ticks = iter(clock_s)
    slept: list[float] = []
    pacer = RealTimePacer(speed, clock=lambda: next(ticks), sleep=slept.append)
    station_results = [_result_at(t) for t in frame_times_s]
    for result in station_results:
        pacer.on_frame(result)
    assert slept == pytest.approx(sleeps_s)


@pytest.mark.parametrize("speed", [0.0, -1.0])
def test_pacer_refuses_a_speed_that_is_not_positive(speed: float) -> None:
    with pytest.raises(ValueError, match="speed must be > 0"):
        RealTimePacer(speed)


def _result_at(t_s: float) -> Any:
    from types import SimpleNamespace

    return SimpleNamespace(sighting=SimpleNamespace(frame=SimpleNamespace(t_s=t_s)))


def test_frame_route_draws_the_newest_picture_once(served_factory: Callable[..., Served],
                                                   confirm_plan: StationPlan) -> None:
    served = served_factory(confirm_plan, mode="live")
    got, _ = served.request("GET", "/api/frame.jpg")
    assert got == 404
    served.feed.on_frame(Station(confirm_plan).frame())
    wait_for(lambda: served.feed.latest is not None, "the first frame")
    got, jpeg = served.request("GET", "/api/frame.jpg")
    assert got == 200 and jpeg[:2] == b"\xff\xd8"  # JPEG start-of-image marker (ITU T.81)


@pytest.mark.parametrize(("extra", "says_screen"), [
    (["--screen", "--screen-port", "0", "--pace", "0"], True),
    ([], False),
])
def test_replay_command_serves_the_screen_when_asked(tmp_path: Any, capsys: Any,
                                                     extra: list[str], says_screen: bool
                                                     ) -> None:
    from stationcheck.cli import main
    from tests.web.operator.conftest import CONFIG, INPUTS, TRUTH, VIDEO

    code = main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--truth", str(TRUTH), "--detector", "truth", "--judgements", "truth",
                 "--frames", "5", "--log", str(tmp_path / "log.sqlite"), "--json", *extra])
    assert code == 0
    err = capsys.readouterr().err
    assert ("Operator screen: http://127.0.0.1:" in err) == says_screen


def test_after_a_replay_the_screen_stays_up_for_a_person_until_stopped(
        confirm_plan: StationPlan) -> None:
    from stationcheck.web.operator.screen import OperatorScreen, ScreenWiring

    wiring = ScreenWiring(OperatorScreen.start(confirm_plan, mode="replay", port=0))
    assert wiring.screen is not None
    served = Served(wiring.screen.feed, wiring.screen.server)
    wiring.screen.feed.on_frame(Station(confirm_plan).frame())
    wiring.screen.feed.on_stop(None)  # the replay ended
    wiring.hold(interactive=False)  # a script goes on at once
    holder = threading.Thread(target=wiring.hold, kwargs={"interactive": True})
    holder.start()
    try:
        wait_frame(wiring.screen.feed, lambda f: "ended" in f.steady, "the end of the run")
        status, body = served.request("GET", "/api/state")
        assert status == 200 and json.loads(body)["state"]["ended"] == "ended"
        assert holder.is_alive()  # held until stopped
    finally:
        wiring.screen.close()
        holder.join(5)
    assert not holder.is_alive()


def test_a_unit_continued_after_a_restart_shows_the_positions_done_before(
        tmp_path: Any, demo_plan: StationPlan) -> None:
    """The station stops mid-unit and starts again: the screen's positions come from the
    step log, not only from what happens after the restart."""
    from types import SimpleNamespace

    from stationcheck.cli import main
    from stationcheck.pipeline.decision_core import DecisionCore
    from stationcheck.store.sqlite_log import SqliteStepLog
    from stationcheck.web.operator.screen import OperatorScreen
    from tests.web.operator.conftest import CONFIG, INPUTS, TRUTH, VIDEO

    log_path = tmp_path / "log.sqlite"
    assert main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--truth", str(TRUTH), "--detector", "truth", "--judgements", "truth",
                 "--frames", "300", "--log", str(log_path), "--json"]) == 0
    log = SqliteStepLog(log_path)
    try:
        open_unit = log.open_unit_events()
    finally:
        log.close()
    done_before = [e.zone for e in open_unit if isinstance(e, ev.PositionCompleted)]
    assert 2 <= len(done_before) < 6  # mid-unit: some of its six positions fastened

    station = Station(demo_plan)
    station.decisions = DecisionCore(demo_plan, resume_from=open_unit)
    screen = OperatorScreen.start(demo_plan, mode="live", port=0)
    try:
        screen.attach_live(SimpleNamespace(  # type: ignore[arg-type]
            decisions=station.decisions, frame_sinks=()))
        screen.feed.on_frame(station.frame())
        shown = wait_frame(screen.feed, lambda f: f.steady["unit"] is not None, "the unit")
        assert shown.steady["unit"]["serial"] == open_unit[0].serial
        assert shown.steady["unit"]["done"] == len(done_before)
        assert {p["zone"] for p in shown.steady["positions"] if p["state"] == "done"} == set(
            done_before)
    finally:
        screen.close()


def test_a_run_stopped_on_request_ends_the_screen_without_an_error(
        confirm_plan: StationPlan) -> None:
    feed = OperatorFeed(confirm_plan, mode="live")
    try:
        feed.on_frame(Station(confirm_plan).frame())
        feed.on_stop(KeyboardInterrupt())  # Ctrl-C, or SIGTERM from a service manager
        ended = wait_frame(feed, lambda f: "ended" in f.steady, "the end of the run")
        assert ended.steady["ended"] == "stopped"
        assert ended.steady["tool"]["enabled"] is False
    finally:
        feed.close()


def test_a_feed_closed_at_once_after_the_end_still_says_how_the_run_ended(
        confirm_plan: StationPlan) -> None:
    """A replay without a terminal closes its screen right after the run: the stream's last
    state must still be the ended one, or the page would read it as a lost connection."""
    from stationcheck.web.operator.operator_routes import state_events

    feed = OperatorFeed(confirm_plan, mode="replay")
    feed.on_frame(Station(confirm_plan).frame())
    feed.on_stop(None)
    feed.close()
    assert feed.latest is not None and feed.latest.steady["ended"] == "ended"
    events = b"".join(state_events(feed)).decode()
    last_state = events.rsplit("event: state\n", 1)[1]
    assert '"ended":"ended"' in last_state
