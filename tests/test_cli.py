from __future__ import annotations

import subprocess
import sys

import pytest

from stationcheck import __version__
from stationcheck.cli import EXIT_INTERNAL, EXIT_USAGE, main


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


@pytest.mark.parametrize("verbose", [False, True])
def test_an_internal_error_is_one_line_with_exit_70(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str],
        verbose: bool) -> None:
    import stationcheck.commands.check as check_command

    def broken(args: object) -> int:
        raise KeyError("zones")

    monkeypatch.setattr(check_command, "run", broken)
    assert main([*(["-v"] if verbose else []), "check", "x.yaml"]) == EXIT_INTERNAL
    err = capsys.readouterr().err
    first = err.splitlines()[0]
    assert first.startswith("stationcheck check: internal error: KeyError: 'zones' (at ")
    assert "tests/test_cli.py" in first or "stationcheck/" in first
    if verbose:
        assert "Traceback (most recent call last)" in err
    else:
        assert len(err.splitlines()) == 1 and "run again with -v" in first


def test_an_error_message_cannot_steer_the_terminal(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    import stationcheck.commands.check as check_command
    from stationcheck.errors import ConfigError

    def refusing(args: object) -> int:
        raise ConfigError("bad\x1b[2J name \u202eevil\nsecond line")

    monkeypatch.setattr(check_command, "run", refusing)
    assert main(["check", "x.yaml"]) == 2
    err = capsys.readouterr().err
    assert err == ("stationcheck check: error: bad\\u001b[2J name \\u202eevil\\u000asecond "
                   "line\n")
