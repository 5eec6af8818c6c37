"""Text shown in a terminal or a spreadsheet: control and bidi characters escaped, formula
cells neutralised.

Formula-leading characters are the OWASP list (https://owasp.org/www-community/attacks/
CSV_Injection: equals, plus, minus, at, tab, carriage return; the cell is prefixed with a
single quote); the bidi controls are Unicode's explicit directional formatting characters
(UAX #9, section 2: LRE, RLE, PDF, LRO, RLO, LRI, RLI, FSI, PDI) and marks (LRM, RLM, ALM).
"""

from __future__ import annotations

import csv
import io

import pytest

from stationcheck.quality.unit_export import csv_chunks
from stationcheck.shown_text import csv_cell, terminal_text

BIDI = ["\u202a", "\u202b", "\u202c", "\u202d", "\u202e", "\u2066", "\u2067", "\u2068",
        "\u2069", "\u200e", "\u200f", "\u061c"]


@pytest.mark.parametrize(("cell", "shown"), [
    ("=cmd|' /C calc'!A0", "'=cmd|' /C calc'!A0"),
    ("+1+1", "'+1+1"),
    ("-2+3+cmd|' /C calc'!A0", "'-2+3+cmd|' /C calc'!A0"),
    ("@SUM(1+1)*cmd|' /C calc'!A0", "'@SUM(1+1)*cmd|' /C calc'!A0"),
    ("\t=1", "'\t=1"),
    ("\r=1", "'\r=1"),
    ("PC-000123", "PC-000123"),
    ("a=b", "a=b"),
    (-12.5, -12.5),  # a number stays a number
])
def test_formula_cells_are_neutralised(cell: object, shown: object) -> None:
    assert csv_cell(cell) == shown


def test_a_csv_export_reads_back_as_text() -> None:
    rows = [{"serial": "=cmd|' /C calc'!A0", "positions": ["-1", "ok"], "torque": -3.5}]
    text = "".join(csv_chunks(rows, ["serial", "positions", "torque"]))
    parsed = list(csv.reader(io.StringIO(text)))
    assert parsed[1] == ["'=cmd|' /C calc'!A0", "'-1;ok", "-3.5"]


@pytest.mark.parametrize("char", ["\x00", "\x07", "\x1b", "\x7f", "\x9b", "\n", *BIDI])
def test_terminal_text_escapes_controls(char: str) -> None:
    shown = terminal_text(f"PC{char}01")
    assert char not in shown
    assert shown == f"PC\\u{ord(char):04x}01"


def test_terminal_text_keeps_ordinary_text_and_chosen_line_breaks() -> None:
    assert terminal_text("Drehmoment 12,5 N·m — ok ✓") == "Drehmoment 12,5 N·m — ok ✓"
    assert terminal_text("a\tb") == "a b"
    assert terminal_text("one\ntwo\x1b", keep_newlines=True) == "one\ntwo\\u001b"
