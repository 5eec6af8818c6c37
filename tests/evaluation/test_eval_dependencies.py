"""``eval`` checks its optional dependency before it reads a single frame."""

from __future__ import annotations

import sys

import pytest

from stationcheck.cli import main
from stationcheck.errors import MissingExtraError


def test_missing_pycocotools_stops_eval_before_any_frame(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    from stationcheck.evaluation import truth

    def must_not_run(*args: object, **kwargs: object) -> None:
        raise AssertionError("frames were read before the dependency check")

    monkeypatch.setattr(truth, "read_video_frames", must_not_run)
    monkeypatch.setattr(truth, "read_coco_frames", must_not_run)
    monkeypatch.setitem(sys.modules, "pycocotools", None)  # import now raises ImportError
    monkeypatch.setitem(sys.modules, "pycocotools.coco", None)
    assert main(["eval", "--json"]) == MissingExtraError.exit_code == 7
    err = capsys.readouterr().err
    assert "pycocotools" in err and "stationcheck[eval]" in err
