"""The review screen in a real browser (Debian chromium through Playwright): find a unit by
serial, open it, see the failed position and its rework, export CSV and read it back; the
figures and trends pages. Screenshots go to /tmp/shots/review/."""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

from review_web_helpers import Client


def url(client: Client, fragment: str = "") -> str:
    return f"{client.server.url}{fragment}"


def loaded(page: Any, fragment: str) -> None:
    page.wait_for_function(f"document.body.dataset.loaded === {fragment!r}")


def read_download(page: Any, selector: str) -> list[dict[str, str]]:
    with page.expect_download() as info:
        page.click(selector)
    text = Path(info.value.path()).read_text(encoding="utf-8")
    return list(csv.DictReader(io.StringIO(text)))


def test_find_a_unit_see_its_rework_and_export_it(page: Any, demo_review: Client,
                                                  shots: Path) -> None:
    from playwright.sync_api import expect

    page.goto(url(demo_review))
    expect(page.locator("#unit-count")).to_contain_text("7 units")
    expect(page.locator("#caution")).to_contain_text("not a safety function")
    page.fill("#serial", "PC-000104")
    page.press("#serial", "Enter")
    expect(page.locator("#unit-table tbody tr")).to_have_count(1)
    expect(page.locator("#unit-count")).to_contain_text("1 unit")
    page.screenshot(path=str(shots / "units-demo-search.png"))

    rows = read_download(page, "#export-units-csv")
    assert [(r["serial"], r["failed_positions"], r["reworked"]) for r in rows] == [
        ("PC-000104", "screw_3", "true")]

    page.click("text=PC-000104")
    expect(page.locator("#unit-serial")).to_have_text("PC-000104")
    expect(page.locator("#unit-status")).to_contain_text("reworked")
    left = page.locator("#step-table tbody tr", has_text="left for rework")
    expect(left).to_have_count(1)
    expect(left).to_contain_text("screw_3")
    rework = page.locator("#step-table tbody tr.rework", has_text="screw_3")
    expect(rework).to_have_count(1)
    expect(rework).to_contain_text("OK")
    page.screenshot(path=str(shots / "unit-demo-PC-000104.png"), full_page=True)

    steps = read_download(page, "#export-unit-csv")
    screw_3 = [(r["pass_no"], r["attempt"], r["result"], r["position_result"], r["torque_nm"])
               for r in steps if r["position"] == "screw_3"]
    # the sample's inputs: 3.92 N·m then 4.11 N·m NOK, left for rework, OK in the rework pass
    assert [s[:4] for s in screw_3] == [("1", "1", "NOK", ""), ("1", "2", "NOK", "NOK"),
                                        ("2", "1", "OK", "OK")]
    assert [float(s[4]) for s in screw_3[:2]] == [3.92, 4.11]


def test_figures_trends_and_the_list_of_a_larger_log(page: Any, generated_review: Client,
                                                     shots: Path, tmp_path: Path) -> None:
    from playwright.sync_api import expect

    page.goto(url(generated_review))
    expect(page.locator("#unit-count")).to_contain_text("2,000 units")
    expect(page.locator("#unit-table tbody tr")).to_have_count(50)
    page.click("#next-page")
    expect(page.locator("#unit-count")).to_contain_text("page 2")
    page.screenshot(path=str(shots / "units.png"))

    page.click("nav >> text=Station figures")
    loaded(page, "#/figures")
    expect(page.locator("#figure-cards")).to_contain_text("2,000")
    expect(page.locator("#figure-cards")).to_contain_text("95 % Wilson")
    assert page.locator(".charts svg").count() == 3
    page.screenshot(path=str(shots / "figures.png"), full_page=True)

    page.click("nav >> text=Trends")
    loaded(page, "#/trends")
    page.select_option("#trend-position", "p3")
    page.click("#trend-filters button")
    loaded(page, "#/trends?position=p3&measure=torque&points=500")
    expect(page.locator("#trend-chart svg")).to_have_count(1)
    expect(page.locator("#trend-findings")).to_contain_text("run rules broken")
    expect(page.locator("#trend-basis")).to_contain_text("EWMA")
    page.screenshot(path=str(shots / "trends.png"), full_page=True)

    with page.expect_download() as info:
        page.click("nav >> text=Station figures")
        loaded(page, "#/figures")
        page.click("#report-link")
    report = tmp_path / "review-report.html"
    info.value.save_as(report)
    page.goto(report.as_uri())
    expect(page.locator("h1")).to_have_text("Station review report")
    page.screenshot(path=str(shots / "report.png"))


