"""The operator screen in a real browser (Debian chromium through Playwright).

The sample video's unit PC-000104 (frames 1532-2107; sample_video/demo_station_expected.jsonl)
is replayed with the ground-truth detector and judgements: screw 3 is NOK twice (frames 1880
and 1920, 3.92 Nm / 52.4 deg first), is left for rework, the unit is not released (2006), and
the rework pass (from 2051) fastens screw 3 again. The replay runs as fast as it can; a
:class:`Holds` sink holds the loop at each moment until the page has shown it.
"""

from __future__ import annotations

import threading
from pathlib import Path
from typing import Any

from playwright.sync_api import expect

from stationcheck.core.observations import UnitStarted
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.pipeline.replay_report import ReplayReport
from stationcheck.pipeline.session import ReplaySettings, run_replay
from stationcheck.web.operator.feed import OperatorFeed
from tests.web.operator.conftest import (
    CONFIG,
    INPUTS,
    SHOTS,
    TRUTH,
    VIDEO,
    Holds,
    Station,
    needs_sample,
    serve,
    wait_for,
)

FIRST_FRAME = 1525  # just before PC-000104 is started (frame 1532)
LAST_FRAME = 2110  # just after its rework pass is released (frame 2107)


def _target(output: Output) -> str | None:
    return output.target.zone if output.target is not None else None


MOMENTS: list[tuple[str, Any]] = [
    ("tool on at 5", lambda o: o.tool_enabled and _target(o) == "screw_5"),
    ("fasten 3", lambda o: o.guidance.kind == "fasten" and _target(o) == "screw_3"),
    ("NOK, retry 3", lambda o: _target(o) == "screw_3" and o.attempt == 2),
    ("3 left for rework", lambda o: any(p.zone == "screw_3" for p in o.failed_positions)
     and o.unit_status == "running"),
    ("not released", lambda o: o.unit_status == "nok"),
    ("rework 3", lambda o: o.guidance.kind == "rework" and _target(o) == "screw_3"),
    ("released", lambda o: o.unit_status == "ok" and o.rework),
]


def shoot(page: Any, name: str, feed: OperatorFeed | None = None) -> None:
    """A screenshot; with ``feed``, once the newest picture has gone out to the viewers, so
    the picture and the words show the same moment."""
    if feed is not None:
        latest = feed.latest
        assert latest is not None
        wait_for(lambda: feed.last_sent_seq >= latest.seq, "the newest picture to go out")
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{name}.png"))


@needs_sample
def test_screen_follows_a_unit_through_nok_and_rework(browser: Any, page: Any,
                                                      demo_plan: StationPlan,
                                                      tmp_path: Path) -> None:
    feed = OperatorFeed(demo_plan, mode="replay")
    served = serve(feed)
    holds = Holds(MOMENTS)
    reports: list[ReplayReport] = []
    errors: list[BaseException] = []

    def replay() -> None:
        try:
            reports.append(run_replay(ReplaySettings(
                config_path=CONFIG, log_path=tmp_path / "log.sqlite", video=VIDEO,
                inputs=INPUTS, truth=TRUTH, detector="truth", judges="truth",
                first_frame=FIRST_FRAME, max_frames=LAST_FRAME - FIRST_FRAME), None,
                [feed, holds]))
        except BaseException as exc:  # noqa: BLE001 - reported on the test's thread
            errors.append(exc)
            holds.stopped.set()

    big = browser.new_context(viewport={"width": 1920, "height": 1080}).new_page()
    runner = threading.Thread(target=replay, name="replay", daemon=True)
    try:
        page.goto(served.url)
        big.goto(served.url)  # a second screen watches the same run
        runner.start()
        text, detail = page.locator("#instr-text"), page.locator("#instr-detail")

        holds.wait(0)
        expect(text).to_have_text("Fasten position 5")
        expect(page.locator("#progress-count")).to_have_text("3 of 6 done")
        expect(page.locator("#serial")).to_have_text("PC-000104")
        expect(page.locator("#tool-words")).to_have_text("TOOL ON")
        expect(page.locator("#tool")).to_have_attribute("data-meaning", "normal")
        wait_for(lambda: page.evaluate("document.getElementById('video').naturalWidth") == 640,
                 "the camera picture")
        shoot(page, "1280x800_tool_on", feed)
        holds.release(0)

        holds.wait(1)
        expect(text).to_have_text("Fasten position 3")
        expect(detail).to_contain_text("attempt 1 of 2")
        holds.release(1)

        holds.wait(2)
        result = page.locator("#result-body")
        expect(result).to_contain_text("Position 3, attempt 1")
        expect(result.locator(".verdict")).to_have_text("NOK")
        expect(result).to_contain_text("3.92 Nm")
        expect(result).to_contain_text("52.4 °")
        expect(text).to_have_text("NOK at position 3: fasten it again")
        expect(detail).to_have_text("Torque 3.92 Nm below its limit 4.50 Nm, angle 52.4° above "
                                    "its limit 45.0° · attempt 2 of 2")  # configs/demo_station
        expect(page.locator("#instruction")).to_have_attribute("data-meaning", "abnormal")
        expect(page.locator('#positions li[data-zone="screw_3"]')).not_to_contain_text("ON")
        shoot(page, "1280x800_nok_retry", feed)
        holds.release(2)

        holds.wait(3)
        chip = page.locator('#positions li[data-zone="screw_3"]')
        expect(chip).to_have_attribute("data-state", "failed")
        expect(chip).to_contain_text("NOK")
        expect(text).to_have_text("NOK at position 3: go on to position 6")
        expect(page.locator("#instruction")).to_have_attribute("data-meaning", "fault")
        shoot(page, "1280x800_left_for_rework", feed)
        holds.release(3)

        holds.wait(4)
        expect(text).to_have_text("Unit PC-000104 NOK: to rework")
        expect(detail).to_have_text("Not released. Rework needed at position 3.")
        expect(page.locator("#unit-result")).to_have_text("NOK")
        shoot(page, "1280x800_not_released", feed)
        holds.release(4)

        holds.wait(5)
        expect(text).to_have_text("Rework position 3")
        expect(page.locator("#rework-tag")).to_be_visible()
        expect(page.locator('#positions li[data-zone="screw_3"]')).to_have_attribute(
            "data-state", "target")
        expect(big.locator("#instr-text")).to_have_text("Rework position 3")
        shoot(page, "1280x800_rework", feed)
        shoot(big, "1920x1080_rework", feed)
        holds.release(5)

        holds.wait(6)
        expect(text).to_have_text("Unit PC-000104 OK")
        holds.release(6)
        runner.join(timeout=30)
        assert not errors, errors
        expect(page.locator("#ended")).to_contain_text("The run has ended")
        served.close()  # a demo without a terminal closes its screen at once
        expect(page.locator("#conn")).to_have_text("Run over")
        expect(page.locator("#ended")).to_contain_text("The run has ended")
        assert "call maintenance" not in page.locator("body").inner_text()
        assert reports and reports[0].units, "the replay summarised no unit"
    finally:
        holds.on_stop(None)  # lets a held loop go if an expectation failed
        runner.join(timeout=30)
        big.context.close()
        served.close()


