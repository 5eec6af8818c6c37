"""Stand-ins driven by a recording's ground-truth sidecar (the sample video's per-frame CSV):
a detector that answers with the true keypoints, and judges that read the true bin activity,
locking pin and camera pose. They let the decisions be checked without a model, and they are
what "judged from the ground truth" means in the comparison with expected decisions.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from stationcheck.core.observations import (
    BinActivity,
    CameraMoved,
    CheckVerdict,
    Observation,
    Verdict,
)
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.core.records import Frame, ToolPose
from stationcheck.errors import InputFileError
from stationcheck.pipeline.truth_rows import TruthRow, read_truth_csv
from stationcheck.vision.table_detector import TableKeypointDetector

SEEN_SCORE = 0.99  # what the stand-in detector reports for a visible keypoint
BIN_FLAGS = {"bin_gasket": "hand_in_bin_gasket", "bin_cover": "hand_in_bin_cover"}
CAMERA_TOLERANCE_PX = 4.0  # same default as the image judgement of camera moves


@dataclass(frozen=True)
class TruthTable:
    """Ground-truth rows by frame index."""

    path: Path
    rows: Mapping[int, TruthRow]

    def row(self, frame_index: int) -> TruthRow:
        try:
            return self.rows[frame_index]
        except KeyError as exc:
            raise InputFileError(f"{self.path}: no ground truth for frame {frame_index}") from exc


def load_truth(path: Path | str) -> TruthTable:
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"ground-truth file not found: {path}")
    rows = read_truth_csv(path)
    if not rows:
        raise InputFileError(f"{path}: the ground truth has no rows")
    return TruthTable(path=path, rows={row.frame_index: row for row in rows})


def truth_points(table: TruthTable) -> dict[int, dict[str, tuple[float, float, float]]]:
    """The true image positions per frame; a keypoint counts as seen only when visible
    (COCO v=2), hidden or out-of-frame keypoints get score 0."""
    return {
        index: {
            "tip": (row.tip_x_px, row.tip_y_px, SEEN_SCORE if row.tip_v == 2 else 0.0),
            "rear": (row.rear_x_px, row.rear_y_px, SEEN_SCORE if row.rear_v == 2 else 0.0),
        }
        for index, row in table.rows.items()
    }


def truth_detector(table: TruthTable) -> TableKeypointDetector:
    """Answers with :func:`truth_points`."""
    return TableKeypointDetector(truth_points(table), ("tip", "rear"))


def camera_shift_px(
    row: TruthRow, points: Sequence[tuple[float, float]], size_px: tuple[int, int]
) -> float:
    """Largest displacement of ``points`` under the row's camera pose (rotation about the
    image centre, then shift)."""
    cx, cy = (size_px[0] - 1) / 2.0, (size_px[1] - 1) / 2.0
    angle = math.radians(row.cam_rot_deg)
    cos_a, sin_a = math.cos(angle), math.sin(angle)
    worst = 0.0
    for x, y in points:
        u, v = x - cx, y - cy
        moved = (
            cos_a * u - sin_a * v + cx + row.cam_dx_px,
            sin_a * u + cos_a * v + cy + row.cam_dy_px,
        )
        worst = max(worst, math.dist((x, y), moved))
    return worst


class TruthJudge:
    """Bin activity, the check zone's verdict and camera moves, read from the ground truth."""

    def __init__(
        self, table: TruthTable, plan: StationPlan, frame_size_px: tuple[int, int] = (640, 480)
    ) -> None:
        self.table = table
        self.size_px = frame_size_px
        self.bins = {
            z.id: BIN_FLAGS[z.id] for z in plan.zones if z.kind == "bin" and z.id in BIN_FLAGS
        }
        self.check_zones = {z.id for z in plan.zones if z.kind == "check"}
        self.corners = [p for z in plan.zones for p in z.polygon_px]
        self._bins_active: dict[str, bool] = {zone: False for zone in self.bins}
        self._moved = False
        self._verdicts: dict[str, Verdict] = {}

    @property
    def moved(self) -> bool:
        """Whether the camera is moved, as this judge last said."""
        return self._moved

    def judge(self, frame: Frame, pose: ToolPose, output: Output | None) -> list[Observation]:
        row = self.table.row(frame.index)
        found: list[Observation] = []
        shift = camera_shift_px(row, self.corners, self.size_px)
        moved = shift > CAMERA_TOLERANCE_PX
        if moved != self._moved:
            self._moved = moved
            found.append(CameraMoved(t_s=frame.t_s, moved=moved, shift_px=round(shift, 3)))
        for zone, flag in self.bins.items():
            active = bool(getattr(row, flag)) or row.tip_zone == zone
            if active != self._bins_active[zone]:
                self._bins_active[zone] = active
                found.append(BinActivity(t_s=frame.t_s, zone=zone, active=active))
        checking = output is not None and output.guidance.kind == "check"
        for zone in self.check_zones:
            verdict: Verdict = "undecided"
            if row.pin_zone_clear:
                verdict = "present" if row.pin_engaged else "absent"
            if verdict != self._verdicts.get(zone) or (
                checking and output is not None and output.guidance.target == zone
            ):
                self._verdicts[zone] = verdict
                found.append(CheckVerdict(t_s=frame.t_s, zone=zone, verdict=verdict))
        return found
