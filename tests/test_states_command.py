"""``stationcheck states``: the graph as text on stdout and, with --dot, as a DOT file."""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.cli import main
from stationcheck.core.state_graph import as_dot, as_text


def test_prints_the_graph_and_writes_the_dot_file(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    dot = tmp_path / "states.dot"
    assert main(["states", "--dot", str(dot)]) == 0
    out = capsys.readouterr().out
    assert out == as_text() + f"DOT file: {dot}\n"
    assert dot.read_text(encoding="utf-8") == as_dot()
    assert "check\n" in out and "  operator_ack -> idle\n" in out


def test_an_unwritable_dot_file_is_one_line_and_exit_3(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "no_such_folder" / "states.dot"
    assert main(["states", "--dot", str(target)]) == 3
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "cannot write the DOT file" in err
