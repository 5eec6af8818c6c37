"""A NOK on the operator screen in a real browser (Debian chromium through Playwright): the
headline changes colour, symbol and words; the position's chip never shows a tick; the WRONG
chip is whole; the safety and privacy notes are on screen at every moment; a run that ends
reads as an ordinary end.

The colours follow IEC 60073's meanings (yellow: abnormal, the operator can put it right;
red: fault). The station is driven by hand through a real DecisionCore.
"""

from __future__ import annotations

from typing import Any

from playwright.sync_api import expect

from stationcheck.core.observations import TighteningResult, ToolRunning, UnitStarted
from stationcheck.core.plan import FastenStep, Limits, StationPlan, ZoneSpec
from stationcheck.web.operator.feed import OperatorFeed
from tests.web.operator.conftest import SHOTS, Station, serve, square

PLAN = StationPlan(
    zones=(ZoneSpec("s1", "fastener", square(100, 100), "screw 1"),
           ZoneSpec("s2", "fastener", square(200, 100), "screw 2"),
           ZoneSpec("s3", "fastener", square(150, 180), "screw 3")),
    steps=(FastenStep("fasten", ("s1", "s2", "s3"), max_attempts=2,
                      torque_nm=Limits(4.5, 5.5), angle_deg=Limits(15.0, 45.0)),),
    station="test station (test data)",
)
TIP = {"s1": (100.0, 100.0), "s2": (200.0, 100.0), "s3": (150.0, 180.0)}


def dwell(station: Station, feed: OperatorFeed, zone: str) -> None:
    """Frames with the tip at ``zone`` until the tool is enabled (the dwell after a result
    takes a few frames); at most two seconds of frames."""
    for _ in range(60):
        feed.on_frame(station.frame(TIP[zone], at=zone))
        if station.output.tool_enabled:
            return
    raise AssertionError(f"never enabled at {zone}: {station.output}")


def tighten(station: Station, feed: OperatorFeed, zone: str, ok: bool, angle_deg: float) -> None:
    """Dwell at ``zone`` until enabled, run the tool, report the result, one frame after."""
    dwell(station, feed, zone)
    station.apply(lambda t_s: ToolRunning(t_s=t_s, on=True))
    taken = station.apply(lambda t_s: TighteningResult(t_s=t_s, ok=ok, torque_nm=5.0,
                                                       angle_deg=angle_deg))
    assert [e.kind for e in taken.events][:1] == ["tightening_result"], taken.events
    station.apply(lambda t_s: ToolRunning(t_s=t_s, on=False))
    feed.on_frame(station.frame(TIP[zone], at=zone))


def notes_on_screen(page: Any) -> None:
    notes = page.locator("#notes")
    expect(notes).to_contain_text("not a safety function")
    expect(notes).to_contain_text("camera films the people")
    expect(notes).to_contain_text("data-protection")
    box = notes.bounding_box()
    height = page.viewport_size["height"]
    assert box is not None and box["height"] > 0 and box["y"] + box["height"] <= height, box


def test_nok_changes_the_headline_and_the_chip(page: Any) -> None:
    station = Station(PLAN)
    feed = OperatorFeed(PLAN, mode="live", decisions=station.decisions)
    station.decisions.add_sink(feed)  # as a live run attaches it
    served = serve(feed)
    text, detail, box = (page.locator("#instr-text"), page.locator("#instr-detail"),
                         page.locator("#instruction"))
    chip = page.locator('#positions li[data-zone="s1"]')
    try:
        station.apply(lambda t_s: UnitStarted(t_s=t_s, serial="TEST-NOK-1"))
        feed.on_frame(station.frame(TIP["s1"], at="s1"))
        page.goto(served.url)
        feed.on_frame(station.frame(TIP["s1"], at="s1"))
        expect(text).to_have_text("Fasten position 1")
        expect(box).to_have_attribute("data-meaning", "action")
        notes_on_screen(page)

        tighten(station, feed, "s1", ok=False, angle_deg=12.0)
        expect(text).to_have_text("NOK at position 1: fasten it again")
        expect(detail).to_have_text("Angle 12.0° below its limit 15.0° · attempt 2 of 2")
        expect(box).to_have_attribute("data-meaning", "abnormal")
        expect(box.locator("use")).to_have_attribute("href", "#sym-abnormal")
        dwell(station, feed, "s1")  # enabled again for the second attempt ...
        expect(chip).to_have_attribute("data-state", "retry")  # ... but no "✓ ON" beside a NOK
        expect(chip).to_contain_text("AGAIN")
        expect(chip).not_to_contain_text("ON")
        expect(chip.locator("use")).to_have_attribute("href", "#sym-abnormal")
        notes_on_screen(page)
        page.screenshot(path=str(SHOTS / "1280x800_nok_retry_headline.png"))

        feed.on_frame(station.frame(TIP["s3"], at="s3"))  # the tip dwells at the wrong screw
        wrong = page.locator('#positions li[data-zone="s3"]')
        expect(wrong).to_have_attribute("data-state", "wrong")
        word = wrong.locator(".word")
        expect(word).to_have_text("WRONG")
        fits = word.evaluate("el => el.scrollWidth <= el.clientWidth && "
                             "el.getBoundingClientRect().right <= "
                             "el.parentElement.getBoundingClientRect().right")
        assert fits, "the WRONG chip is clipped"
        page.screenshot(path=str(SHOTS / "1280x800_wrong_chip.png"))

        tighten(station, feed, "s1", ok=False, angle_deg=13.5)
        expect(text).to_have_text("NOK at position 1: go on to position 2")
        one_line = text.evaluate("el => el.getClientRects().length === 1 && "
                                 "el.getBoundingClientRect().height < 1.5 * "
                                 "parseFloat(getComputedStyle(el).lineHeight)")
        assert one_line, "the NOK headline wraps"
        expect(detail).to_contain_text("position 1 is left for rework")
        expect(box).to_have_attribute("data-meaning", "fault")
        expect(box.locator("use")).to_have_attribute("href", "#sym-fault")
        expect(chip).to_have_attribute("data-state", "failed")
        page.screenshot(path=str(SHOTS / "1280x800_nok_left_headline.png"))

        tighten(station, feed, "s2", ok=True, angle_deg=30.0)
        expect(text).to_have_text("Fasten position 3")  # an OK result ends the NOK headline
        expect(box).to_have_attribute("data-meaning", "action")
        tighten(station, feed, "s3", ok=True, angle_deg=30.0)
        expect(text).to_have_text("Unit TEST-NOK-1 NOK: to rework")
        expect(page.locator("#unit-result")).to_have_text("NOK")
        assert page.locator("body").inner_text().lower().count("not released") == 1

        feed.on_stop(None)  # the run ends, then the program closes the screen
        expect(page.locator("#ended")).to_have_text("The run has ended. The tool is off.")
        served.close()
        expect(page.locator("#conn")).to_have_text("Run over")
        expect(page.locator("#ended")).to_be_visible()
        expect(text).to_have_text("Unit TEST-NOK-1 NOK: to rework")
        assert "call maintenance" not in page.locator("body").inner_text()
        assert "not connected" not in page.locator("body").inner_text().lower()
        notes_on_screen(page)
        page.screenshot(path=str(SHOTS / "1280x800_run_over.png"))
    finally:
        served.close()
