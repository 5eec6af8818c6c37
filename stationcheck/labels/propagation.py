"""Carrying clicked points to the frames between clicks with optical flow.

Between two clicked frames where the tool is visible, each clicked point is tracked forward
from the earlier click and backward from the later click with pyramidal Lucas-Kanade optical
flow (OpenCV ``calcOpticalFlowPyrLK``). Every step is checked forward-backward (track the
point on, track it back; the two must land within ``max_round_trip_px``); a direction stops at
the first step that fails the check or leaves the picture. A frame gets a propagated label
when both directions reached it and agree within ``max_disagreement_px`` (the label is then
their mix, weighted towards the nearer click), or when only one did and the frame lies within
``max_one_way_frames`` of that direction's click (a fast move or the tool leaving the picture
loses the other direction).
Between a visible click and a "not visible" click only the visible side tracks, so a
"not visible" click stops propagation across it. Frames left without a label are returned as
gaps: the screen asks for a click in the middle of the longest ones first.

A moving tool is smeared over the exposure, and flow follows the smear's middle, which trails
the tool's position at the end of the exposure (where a person clicks the tip, at the streak's
leading end) by a share of the frame's move: the *smear lag*. Tracked points are moved on by
that share of their own move (less the move at the click they started from, which the click
already placed). The share depends on the camera's exposure, so it is measured on the clicks
themselves: where a track crosses a whole span, the click at its end shows how far the track
trails (:func:`smear_lag`). Too few moving clicks to measure: no correction.

Flow cannot follow a tool that is not there, so the frames beside a "not visible" click are the
engineer's to mark: each unlabelled run next to such a click is returned as a
:class:`HiddenRun` with a strip of frames to look over, and the engineer marks the part of it
next to the click where the tool stays out of view (``out_of_view``: (first, last) frame runs,
each starting right after or ending right before a "not visible" click). Those frames become
"not visible" labels; a run between two "not visible" clicks is never labelled without a mark.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from itertools import pairwise

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.labels.records import FrameLabel, Point

log = logging.getLogger(__name__)

Gray = npt.NDArray[np.uint8]
Points = npt.NDArray[np.float32]  # shape (k, 2)
Frames = Callable[[int, int], Iterable[tuple[int, Gray]]]


@dataclass(frozen=True)
class FlowSettings:
    window_px: int = 21
    pyramid_levels: int = 3
    max_round_trip_px: float = 0.7
    max_disagreement_px: float = 2.5
    max_click_offset_px: float = 3.0  # two clicks' own disagreement that is discounted
    edge_margin_px: float = 3.0
    max_span_frames: int = 900  # longer spans between clicks are not tracked (too much drift)
    max_one_way_frames: int = 15  # a single direction is trusted this far from its click
    min_body_points: int = 8
    min_inlier_share: float = 0.5
    max_scale_change: float = 0.08
    correct_smear: bool = True
    min_smear_observations: int = 6  # moving clicks reached by a track, to measure the lag
    min_smear_move_px: float = 4.0  # a click's move (against its track's start) that counts
    max_smear_lag: float = 0.5  # an exposure as long as the frame interval


STRIP_FRAMES = 24  # thumbnails in a hidden run's strip


@dataclass(frozen=True)
class HiddenRun:
    """Unlabelled frames ``first..last`` next to a "not visible" click: just before it
    (``hidden_after``), just after it (``hidden_before``) or between two (both)."""

    first: int
    last: int
    hidden_before: bool
    hidden_after: bool

    def strip(self, count: int = STRIP_FRAMES) -> tuple[int, ...]:
        """At most ``count`` frames to look over, evenly spaced, in frame order; always the
        frames next to the "not visible" clicks (a mark starts or ends at one of them), and
        the run's two ends."""
        length = self.last - self.first + 1
        every = max(1, -(-length // max(1, count - 1)))
        if self.hidden_after and not self.hidden_before:
            frames = set(range(self.last, self.first - 1, -every))
        else:
            frames = set(range(self.first, self.last + 1, every))
        return tuple(sorted(frames | {self.first, self.last}))

    def to_json(self) -> dict[str, object]:
        return {
            "first": self.first,
            "last": self.last,
            "hidden_before": self.hidden_before,
            "hidden_after": self.hidden_after,
            "strip": list(self.strip()),
        }


@dataclass(frozen=True)
class SmearLag:
    """The measured share of a frame's move by which flow trails the clicked tool, and how
    many moving clicks it was measured on (0: not measured, no correction)."""

    share: float
    observations: int

    def to_json(self) -> dict[str, object]:
        return {"share": round(self.share, 3), "observations": self.observations}


NO_SMEAR = SmearLag(0.0, 0)


@dataclass(frozen=True)
class Propagation:
    """Propagated labels (never the clicked ones), the unlabelled runs between clicks, and
    the unlabelled runs beside "not visible" clicks for the engineer to mark."""

    labels: tuple[FrameLabel, ...]
    gaps: tuple[tuple[int, int], ...]  # (first, last) frame index, inclusive, longest first
    hidden_runs: tuple[HiddenRun, ...] = ()
    smear: SmearLag = NO_SMEAR

    def queued(self) -> tuple[int, ...]:
        """The frame in the middle of each gap: where a click helps most, most useful first."""
        return tuple((first + last) // 2 for first, last in self.gaps)


def _lucas_kanade(
    before: Gray, after: Gray, points: Points, settings: FlowSettings
) -> tuple[Points, npt.NDArray[np.uint8]]:
    criteria = (cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, 30, 0.01)
    moved, status, _ = cv2.calcOpticalFlowPyrLK(
        before,
        after,
        points,
        points.copy(),
        winSize=(settings.window_px, settings.window_px),
        maxLevel=settings.pyramid_levels,
        criteria=criteria,
    )
    return np.asarray(moved, np.float32), np.asarray(status, np.uint8)


def _flow(before: Gray, after: Gray, points: Points, settings: FlowSettings) -> Points:
    """``points`` of ``before`` found in ``after``; NaN rows where the round trip fails."""
    moved, status = _lucas_kanade(before, after, points, settings)
    back, status_back = _lucas_kanade(after, before, moved, settings)
    round_trip = np.linalg.norm(back - points, axis=1)
    good = (
        (status[:, 0] == 1) & (status_back[:, 0] == 1) & (round_trip <= settings.max_round_trip_px)
    )
    out: Points = moved.copy()
    out[~good] = np.nan
    return out


def body_points(pose: Points, size: tuple[int, int], settings: FlowSettings) -> Points:
    """Points on the tool's body: along the tip-rear axis (away from both ends, where the
    window would see mostly background) and beside it, inside the picture."""
    tip, rear = pose[0], pose[1]
    axis = rear - tip
    length = float(np.linalg.norm(axis))
    if length < 1.0:
        return np.empty((0, 2), np.float32)
    across = np.array([-axis[1], axis[0]], np.float32) / length
    rows = [
        tip + fraction * axis + side * across
        for fraction in np.linspace(0.12, 0.88, 12)
        for side in (-3.0, 0.0, 3.0)
    ]
    points = np.array(rows, dtype=np.float32)
    width, height = size
    margin = settings.edge_margin_px
    inside = (
        (points[:, 0] >= margin)
        & (points[:, 0] <= width - 1 - margin)
        & (points[:, 1] >= margin)
        & (points[:, 1] <= height - 1 - margin)
    )
    return points[inside]


def _step(before: Gray, after: Gray, pose: Points, settings: FlowSettings) -> Points | None:
    """The tool's pose (tip, rear) of ``before`` moved into ``after`` by the motion of its body
    points (a rotation, scale and shift fitted with RANSAC); None when too few points agree."""
    height, width = before.shape[:2]
    body = body_points(pose, (width, height), settings)
    if len(body) < settings.min_body_points:
        return None
    moved = _flow(before, after, body, settings)
    good = ~np.isnan(moved[:, 0])
    if int(good.sum()) < settings.min_body_points:
        return None
    matrix, inliers = cv2.estimateAffinePartial2D(
        body[good], moved[good], method=cv2.RANSAC, ransacReprojThreshold=1.0
    )
    if matrix is None or inliers is None or int(inliers.sum()) < settings.min_body_points:
        return None
    if int(inliers.sum()) < settings.min_inlier_share * len(body):
        return None
    scale = float(np.hypot(matrix[0, 0], matrix[1, 0]))
    if abs(scale - 1.0) > settings.max_scale_change:
        return None
    out = (pose @ matrix[:, :2].T + matrix[:, 2]).astype(np.float32)
    tip = out[0]
    margin = settings.edge_margin_px
    if not (margin <= tip[0] <= width - 1 - margin and margin <= tip[1] <= height - 1 - margin):
        return None
    return out


def track(frames: Sequence[Gray], start: Points, settings: FlowSettings) -> list[Points | None]:
    """The pose (tip, rear) in each of ``frames`` (``frames[0]`` holds ``start``) until lost."""
    out: list[Points | None] = [start]
    pose: Points | None = start
    for before, after in pairwise(frames):
        pose = None if pose is None else _step(before, after, pose, settings)
        out.append(pose)
    return out


def _as_points(label: FrameLabel) -> Points:
    assert label.tip is not None and label.rear is not None
    return np.array([label.tip, label.rear], dtype=np.float32)


def _label(index: int, points: Points) -> FrameLabel:
    tip = (float(points[0, 0]), float(points[0, 1]))
    rear = (float(points[1, 0]), float(points[1, 1]))
    return FrameLabel(index, tip, rear, "propagated")


def _trackable(label: FrameLabel) -> bool:
    return label.tip is not None and label.rear is not None


Track = list[Points | None]


@dataclass(frozen=True)
class SpanTracks:
    """Both directions' poses over one span (``frames[0]`` is the first click's frame), in
    frame order; None for a direction that has no click to start from."""

    forward: Track | None
    backward: Track | None


def track_span(
    frames: Sequence[Gray], first: FrameLabel, last: FrameLabel, settings: FlowSettings
) -> SpanTracks:
    forward = track(frames, _as_points(first), settings) if _trackable(first) else None
    backward = track(frames[::-1], _as_points(last), settings)[::-1] if _trackable(last) else None
    return SpanTracks(forward, backward)


def propagate_span(
    frames: Sequence[Gray],
    first: FrameLabel,
    last: FrameLabel,
    settings: FlowSettings,
    smear_lag: float = 0.0,
) -> list[FrameLabel]:
    """Labels for the frames strictly between ``first`` and ``last`` (``frames`` runs from the
    first's frame to the last's, both included). A click needs tip and rear to be followed
    (the rear gives the tool's axis, whose body points carry the motion). ``smear_lag``: the
    share of a frame's move by which the tracks trail the tool (see the module)."""
    return span_labels(track_span(frames, first, last, settings), first, last, settings, smear_lag)


def span_labels(
    tracks: SpanTracks,
    first: FrameLabel,
    last: FrameLabel,
    settings: FlowSettings,
    smear_lag: float = 0.0,
) -> list[FrameLabel]:
    """The labels of one tracked span (see :func:`propagate_span`)."""
    forward = _led(tracks.forward, smear_lag, at_end=False)
    backward = _led(tracks.backward, smear_lag, at_end=True)
    if (forward is None) != (backward is None) and first.visible and last.visible:
        return []  # a visible click without its rear: the two directions cannot be checked
    count = last.frame_index - first.frame_index
    both_ends = forward is not None and backward is not None
    ends = _click_offsets(forward, backward, settings) if both_ends else None
    labels: list[FrameLabel] = []
    for offset in range(1, count):
        ahead = forward[offset] if forward is not None else None
        behind = backward[offset] if backward is not None else None
        if ahead is not None and behind is not None:
            apart = ahead - behind
            if ends is not None:  # less the two clicks' own offset, carried along
                apart = apart - ((1.0 - offset / count) * ends[0] + offset / count * ends[1])
            gap = np.linalg.norm(apart, axis=1)
            if gap[0] > settings.max_disagreement_px or gap[1] > 2 * settings.max_disagreement_px:
                continue
            weight = 1.0 - offset / count  # the forward track is better near the first click
            points = (weight * ahead + (1.0 - weight) * behind).astype(np.float32)
        elif ahead is None and behind is None:
            continue
        elif both_ends:
            # One direction lost the tool where the other still has it: trusted near its own
            # click (as towards a "not visible" click), asked for further away.
            near = offset if ahead is not None else count - offset
            if near > settings.max_one_way_frames:
                continue
            points = ahead if ahead is not None else behind  # type: ignore[assignment]
        elif offset > settings.max_one_way_frames and count - offset > settings.max_one_way_frames:
            continue
        else:
            points = ahead if ahead is not None else behind  # type: ignore[assignment]
        labels.append(_label(first.frame_index + offset, points))
    return labels


def _moves(poses: Track) -> list[Points | None]:
    """Each pose's move since the frame before (the one after where that is unknown: the
    first pose of a backward track that was lost before it)."""
    moves: list[Points | None] = []
    for index, pose in enumerate(poses):
        before = poses[index - 1] if index > 0 else None
        after = poses[index + 1] if index + 1 < len(poses) else None
        if pose is not None and before is not None:
            moves.append(pose - before)
        elif pose is not None and after is not None:
            moves.append(after - pose)
        else:
            moves.append(None)
    return moves


def _led(poses: Track | None, lag: float, at_end: bool) -> Track | None:
    """A track moved on by ``lag`` of each pose's move, less the move at its click (the
    click is where the tool is, its streak's leading end, not where the smear's middle is)."""
    if poses is None or lag == 0.0:
        return poses
    moves = _moves(poses)
    anchor = moves[-1] if at_end else moves[0]
    if anchor is None:
        return poses
    return [
        pose if pose is None or move is None else (pose + lag * (move - anchor)).astype(np.float32)
        for pose, move in zip(poses, moves, strict=True)
    ]


def smear_observations(
    tracks: SpanTracks, first: FrameLabel, last: FrameLabel
) -> list[tuple[Points, Points]]:
    """(click less the track arriving at it, the click's move less the move at the track's
    start) at each end of a span that the other direction's track crossed whole. Without
    smear both are unrelated (the offset is click error); with it the offset is the lag times
    the move difference."""
    out: list[tuple[Points, Points]] = []
    forward, backward = tracks.forward, tracks.backward
    if forward is not None and len(forward) >= 3 and _trackable(last):
        moves = _moves(forward)
        if forward[-1] is not None and moves[-1] is not None and moves[0] is not None:
            out.append((_as_points(last) - forward[-1], moves[-1] - moves[0]))
    if backward is not None and len(backward) >= 3 and _trackable(first):
        moves = _moves(backward)
        if backward[0] is not None and moves[0] is not None and moves[-1] is not None:
            out.append((_as_points(first) - backward[0], moves[0] - moves[-1]))
    return out


def smear_lag(observations: Sequence[tuple[Points, Points]], settings: FlowSettings) -> SmearLag:
    """The lag that best explains the clicks' offsets from the tracks arriving at them: the
    median of each point's offset along its move difference, over the move difference, weighted
    by the move difference squared (a least-squares fit that one misclick cannot pull far).
    Only clicks whose tip moved at least ``min_smear_move_px`` more than at the track's start
    count; with fewer than ``min_smear_observations`` of them the lag is 0 (not measured)."""
    ratios: list[float] = []
    weights: list[float] = []
    used = 0
    for offset, move in observations:
        if float(np.linalg.norm(move[0])) < settings.min_smear_move_px:
            continue
        used += 1
        for point_offset, point_move in zip(offset, move, strict=True):
            size = float(np.dot(point_move, point_move))
            if size > 0.0:
                ratios.append(float(np.dot(point_offset, point_move)) / size)
                weights.append(size)
    if used < settings.min_smear_observations:
        return NO_SMEAR
    order = np.argsort(ratios)
    cumulative = np.cumsum(np.asarray(weights)[order])
    middle = float(np.asarray(ratios)[order][np.searchsorted(cumulative, cumulative[-1] / 2.0)])
    return SmearLag(min(max(middle, 0.0), settings.max_smear_lag), used)


def _click_offsets(
    forward: Sequence[Points | None] | None,
    backward: Sequence[Points | None] | None,
    settings: FlowSettings,
) -> tuple[Points, Points] | None:
    """How far each direction lands from the other direction's click when both crossed the
    whole span: at the first frame, the first click less the backward track; at the last, the
    forward track less the last click. Two clicks a person placed are each off by a pixel or
    so, so the two tracks differ by that much all along even when both follow the tool
    perfectly; only what changes along the span is drift. None (compare the tracks as they
    are) when a direction was lost, or the clicks disagree by more than click error explains
    (``max_click_offset_px``)."""
    if forward is None or backward is None:
        return None
    start_fwd, start_back, end_fwd, end_back = forward[0], backward[0], forward[-1], backward[-1]
    if start_fwd is None or start_back is None or end_fwd is None or end_back is None:
        return None
    start, end = start_fwd - start_back, end_fwd - end_back
    if max(np.linalg.norm(start[0]), np.linalg.norm(end[0])) > settings.max_click_offset_px:
        return None
    return start, end


SpanCache = dict[tuple[FrameLabel, FrameLabel], SpanTracks | None]


def propagate(
    read_span: Frames,
    clicked: Iterable[FrameLabel],
    settings: FlowSettings | None = None,
    cache: SpanCache | None = None,
    out_of_view: Iterable[tuple[int, int]] = (),
) -> Propagation:
    """Propagated labels for every span between consecutive clicked frames.

    ``read_span(first, last)`` gives the frames ``first..last`` (BGR or grey) in order.
    ``cache`` keeps each span's tracks between calls (a span is tracked again only when one
    of its two clicks changed; the smear lag is measured again over all spans every time). ``out_of_view`` are the engineer's marks (see the module);
    a mark that does not start right after or end right before a "not visible" click, or
    crosses a click, is ignored.
    """
    settings = settings or FlowSettings()
    anchors = sorted(
        {label.frame_index: label for label in clicked}.values(),
        key=lambda label: label.frame_index,
    )
    marks = sorted(set(out_of_view))
    spans: list[tuple[FrameLabel, FrameLabel, SpanTracks | None]] = []
    for first, last in pairwise(anchors):
        inner = last.frame_index - first.frame_index - 1
        if inner <= 0:
            continue
        tracks: SpanTracks | None = None
        if cache is not None and (first, last) in cache:
            tracks = cache[(first, last)]
        elif (first.visible or last.visible) and inner < settings.max_span_frames:
            grey = [_grey(image) for _, image in read_span(first.frame_index, last.frame_index)]
            tracks = track_span(grey, first, last, settings)
        if cache is not None:
            cache[(first, last)] = tracks
        spans.append((first, last, tracks))
    smear = NO_SMEAR
    if settings.correct_smear:
        smear = smear_lag(
            [
                observation
                for first, last, tracks in spans
                if tracks is not None
                for observation in smear_observations(tracks, first, last)
            ],
            settings,
        )
    labels: list[FrameLabel] = []
    gaps: list[tuple[int, int]] = []
    hidden: list[HiddenRun] = []
    for first, last, tracks in spans:
        found: list[FrameLabel] = []
        if tracks is not None:
            found = span_labels(tracks, first, last, settings, smear.share)
        marked = _marked_frames(first, last, marks)
        if marked:
            found = [label for label in found if label.frame_index not in marked]
            found += [FrameLabel(index, None, None, "propagated") for index in sorted(marked)]
            found.sort(key=lambda label: label.frame_index)
        labels.extend(found)
        for low, high in _unlabelled_runs(first.frame_index, last.frame_index, found):
            before = not first.visible and low == first.frame_index + 1
            after = not last.visible and high == last.frame_index - 1
            if before or after:
                hidden.append(HiddenRun(low, high, before, after))
            if first.visible or last.visible or not (before or after):
                gaps.append((low, high))  # between two "not visible" clicks: the rest of a mark
    gaps.sort(key=lambda gap: (-(gap[1] - gap[0]), gap[0]))
    log.info(
        "propagated %d labels from %d clicks; %d gaps, %d runs beside 'not visible' clicks; "
        "smear lag %.2f of a move (from %d moving clicks)",
        len(labels),
        len(anchors),
        len(gaps),
        len(hidden),
        smear.share,
        smear.observations,
    )
    return Propagation(tuple(labels), tuple(gaps), tuple(hidden), smear)


def _marked_frames(
    first: FrameLabel, last: FrameLabel, marks: Sequence[tuple[int, int]]
) -> set[int]:
    """The frames strictly between two clicks that the engineer marked out of view."""
    low, high = first.frame_index + 1, last.frame_index - 1
    out: set[int] = set()
    for start, end in marks:
        if start > end or start < low or end > high:
            continue
        if (start == low and not first.visible) or (end == high and not last.visible):
            out.update(range(start, end + 1))
    return out


def _grey(image: npt.NDArray[np.uint8]) -> Gray:
    if image.ndim == 2:
        return image
    return cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)  # type: ignore[return-value]


def _unlabelled_runs(first: int, last: int, found: Sequence[FrameLabel]) -> list[tuple[int, int]]:
    done = {label.frame_index for label in found}
    runs: list[tuple[int, int]] = []
    start: int | None = None
    for index in range(first + 1, last):
        if index in done:
            if start is not None:
                runs.append((start, index - 1))
                start = None
        elif start is None:
            start = index
    if start is not None:
        runs.append((start, last - 1))
    return runs


def point_error_px(label: FrameLabel, tip: Point, rear: Point | None) -> tuple[float, ...]:
    """Distances of a label's points from given ones (the tip's, then the rear's if both)."""
    assert label.tip is not None
    errors = [float(np.hypot(label.tip[0] - tip[0], label.tip[1] - tip[1]))]
    if label.rear is not None and rear is not None:
        errors.append(float(np.hypot(label.rear[0] - rear[0], label.rear[1] - rear[1])))
    return tuple(errors)
