"""``stationcheck eval --looks``: the model's figures on rendered clips of held-out looks."""

from __future__ import annotations

import contextlib
import io
import json

import pytest

from stationcheck.cli import main
from stationcheck.commands.eval_looks import meets_target
from stationcheck.demo_station.held_out_looks import HELD_OUT_LOOKS
from stationcheck.demo_station.look_clips import look_production


def _run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["eval", "--looks", *args])
    return code, out.getvalue(), err.getvalue()


def test_one_look_is_measured_with_its_truth_and_reported_as_json() -> None:
    code, out, _ = _run("--look", "zoom x1.15", "--look-frames", "24", "--json")
    assert code == 0
    report = json.loads(out)
    (row,) = report["looks"]
    assert row["look"] == "zoom x1.15" and row["frames"] == 24 and row["target"] is True
    assert row["visible_frames"] == 24  # the tool is on the bench in the clip's first second
    assert row["tip_p95_px"] is not None and row["tip_p95_px"] < 50
    assert row["meets_target"] == meets_target(row)
    assert report["target"] == {"miss_rate": 0.05, "tip_p95_px": 6.0}


def test_the_text_table_names_each_look() -> None:
    code, out, _ = _run("--look", "teal tool", "--look-frames", "6")
    assert code == 0
    lines = out.splitlines()
    assert "target: miss <= 5%, tip p95 <= 6 px" in lines[0]
    assert [line.split("  ")[0].strip() for line in lines[2:]] == ["teal tool"]


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--look", "fog"], "--look 'fog': held-out looks are"),
        (["--look-frames", "0"], "--look-frames must be >= 1"),
        (["--video", "x.mp4"], "--looks renders its own clips"),
    ],
)
def test_bad_look_arguments_get_one_line(
    args: list[str], message: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["eval", "--looks", *args]) != 0
    assert message in capsys.readouterr().err


def test_look_without_looks_is_refused(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["eval", "--look", "JPEG 15"]) != 0
    assert "--look and --look-frames go with --looks" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("figures", "met"),
    [
        ({"tip_p95_px": 6.0, "miss_rate": 0.05}, True),
        ({"tip_p95_px": 6.01, "miss_rate": 0.0}, False),
        ({"tip_p95_px": 2.0, "miss_rate": 0.051}, False),
        ({"tip_p95_px": None, "miss_rate": 0.0}, False),
    ],
)
def test_the_target_is_miss_at_most_5_percent_and_p95_at_most_6_px(
    figures: dict[str, float | None], met: bool
) -> None:
    assert meets_target(figures) is met


def test_every_look_plans_its_truth_inside_its_view() -> None:
    for look in HELD_OUT_LOOKS:
        rows = look_production(look).rows
        seen = [r for r in rows if r.tip_v == 2]
        assert len(seen) > 0.8 * len(rows)
        assert all(
            0 <= r.tip_x_px < look.view.width_px and 0 <= r.tip_y_px < look.view.height_px
            for r in seen
        )
