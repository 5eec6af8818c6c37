"""All image judgements of one station, run frame by frame: what replay and the live loop call.

Per frame, in this order: the camera check (every ``interval_ms``, and at once whenever a bin
is about to turn active, so a camera bump is not taken for a reach into a bin), the bins, the
check zones, the picture's quality. While the camera counts as moved or a check has just seen
it shifted, or the picture cannot be judged or cannot check the camera, bins report no activity
and check zones report undecided (fail closed); when the camera is back in place the bins
relearn the empty view from the reference frame. Observations come back in that order, each
only when its state changes (check verdicts also every ``REPEAT_S``; the picture's figures
every few seconds), stamped with the frame's time.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

import cv2
import numpy as np

from stationcheck.config.judgement_settings import JudgementSettings
from stationcheck.config.schema import StationConfig
from stationcheck.core.observations import CameraMoved, CheckVerdict, Observation
from stationcheck.core.plan import ZoneSpec
from stationcheck.core.records import Frame
from stationcheck.errors import ConfigError, InputFileError
from stationcheck.judgements.bin_activity import BinActivityJudge, BinReading
from stationcheck.judgements.camera_shift import CameraShiftJudge, Circle, ReferenceView
from stationcheck.judgements.picture_quality import QualityMonitor
from stationcheck.judgements.presence import (
    REPEAT_S,
    UNDECIDED_SCORE,
    PresenceJudge,
    PresenceScore,
    TaughtClasses,
)
from stationcheck.judgements.teaching import load_taught, teaching_dir
from stationcheck.judgements.zone_window import U8Array

logger = logging.getLogger(__name__)

COST_NAMES = ("camera_shift", "bin_activity", "presence", "picture_quality")


def read_reference_frame(path: Path) -> U8Array:
    """The reference frame as BGR.

    Raises:
        InputFileError: missing or unreadable.
    """
    image = cv2.imread(str(path), cv2.IMREAD_COLOR)
    if image is None:
        raise InputFileError(f"{path}: the reference frame is missing or not an image")
    return np.asarray(image, np.uint8)


class StationJudgements:
    """Bin activity, check-zone presence and camera shift for one station."""

    def __init__(
        self,
        zones: Sequence[ZoneSpec],
        reference_bgr: U8Array,
        settings: JudgementSettings,
        taught: Mapping[str, TaughtClasses | None],
        clock: Callable[[], float] = time.perf_counter,
    ) -> None:
        """``clock`` (seconds) times each judgement for :attr:`last_costs_ms`; the benchmark
        passes ``time.thread_time`` to count CPU time."""
        self._reference = np.asarray(reference_bgr, np.uint8)
        height, width = self._reference.shape[:2]
        self.size_px = (width, height)
        self._clock = clock
        self.quality = QualityMonitor(settings.picture_quality)
        self.camera = CameraShiftJudge(ReferenceView(self._reference, zones), settings.camera_shift)
        self.bins = [
            BinActivityJudge(
                zone.id, zone.polygon_px, self.size_px, settings.bin_activity, self._reference
            )
            for zone in zones
            if zone.kind == "bin"
        ]
        self.checks: dict[str, PresenceJudge | None] = {}
        for zone in zones:
            if zone.kind != "check":
                continue
            classes = taught.get(zone.id)
            if classes is None or not classes.complete:
                logger.warning(
                    "check zone '%s' has no taught present and absent images; it "
                    "stays undecided and no unit is released",
                    zone.id,
                )
                self.checks[zone.id] = None
            else:
                self.checks[zone.id] = PresenceJudge(
                    zone.id, zone.polygon_px, self.size_px, classes, settings.presence
                )
        self._untaught_said: dict[str, float] = {}
        self.last_costs_ms: dict[str, float] = dict.fromkeys(COST_NAMES, 0.0)
        self.last_readings: dict[str, BinReading] = {}
        self.last_scores: dict[str, PresenceScore] = {}

    @classmethod
    def from_config(
        cls, config: StationConfig, clock: Callable[[], float] = time.perf_counter
    ) -> StationJudgements:
        """Reads the reference frame and the taught references next to the config.

        Raises:
            InputFileError: the reference frame is missing or unreadable.
            ConfigError: it does not match the camera size, or taught references are broken.
        """
        reference = read_reference_frame(config.reference_frame_path)
        size = (config.camera.width_px, config.camera.height_px)
        if (reference.shape[1], reference.shape[0]) != size:
            raise ConfigError(
                f"{config.reference_frame_path}: the reference frame is "
                f"{reference.shape[1]}x{reference.shape[0]} px; camera is {size[0]}x{size[1]}"
            )
        zones = config.zone_specs()
        taught = {
            zone.id: load_taught(teaching_dir(config, zone.id), zone)
            for zone in zones
            if zone.kind == "check"
        }
        return cls(zones, reference, config.judgements.to_settings(), taught, clock)

    def observe(
        self,
        frame: Frame,
        ignore_circles_px: Sequence[Circle] = (),
        tip_px: tuple[float, float] | None = None,
    ) -> list[Observation]:
        """The judgements' observations for one frame (often none).

        ``ignore_circles_px`` are areas the camera check should not take features from, e.g.
        circles around the tool's keypoints; ``tip_px`` is where the tool's tip is seen (None:
        not seen), which a reach into a bin must agree with.

        Raises:
            InputFileError: the frame's size differs from the reference frame's.
        """
        if (frame.width_px, frame.height_px) != self.size_px:
            raise InputFileError(
                f"frame {frame.index} is {frame.width_px}x{frame.height_px} px; the reference "
                f"frame is {self.size_px[0]}x{self.size_px[1]}"
            )
        t_s, image = frame.t_s, frame.image
        clock = _CostClock(self._clock)
        poor = not self.quality.picture_checkable
        out: list[Observation] = []
        if self.camera.due(t_s):
            out += _some(self.camera.check(t_s, image, ignore_circles_px, poor))
        clock.lap("camera_shift")
        for judge in self.bins:
            judge.tool_seen(t_s, tip_px)
        readings = [(judge, judge.measure(t_s, image)) for judge in self.bins]
        clock.lap("bin_activity")
        if not self.camera.checked_at(t_s) and any(j.onset_due(t_s, r) for j, r in readings):
            out += _some(self.camera.check(t_s, image, ignore_circles_px, poor))
        clock.lap("camera_shift")
        if any(isinstance(obs, CameraMoved) and not obs.moved for obs in out):
            for judge in self.bins:
                judge.relearn(self._reference)
        quality = self.quality
        unsure = (
            self.camera.moved
            or self.camera.suspect
            or self.camera.unchecked
            or not quality.judgeable
            or not quality.camera_checkable
        )
        for judge, reading in readings:
            self.last_readings[judge.zone_id] = reading
            out += _some(judge.decide(t_s, reading, suppressed=unsure))
        clock.lap("bin_activity")
        out += self._judge_checks(t_s, image, unsure)
        clock.lap("presence")
        learning = [judge.zone_id for judge, reading in readings if reading.learning]
        noisy = [
            judge.zone_id
            for judge, reading in readings
            if not reading.judgeable and not reading.learning
        ]
        bins_reason = ", ".join(
            [f"{', '.join(learning)} learning the live picture"] * bool(learning)
            + [f"{', '.join(noisy)} too noisy to judge"] * bool(noisy)
        )
        camera_reason = "too few features to check the camera" if self.camera.unchecked else ""
        out += _some(quality.observe(t_s, image, bins_reason, camera_reason))
        clock.lap("picture_quality")
        self.last_costs_ms = clock.costs_ms
        return out

    def _judge_checks(self, t_s: float, image: U8Array, unsure: bool) -> list[Observation]:
        out: list[Observation] = []
        for zone_id, judge in self.checks.items():
            if judge is None:
                said = self._untaught_said.get(zone_id)
                if said is None or t_s - said >= REPEAT_S - 1e-9:
                    self._untaught_said[zone_id] = t_s
                    out.append(CheckVerdict(t_s=t_s, zone=zone_id, verdict="undecided"))
                self.last_scores[zone_id] = UNDECIDED_SCORE
                continue
            score = judge.score(image)
            self.last_scores[zone_id] = score
            verdict = judge.decide(t_s, score, suppressed=unsure)
            out += [verdict] if verdict is not None else []
        return out


def _some(observation: Observation | None) -> list[Observation]:
    return [] if observation is None else [observation]


class _CostClock:
    """Milliseconds spent per judgement within one frame (for the benchmark)."""

    def __init__(self, clock: Callable[[], float]) -> None:
        self.costs_ms = dict.fromkeys(COST_NAMES, 0.0)
        self._clock = clock
        self._last = clock()

    def lap(self, name: str) -> None:
        now = self._clock()
        self.costs_ms[name] += 1000.0 * (now - self._last)
        self._last = now