def test_acknowledge_reaches_the_sequencer_and_screen_reconnects(page: Any,
                                                                 confirm_plan: StationPlan
                                                                 ) -> None:
    station = Station(confirm_plan)
    station.apply(lambda t_s: UnitStarted(t_s=t_s, serial="TEST-001"))
    feed = OperatorFeed(confirm_plan, mode="live", decisions=station.decisions)
    feed.on_frame(station.frame())
    served = serve(feed)
    port = int(served.server.server_address[1])
    try:
        page.goto(served.url)
        expect(page.locator("#instr-text")).to_have_text("Fit the type label")
        button = page.locator("#ack")
        expect(button).to_be_enabled()
        shoot(page, "1280x800_acknowledge")
        button.click()
        expect(page.locator("#ack-note")).to_have_text("Acknowledge sent")
        assert station.output.guidance.kind == "acknowledge"  # applied by the loop, not the web
        feed.on_frame(station.frame())  # the loop's next frame takes the press
        assert feed.acks.applied == 1
        assert station.output.guidance.kind == "fasten"
        expect(page.locator("#instr-text")).to_have_text("Fasten position 1")
        expect(button).to_be_hidden()

        served.close()  # the station program stops ...
        expect(page.locator("#conn")).to_contain_text("Not connected")
        expect(page.locator("#instr-text")).to_have_text("Screen not connected")
        shoot(page, "1280x800_not_connected")

        feed = OperatorFeed(confirm_plan, mode="live", decisions=station.decisions)
        served = serve(feed, port)  # ... and comes back on the same port
        feed.on_frame(station.frame())
        expect(page.locator("#conn")).to_have_text("Connected", timeout=15_000)
        expect(page.locator("#instr-text")).to_have_text("Fasten position 1")
    finally:
        served.close()


def test_safety_and_privacy_notes_are_always_on_screen(page: Any, confirm_plan: StationPlan
                                                       ) -> None:
    station = Station(confirm_plan)
    feed = OperatorFeed(confirm_plan, mode="live", decisions=station.decisions)
    feed.on_frame(station.frame())
    served = serve(feed)
    try:
        for size in ({"width": 1280, "height": 800}, {"width": 1920, "height": 1080}):
            page.set_viewport_size(size)
            page.goto(served.url)
            expect(page.locator("#instr-text")).to_have_text("Waiting for the next unit")
            notes = page.locator("#notes")
            expect(notes).to_contain_text("not a safety function")
            expect(notes).to_contain_text("the camera films the people who work here")
            expect(notes).to_contain_text("retention days")  # the shared text has come
            box = notes.bounding_box()
            assert box is not None and box["y"] + box["height"] <= size["height"], box
            shoot(page, f"{size['width']}x{size['height']}_notes")
    finally:
        served.close()
