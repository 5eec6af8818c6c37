"""The judgements of a recorded video against its per-frame ground truth (the demo sidecar).

Ground truth columns used (``sample_video/README.md``): ``hand_in_<bin zone>`` per bin zone,
``pin_engaged`` and ``pin_zone_clear`` for the check zone (the demo station has one), ``cam_dx_px``, ``cam_dy_px`` and
``cam_rot_deg`` for the camera. Lags are in frames, positive when the judgement comes later.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields
from pathlib import Path

import numpy as np
import numpy.typing as npt

from stationcheck.core.plan import ZoneSpec
from stationcheck.judgements.judgement_trace import JudgementTrace
from stationcheck.pipeline.truth_rows import TruthRow, read_truth_csv

BoolArray = npt.NDArray[np.bool_]
Interval = tuple[int, int]  # [start, end) in frames
TRUTH_IMAGE_CENTRE_PX = (319.5, 239.5)
TEXT_COLUMNS = ("tip_zone", "serial")


def runs(flags: Sequence[bool] | BoolArray) -> list[Interval]:
    """Maximal runs of True as [start, end) frame intervals."""
    values = np.asarray(flags, bool)
    edges = np.flatnonzero(np.diff(np.concatenate([[False], values, [False]]).astype(np.int8)))
    return [(int(a), int(b)) for a, b in zip(edges[::2], edges[1::2], strict=True)]


@dataclass(frozen=True)
class EventMatch:
    truth: Interval
    found: Interval | None

    @property
    def onset_lag(self) -> int | None:
        return None if self.found is None else self.found[0] - self.truth[0]

    @property
    def offset_lag(self) -> int | None:
        return None if self.found is None else self.found[1] - self.truth[1]


@dataclass(frozen=True)
class BinComparison:
    zone: str
    matches: tuple[EventMatch, ...]
    extra: tuple[Interval, ...]  # judged active where the truth has no reach at all

    @property
    def missed(self) -> int:
        return sum(1 for m in self.matches if m.found is None)


def compare_bins(found: BoolArray, truth: BoolArray, zone: str) -> BinComparison:
    """Each truth reach with the first judged activity overlapping it."""
    found_runs = runs(found)
    matches = []
    used: set[Interval] = set()
    for interval in runs(truth):
        hit = next((f for f in found_runs if f[0] < interval[1] and interval[0] < f[1]), None)
        matches.append(EventMatch(interval, hit))
        if hit is not None:
            used.add(hit)
    truth_runs = runs(truth)
    extra = tuple(
        f
        for f in found_runs
        if f not in used and not any(f[0] < t[1] and t[0] < f[1] for t in truth_runs)
    )
    return BinComparison(zone, tuple(matches), extra)


@dataclass(frozen=True)
class CheckComparison:
    """Verdicts of one check zone against the part's true state.

    ``visible_runs`` are runs where the true state holds and nothing covers the zone, each with
    the lag to the first matching verdict (None: never within the run)."""

    wrong_present: int  # 'present' while truly absent: must be zero
    wrong_absent: int
    undecided_clear: int  # undecided although nothing covers the zone
    clear_frames: int
    visible_runs: tuple[tuple[bool, Interval, int | None], ...]


def compare_check(verdicts: Sequence[str], present: BoolArray, clear: BoolArray) -> CheckComparison:
    said = np.asarray(verdicts)
    truly_present = np.asarray(present, bool)
    is_clear = np.asarray(clear, bool)
    found_runs = []
    for state in (True, False):
        for start, end in runs((truly_present == state) & is_clear):
            wanted = "present" if state else "absent"
            hits = np.flatnonzero(said[start:end] == wanted)
            found_runs.append((state, (start, end), int(hits[0]) if len(hits) else None))
    found_runs.sort(key=lambda item: item[1][0])
    return CheckComparison(
        wrong_present=int(np.sum((said == "present") & ~truly_present)),
        wrong_absent=int(np.sum((said == "absent") & truly_present)),
        undecided_clear=int(np.sum((said == "undecided") & is_clear)),
        clear_frames=int(np.sum(is_clear)),
        visible_runs=tuple(found_runs),
    )


def true_zone_shift_px(
    dx_px: npt.ArrayLike, dy_px: npt.ArrayLike, rot_deg: npt.ArrayLike, zones: Sequence[ZoneSpec]
) -> npt.NDArray[np.float64]:
    """Per frame, the largest displacement of any zone corner under the true camera transform
    ``R(rot) (p - c) + c + (dx, dy)``."""
    corners = np.asarray([p for zone in zones for p in zone.polygon_px], np.float64)
    rel = corners - TRUTH_IMAGE_CENTRE_PX
    dx, dy = np.asarray(dx_px, np.float64), np.asarray(dy_px, np.float64)
    angle = np.radians(np.asarray(rot_deg, np.float64))
    cos, sin = np.cos(angle)[:, None], np.sin(angle)[:, None]
    moved_x = cos * rel[:, 0] - sin * rel[:, 1] + dx[:, None] - rel[:, 0]
    moved_y = sin * rel[:, 0] + cos * rel[:, 1] + dy[:, None] - rel[:, 1]
    return np.asarray(np.max(np.hypot(moved_x, moved_y), axis=1), np.float64)


@dataclass(frozen=True)
class CameraComparison:
    first_true_frame: int | None  # first frame whose true zone shift exceeds the tolerance
    first_judged_frame: int | None
    false_frames: int  # judged moved while the true shift is at most half the tolerance
    unjudged_frames: int  # truly moved, not (yet) judged moved

    @property
    def lag(self) -> int | None:
        if self.first_true_frame is None or self.first_judged_frame is None:
            return None
        return self.first_judged_frame - self.first_true_frame


def compare_camera(
    moved: Sequence[bool], true_shift_px: npt.ArrayLike, tolerance_px: float
) -> CameraComparison:
    judged = np.asarray(moved, bool)
    shift = np.asarray(true_shift_px, np.float64)
    over = shift > tolerance_px
    first_true = int(np.argmax(over)) if over.any() else None
    first_judged = int(np.argmax(judged)) if judged.any() else None
    return CameraComparison(
        first_true,
        first_judged,
        int(np.sum(judged & (shift <= 0.5 * tolerance_px))),
        int(np.sum(over & ~judged)),
    )


@dataclass(frozen=True)
class TruthComparison:
    bins: tuple[BinComparison, ...]
    checks: Mapping[str, CheckComparison]
    camera: CameraComparison


def compare_trace(
    trace: JudgementTrace,
    truth_columns: Mapping[str, npt.ArrayLike],
    zones: Sequence[ZoneSpec],
    tolerance_px: float,
    check_columns: Mapping[str, tuple[str, str]],
) -> TruthComparison:
    """``truth_columns`` maps column names to per-frame values (the CSV's columns);
    ``check_columns`` maps a check zone to its (state column, clear column)."""
    n = trace.frames
    bins = tuple(
        compare_bins(
            trace.bin_array(zone), np.asarray(truth_columns[f"hand_in_{zone}"])[:n] > 0, zone
        )
        for zone in trace.bins
    )
    checks = {
        zone: compare_check(
            trace.verdicts[zone],
            np.asarray(truth_columns[state])[:n] > 0,
            np.asarray(truth_columns[clear])[:n] > 0,
        )
        for zone, (state, clear) in check_columns.items()
    }
    shift = true_zone_shift_px(
        np.asarray(truth_columns["cam_dx_px"])[:n],
        np.asarray(truth_columns["cam_dy_px"])[:n],
        np.asarray(truth_columns["cam_rot_deg"])[:n],
        zones,
    )
    return TruthComparison(bins, checks, compare_camera(trace.moved, shift, tolerance_px))


def summary_lines(result: TruthComparison) -> list[str]:
    """Plain lines for people: every event with its lags."""
    lines = []
    for comparison in result.bins:
        for match in comparison.matches:
            if match.found is None:
                lines.append(f"{comparison.zone} reach {match.truth}: MISSED")
            else:
                lines.append(
                    f"{comparison.zone} reach {match.truth}: judged {match.found}, "
                    f"onset {match.onset_lag:+d}, offset {match.offset_lag:+d} frames"
                )
        for interval in comparison.extra:
            lines.append(f"{comparison.zone} activity {interval} with no reach in the truth")
    for zone, check in result.checks.items():
        lines.append(
            f"{zone}: 'present' on an absent part in {check.wrong_present} frames, "
            f"'absent' on a present part in {check.wrong_absent}; undecided in "
            f"{check.undecided_clear} of {check.clear_frames} clear frames"
        )
        for state, interval, lag in check.visible_runs:
            word = "present" if state else "absent"
            told = "never said" if lag is None else f"said after {lag} frames"
            lines.append(f"{zone} {word} and clear {interval}: {told}")
    camera = result.camera
    late = "n/a" if camera.lag is None else f"{camera.lag:+d} frames"
    lines.append(
        f"camera: truly moved from frame {camera.first_true_frame}, judged moved from "
        f"{camera.first_judged_frame} (lag {late}); false moved frames "
        f"{camera.false_frames}"
    )
    return lines


def read_truth_columns(path: Path) -> dict[str, npt.NDArray[np.float64]]:
    """The numeric columns of a ground-truth CSV (one row per frame).

    Raises:
        InputFileError: the file cannot be read or a row cannot be parsed.
    """
    rows = read_truth_csv(path)
    names = [f.name for f in fields(TruthRow) if f.name not in TEXT_COLUMNS]
    return {
        name: np.asarray([getattr(row, name) for row in rows], dtype=np.float64) for name in names
    }


def main(argv: Sequence[str] | None = None) -> int:
    """``python -m stationcheck.benches.truth_comparison``: the demo station's judgements on
    the sample video against its ground truth, event by event."""
    from stationcheck.config import load_config
    from stationcheck.judgements.judgement_trace import run_judgements, video_frames
    from stationcheck.judgements.station import StationJudgements

    root = Path(__file__).resolve().parents[2]
    parser = argparse.ArgumentParser(description=main.__doc__)
    parser.add_argument("--config", type=Path, default=root / "configs" / "demo_station.yaml")
    parser.add_argument("--video", type=Path, default=root / "sample_video" / "demo_station.mp4")
    parser.add_argument(
        "--truth", type=Path, default=root / "sample_video" / "demo_station_truth.csv"
    )
    args = parser.parse_args(argv)
    config = load_config(args.config)
    trace = run_judgements(StationJudgements.from_config(config), video_frames(args.video))
    checks = {
        zone.id: ("pin_engaged", "pin_zone_clear")
        for zone in config.zone_specs()
        if zone.kind == "check"
    }
    result = compare_trace(
        trace,
        read_truth_columns(args.truth),
        config.zone_specs(),
        config.judgements.camera_shift.tolerance_px,
        checks,
    )
    print("\n".join(summary_lines(result)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
