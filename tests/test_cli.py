from __future__ import annotations

import subprocess
import sys
from pathlib import Path

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


@pytest.mark.parametrize("command", ["run", "teach", "replay"])
def test_help_of_commands_that_film_people_says_so(command: str,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    assert main([command, "--help"]) == 0
    out = "".join(capsys.readouterr().out.split())  # argparse wraps at any hyphen
    assert "data-protectionrules" in out
    assert "people" in out


@pytest.mark.parametrize("as_script", [True, False])
def test_commands_the_demo_prints_work_in_a_fresh_shell(
        as_script: bool, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """No virtual environment on PATH, another folder: the printed command still runs."""
    import shlex

    from stationcheck.commands.demo import command_words

    script = Path(sys.executable).parent / "stationcheck"
    monkeypatch.setattr(sys, "argv", [str(script) if as_script else "pytest"])
    words = command_words()
    assert words.startswith(str(script) if as_script else sys.executable)
    result = subprocess.run([*shlex.split(words), "--version"], capture_output=True, text=True,
                            cwd=tmp_path, env={"PATH": "/usr/bin:/bin"}, check=False)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip() == f"stationcheck {__version__}"


def test_replay_that_writes_an_annotated_video_says_who_it_shows(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from tests.pipeline.conftest import CONFIG, INPUTS, TRUTH, VIDEO

    if not VIDEO.is_file():
        pytest.skip("the sample video is not rendered")
    video = tmp_path / "annotated.mp4"
    code = main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--truth", str(TRUTH), "--detector", "truth", "--judgements", "truth",
                 "--frames", "5", "--log", str(tmp_path / "log.sqlite"), "--json",
                 "--annotate", str(video)])
    assert code == 0 and video.is_file()
    err = capsys.readouterr().err
    assert f"Privacy: {video} shows the people filmed in the video" in err


def test_a_reader_that_goes_away_is_not_an_error(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """``stationcheck alarms | head -2``: the pipe closes under the writer; exit 0, no message."""
    import io

    class ClosedPipe(io.StringIO):
        def write(self, text: str) -> int:
            raise BrokenPipeError(32, "Broken pipe")

    monkeypatch.setattr(sys, "stdout", ClosedPipe())
    assert main(["alarms"]) == 0
    assert capsys.readouterr().err == ""
