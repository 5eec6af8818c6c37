from __future__ import annotations

import subprocess
import sys

import pytest

from stationcheck import __version__
from stationcheck.cli import EXIT_USAGE, main


def test_version_is_printed(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"stationcheck {__version__}"


def test_help_carries_the_safety_note(capsys: pytest.CaptureFixture[str]) -> None:
    assert main([]) == EXIT_USAGE
    out = " ".join(capsys.readouterr().out.split())
    assert "not a safety function" in out


def test_unknown_command_is_a_usage_error(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["no-such-command"]) == EXIT_USAGE
    assert "invalid choice" in capsys.readouterr().err


def test_console_script_runs() -> None:
    result = subprocess.run(
        [sys.executable, "-m", "stationcheck", "--help"], capture_output=True, text=True, check=False
    )
    assert result.returncode == 0
    assert "usage: stationcheck" in result.stdout