def test_the_demo_log_names_its_units_and_says_it_is_demo_data(page: Any, demo_review: Client,
                                                               shots: Path,
                                                               tmp_path: Path) -> None:
    """The sample video's units (sample_video/demo_station_expected.jsonl): PC-000104 NOK at
    screw_3 twice then reworked, PC-000105 NOK by its locking pin check, PC-000107 still open
    when the video ends; the other four OK, three of them first time through."""
    from playwright.sync_api import expect
    from scipy.stats import binomtest

    page.goto(url(demo_review))
    expect(page.locator("#demo-flag")).to_be_visible()
    expect(page.locator("#demo-flag")).to_contain_text("DEMO DATA")
    expect(page.locator("#caution")).to_contain_text("the camera films the people who work here")
    expect(page.locator("#caution")).to_be_in_viewport()

    page.goto(url(demo_review, "#/unit/PC-000105"))
    expect(page.locator("#unit-serial")).to_have_text("PC-000105")
    expect(page.locator("#unit-status")).to_contain_text("NOK")
    expect(page.locator("#unit-nok-reason")).to_have_text(
        "check pin_engaged failed: expected present, saw absent")
    page.screenshot(path=str(shots / "unit-demo-PC-000105-why.png"), full_page=True)

    page.goto(url(demo_review, "#/figures"))
    loaded(page, "#/figures")
    cards = page.locator("#figure-cards")
    expect(cards).to_contain_text("3 of 6 ended units")  # the open PC-000107 is not counted
    expect(page.locator(".card", has_text="Open")).to_contain_text("1")
    low, high = binomtest(3, 6).proportion_ci(confidence_level=0.95, method="wilson")  # scipy
    expect(cards).to_contain_text(f"95 % Wilson {100 * low:.1f} % to {100 * high:.1f} %")
    page.screenshot(path=str(shots / "figures-demo-ftt.png"), full_page=True)

    page.goto(url(demo_review, "#/trends?position=screw_1&measure=torque&points=500"))
    loaded(page, "#/trends?position=screw_1&measure=torque&points=500")
    chart = page.locator("#trend-chart svg")
    expect(chart.locator("polyline")).not_to_have_count(0)  # the EWMA is drawn from 7 values
    for serial in ("PC-000101", "PC-000107"):
        expect(chart.locator("text", has_text=serial)).to_have_count(1)  # which unit a dot is
    expect(page.locator("#trend-findings")).to_contain_text("only 7 values")
    page.screenshot(path=str(shots / "trends-demo-7-units.png"), full_page=True)

    with page.expect_download() as info:
        page.goto(url(demo_review, "#/figures"))
        loaded(page, "#/figures")
        page.click("#report-link")
    report = tmp_path / "review-report.html"
    info.value.save_as(report)
    page.goto(report.as_uri())
    expect(page.locator(".demo")).to_contain_text("DEMO DATA")
    listed = page.locator("table.units tr", has_text="PC-0001")
    expect(listed).to_have_count(3)
    nok = page.locator("table.units tr", has_text="PC-000104")
    expect(nok).to_contain_text("screw_3 attempt 1: 3.92 N·m")  # the sample's inputs
    expect(page.locator("table.units tr", has_text="PC-000105")).to_contain_text("check pin_engaged")
    expect(page.locator("table.units tr", has_text="PC-000107")).to_contain_text("not finished")
    page.click("table.units >> text=PC-000105")
    assert page.url.endswith("#unit-PC-000105")
    expect(page.locator("#unit-PC-000105")).to_be_in_viewport()
    page.goto(report.as_uri() + "#units-to-look-at")
    page.screenshot(path=str(shots / "report-demo-units.png"))
