"""The setup screen in a real browser (Debian's chromium, headless): draw, drag, bolt circle,
steps, live validation, undo, save, and what lands in the YAML file."""

from __future__ import annotations

import difflib
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import yaml

from stationcheck.config import check_file
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router

CONFIG = "configs/demo_station.yaml"


def serve(root: Path, config: Path | None) -> WebServer:
    session = SetupSession.open(Workspace(root), config)
    return WebServer(build_router(session), "127.0.0.1", 0, AccessRule(None)).start()


@pytest.fixture
def opened(page: Any, workspace: Path, request: pytest.FixtureRequest) -> Iterator[Any]:
    """The page opened on the demo copy (parametrized "new": on a new config instead)."""
    new = getattr(request, "param", "demo") == "new"
    if new:
        (workspace / "station").mkdir()
        shutil.copy(workspace / "configs/demo_station/reference.png",
                    workspace / "station/reference.png")
    server = serve(workspace, None if new else workspace / CONFIG)
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto(server.url)
    page.wait_for_selector("body[data-ready='1']")
    yield page
    server.close()
    assert errors == []


def at(page: Any, x: float, y: float) -> tuple[float, float]:
    """Screen position of picture pixel (x, y), whatever the zoom."""
    sx, sy = page.evaluate("""([x, y]) => { const m = document.getElementById('canvas')
        .getScreenCTM(); return [m.a * x + m.e, m.d * y + m.f]; }""", [x, y])
    return float(sx), float(sy)


def drag(page: Any, start: tuple[float, float], end: tuple[float, float]) -> None:
    page.mouse.move(*start)
    page.mouse.down()
    page.mouse.move(*end, steps=6)
    page.mouse.up()


def click_px(page: Any, x: float, y: float) -> None:
    page.mouse.click(*at(page, x, y))


@pytest.mark.parametrize("opened", ["new"], indirect=True)
def test_new_station_drawn_and_saved(opened: Any, workspace: Path) -> None:
    page = opened
    page.click("#tabs button[data-tab='zones']")
    page.select_option("#new-kind", "bin")
    page.click("button[data-mode='draw']")
    for x, y in [(40, 150), (150, 150), (150, 330), (40, 330), (40, 150)]:
        click_px(page, x, y)  # the last click closes the outline on its first corner
    assert page.input_value(".zone-row input[name='zone-id']") == "bin_1"
    drag(page, at(page, 150, 330), at(page, 160, 340))  # the new zone is selected

    page.click("button[data-mode='circle']")
    click_px(page, 320, 215)
    click_px(page, 320, 147)
    page.fill("input[name='circle-prefix']", "screw_")
    page.click("#circle-place")
    page.wait_for_selector("svg g.zone[data-id='screw_6']")

    page.click("#tabs button[data-tab='steps']")
    page.click("button[data-add='pick']")
    finding = page.locator(".step[data-id='pick_1'] .finding.error")
    finding.first.wait_for()  # a pick step without its bin
    assert "steps[1].zone" in finding.first.inner_text()
    page.select_option(".step[data-id='pick_1'] select[name='step-zone']", "bin_1")
    page.wait_for_function(
        "!document.querySelector(\".step[data-id='pick_1'] .finding\")")

    grip = page.locator(".step[data-id='pick_1'] .grip").bounding_box()
    first = page.locator(".step").first.bounding_box()
    drag(page, (grip["x"] + 5, grip["y"] + 5), (first["x"] + 40, first["y"] + 4))
    page.wait_for_function(
        "document.querySelector('.step').getAttribute('data-id') === 'pick_1'")

    page.fill("#save-path", "st1.yaml")
    page.click("#save")
    page.wait_for_selector("#save-note:has-text('saved st1.yaml')")
    saved = yaml.safe_load((workspace / "st1.yaml").read_text(encoding="utf-8"))
    bin_zone = saved["zones"][0]
    assert bin_zone["id"] == "bin_1" and bin_zone["kind"] == "bin"
    corners = bin_zone["polygon"]
    assert len(corners) == 4 and corners[0] == pytest.approx([40, 150], abs=1)
    assert corners[2] == pytest.approx([160, 340], abs=1)  # the dragged corner
    assert [z["id"] for z in saved["zones"][1:]] == [f"screw_{n}" for n in range(1, 7)]
    assert [s["kind"] for s in saved["steps"]] == ["pick", "fasten"]
    assert saved["steps"][0]["zone"] == "bin_1"
    # cross order for 6 bolts, clockwise from the clicked one: 1-4-2-5-3-6
    assert saved["steps"][1]["zones"] == [f"screw_{n}" for n in (1, 4, 2, 5, 3, 6)]
    assert check_file(workspace / "st1.yaml").errors == []


def test_existing_config_edited_with_zoom_undo_and_one_line_diff(opened: Any,
                                                                  workspace: Path) -> None:
    page = opened
    original = (workspace / CONFIG).read_text(encoding="utf-8")
    page.click("#zoom-in")
    page.click("#zoom-in")
    click_px(page, 379, 181)  # inside screw_2: selects it, handles appear
    page.wait_for_selector("circle.handle")
    drag(page, at(page, 395.9, 188), at(page, 405.9, 188))
    assert page.locator(".zone-row.selected input[name='zone-id']").input_value() == "screw_2"
    page.click("#undo")
    page.click("#save")
    page.wait_for_selector("#save-note:has-text('saved')")
    assert (workspace / CONFIG).read_text(encoding="utf-8") == original

    drag(page, at(page, 395.9, 188), at(page, 405.9, 188))
    page.evaluate("document.getElementById('save-note').textContent = ''")
    page.keyboard.press("Control+s")
    page.wait_for_selector("#save-note:has-text('saved')")
    edited = (workspace / CONFIG).read_text(encoding="utf-8")
    changed = [line for line in difflib.ndiff(original.splitlines(), edited.splitlines())
               if line.startswith(("- ", "+ "))]
    assert len(changed) == 2, changed
    moved = yaml.safe_load(edited)["zones"][1]
    assert moved["id"] == "screw_2"
    assert moved["polygon"][0] == pytest.approx([405.9, 188], abs=1)
    assert moved["polygon"][1:] == yaml.safe_load(original)["zones"][1]["polygon"][1:]
