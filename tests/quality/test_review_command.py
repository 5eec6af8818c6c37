"""``stationcheck review`` for scripts: units, one unit, figures, trends, the report; bad
input is one line and the step log's exit code."""

from __future__ import annotations

import csv
import io
import json
import sqlite3
from pathlib import Path

import pytest

from stationcheck.cli import EXIT_USAGE, main
from stationcheck.errors import StoreError
from stationcheck.store.log_schema import APPLICATION_ID, SCHEMA_VERSION


def run(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    code = main(["review", *args])
    out, err = capsys.readouterr()
    return code, out, err


def test_figures_as_json_and_text(scripted_log: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, str(scripted_log), "--figures", "--json")
    figures = json.loads(out)
    assert code == 0 and (figures["units"], figures["first_time_through"]) == (5, 2)
    code, out, _ = run(capsys, str(scripted_log), "--figures")
    assert code == 0 and "first-time-through 2 of 5 ended units = 40.0 % (95 % Wilson interval" in out


def test_units_as_csv_text_and_json(scripted_log: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, str(scripted_log), "--units", "--csv", "--order", "oldest")
    rows = list(csv.DictReader(io.StringIO(out)))
    assert code == 0 and [r["serial"] for r in rows] == [f"QA-000{n}" for n in range(1, 6)]
    code, out, _ = run(capsys, str(scripted_log), "--units", "--result", "reworked")
    assert code == 0 and "QA-0003" in out and "1 unit match; 1 shown" in out
    code, out, _ = run(capsys, str(scripted_log), "--units", "--json", "--limit", "2")
    assert [u["serial"] for u in json.loads(out)["units"]] == ["QA-0005", "QA-0004"]


def test_one_unit_and_a_trend(scripted_log: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, str(scripted_log), "--unit", "QA-0003")
    assert code == 0 and "NOK (left)" in out and "rework" in out
    assert "NotOK" not in out  # the log's word is mapped to the shown one
    assert "why the first pass was NOK: p5 NOK after 2 attempt(s) (torque 7.00 N·m" in out
    code, out, _ = run(capsys, str(scripted_log), "--unit", "QA-0003", "--csv")
    assert len(list(csv.DictReader(io.StringIO(out)))) == 12
    code, out, _ = run(capsys, str(scripted_log), "--trend", "p5", "--json")
    trend = json.loads(out)
    assert code == 0 and trend["count"] == 4 and trend["left_nok"] == 1
    code, out, _ = run(capsys, str(scripted_log), "--trend", "p5", "--measure", "angle", "--csv")
    rows = list(csv.DictReader(io.StringIO(out)))
    assert code == 0 and list(rows[0]) == ["seq", "serial", "recorded_at", "recorded_at_s",
                                           "angle_deg", "ewma_angle_deg"]
    _, out, _ = run(capsys, str(scripted_log), "--trend", "p5", "--measure", "angle", "--json")
    angles = [p["value"] for p in json.loads(out)["points"]]
    assert [float(r["angle_deg"]) for r in rows] == [round(v, 1) for v in angles]  # 0.1 degree


def test_the_report_file(scripted_log: Path, tmp_path: Path,
                         capsys: pytest.CaptureFixture[str]) -> None:
    out_file = tmp_path / "report.html"
    code, out, _ = run(capsys, str(scripted_log), "--report", str(out_file), "--since",
                       "2020-01-01", "--until", "2030-12-31")
    assert code == 0 and "report written" in out
    assert out_file.read_text(encoding="utf-8").count("<svg") == 3 + 2 * 6


def _not_a_log(path: Path) -> Path:
    path.write_text("serial,result\nQA-1,OK\n")
    return path


def _other_sqlite(path: Path) -> Path:
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE things (x)")
    conn.close()
    return path


def _newer_log(path: Path) -> Path:
    conn = sqlite3.connect(path)
    conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    return path


@pytest.mark.parametrize(
    ("make", "extra", "code", "message"),
    [
        (lambda p: p, ["--figures"], StoreError.exit_code, "does not exist"),
        (_not_a_log, ["--figures"], StoreError.exit_code, "not a step log"),
        (_other_sqlite, ["--units"], StoreError.exit_code, "another program"),
        (_newer_log, ["--figures"], StoreError.exit_code, "newer than this stationcheck"),
        (lambda p: p, ["--since", "someday"], EXIT_USAGE, ""),
        (lambda p: p, ["--units", "--limit", "0"], EXIT_USAGE, "--limit"),
        (lambda p: p, ["--figures", "--csv"], EXIT_USAGE, "--csv is for"),
    ],
)
def test_bad_input_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str], make: object,
                               extra: list[str], code: int, message: str) -> None:
    path = make(tmp_path / "log.sqlite")  # type: ignore[operator]
    got, _, err = run(capsys, str(path), *extra)
    assert got == code
    assert "Traceback" not in err
    if message:
        assert message in err and len(err.strip().splitlines()) == 1


def test_an_unknown_unit_is_one_line(scripted_log: Path,
                                     capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run(capsys, str(scripted_log), "--unit", "NOPE")
    assert code == 1 and "no unit with serial 'NOPE'" in err


def test_hostile_serials_cannot_steer_a_terminal_or_a_spreadsheet(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A serial is whatever the PLC sent: the text listing escapes control and bidi-override
    characters; the CSV export neutralises formulas as the OWASP CSV-injection guidance says
    (a leading single quote)."""
    from review_logs import sequencer_events, write_log

    from stationcheck.store.synthetic import StationScript

    script = StationScript()
    script.unit("=cmd|' /C calc'!A0", {})
    script.frames(None, 200)
    script.unit("PC\x1b[2J\u202e01", {})
    log = write_log(tmp_path / "log.sqlite", sequencer_events(script))
    code, out, _ = run(capsys, str(log), "--units")
    assert code == 0 and "\x1b" not in out and "\u202e" not in out
    assert "PC\\u001b[2J\\u202e01" in out
    code, out, _ = run(capsys, str(log), "--units", "--csv", "--order", "oldest")
    serials = [r["serial"] for r in csv.DictReader(io.StringIO(out))]
    assert serials == ["'=cmd|' /C calc'!A0", "PC\x1b[2J\u202e01"]
