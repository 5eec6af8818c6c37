"""``stationcheck setup`` on the command line: options, and a config outside the setup folder."""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.cli import build_parser
from stationcheck.commands import setup
from stationcheck.errors import InputFileError
from stationcheck.web.setup import default_root


def test_options_and_default_port() -> None:
    args = build_parser().parse_args(["setup", "st.yaml", "--no-browser", "--port", "0"])
    assert args.config == Path("st.yaml") and args.no_browser and args.port == 0
    assert build_parser().parse_args(["setup"]).port == setup.DEFAULT_PORT
    assert build_parser().parse_args(["setup"]).config is None


def test_config_outside_the_chosen_root_is_refused(tmp_path: Path) -> None:
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    args = build_parser().parse_args(["setup", str(tmp_path / "b" / "st.yaml"), "--root",
                                      str(tmp_path / "a"), "--no-browser"])
    with pytest.raises(InputFileError, match="outside the setup folder"):
        setup.run(args)


@pytest.mark.parametrize(("config", "expected"), [
    (None, "cwd"), ("cwd/configs/x.yaml", "cwd"), ("other/x.yaml", "other")])
def test_default_root(tmp_path: Path, config: str | None, expected: str) -> None:
    for name in ("cwd/configs", "other"):
        (tmp_path / name).mkdir(parents=True, exist_ok=True)
    path = tmp_path / config if config else None
    assert default_root(path, tmp_path / "cwd") == (tmp_path / expected).resolve()
