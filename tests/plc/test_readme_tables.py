"""The README's address map and alarm list are the ones the code makes (one source each)."""

from __future__ import annotations

from pathlib import Path

from stationcheck.core.alarms import ALARMS, alarm_rows, markdown_alarm_table
from stationcheck.plc.address_map import markdown_table

README = Path(__file__).resolve().parents[2] / "README.md"


def test_readme_has_the_address_map_the_code_makes() -> None:
    assert markdown_table() in README.read_text(encoding="utf-8"), (
        "regenerate the README's map from stationcheck.plc.address_map.markdown_table()")


def test_readme_has_the_alarm_list_the_code_makes() -> None:
    assert markdown_alarm_table() in README.read_text(encoding="utf-8"), (
        "regenerate the README's alarm list with `stationcheck alarms --markdown`")


def test_alarm_rows_cover_every_alarm_in_number_order() -> None:
    rows = alarm_rows()
    assert [row["code"] for row in rows] == sorted(ALARMS, key=lambda c: ALARMS[c].number)
    assert all(row["meaning"] for row in rows)


def test_alarms_command_text_and_json(capsys: object) -> None:
    import json

    from stationcheck.cli import main

    assert main(["alarms", "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)  # type: ignore[attr-defined]
    assert {row["code"]: row["number"] for row in printed} == {
        code: info.number for code, info in ALARMS.items()}
    assert main(["alarms"]) == 0
    text = capsys.readouterr().out  # type: ignore[attr-defined]
    assert " 30  plc_session_restart  (alarm, one-off)" in text
