"""A replay put together: config, station inputs, frames or a recorded observation stream,
detector, image judgements, step log and outputs; run; summarise; compare with expectations.

Used by ``stationcheck replay`` and ``stationcheck demo``. Every input is checked before any
frame is processed, so a missing or bad file stops the run with one line before a log exists.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Sequence
from contextlib import ExitStack
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal, Protocol

from stationcheck.config import StationConfig, load_config
from stationcheck.core.observations import ZoneObservation
from stationcheck.core.plan import StationPlan
from stationcheck.errors import InputFileError, StoreError
from stationcheck.pipeline.comparison import (
    DEFAULT_EDGE_TOLERANCE_FRAMES,
    compare_decisions,
    count_false_enables,
    restrict_to_frames,
)
from stationcheck.pipeline.decision_core import DecisionCore, StepSink
from stationcheck.pipeline.decision_trace import RunTrace
from stationcheck.pipeline.evidence import EvidenceWriter, prune_evidence
from stationcheck.pipeline.expected import Decision, decisions_from_events, read_expected
from stationcheck.pipeline.frame_loop import FrameSink, LoopStats, Progress, run_loop
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.pipeline.judging import ImageJudge
from stationcheck.pipeline.log_sink import StepLogSink, rework_positions_from_log
from stationcheck.pipeline.model_identity import with_model_identity
from stationcheck.pipeline.observation_stream import ObservationRecorder, read_observations
from stationcheck.pipeline.replay_report import ReplayReport
from stationcheck.pipeline.station_inputs import InputSchedule, read_station_inputs
from stationcheck.pipeline.summary import summarise_units
from stationcheck.pipeline.truth_sidecar import TruthJudge, TruthTable, load_truth, truth_detector
from stationcheck.store.sqlite_log import SqliteStepLog

if TYPE_CHECKING:
    from stationcheck.vision.detector import KeypointDetector

logger = logging.getLogger(__name__)

DetectorChoice = Literal["model", "truth"]
JudgeChoice = Literal["image", "truth"]


@dataclass(frozen=True)
class ReplaySettings:
    config_path: Path
    log_path: Path
    video: Path | None = None
    inputs: Path | None = None
    observations: Path | None = None
    expected: Path | None = None
    truth: Path | None = None
    annotate: Path | None = None
    annotate_every: int = 1
    record_observations: Path | None = None
    model_path: Path | None = None
    threads: int | None = None
    detector: DetectorChoice = "model"
    judges: JudgeChoice = "image"
    first_frame: int = 0
    max_frames: int | None = None
    edge_tolerance_frames: int = DEFAULT_EDGE_TOLERANCE_FRAMES


@dataclass
class _Prepared:
    config: StationConfig
    plan: StationPlan
    expected: list[Decision] | None = None
    truth: TruthTable | None = None


def truth_next_to(expected: Path) -> Path | None:
    """``x_expected.jsonl`` -> ``x_truth.csv`` beside it, if that file exists."""
    name = expected.name
    if name.endswith("_expected.jsonl"):
        candidate = expected.with_name(name[: -len("_expected.jsonl")] + "_truth.csv")
        if candidate.is_file():
            return candidate
    return None


def open_fresh_log(path: Path, station_id: str | None = None) -> SqliteStepLog:
    """A replay writes a log of its own: an existing log with events is not touched."""
    log = SqliteStepLog(path, station_id=station_id)
    if log.events(limit=1):
        log.close()
        raise StoreError(
            f"step log {path} already holds events; a replay writes a fresh log (pass a new --log)"
        )
    return log


class Watcher(FrameSink, StepSink, Protocol):
    """Sees every sequencer step and every frame (an operator screen, a playback pacer)."""


def run_replay(
    settings: ReplaySettings, progress: Progress | None = None, watchers: Sequence[Watcher] = ()
) -> ReplayReport:
    config = load_config(settings.config_path)
    prepared = _Prepared(config=config, plan=config.to_plan())
    if settings.expected is not None:
        prepared.expected = read_expected(settings.expected)
    truth_path = settings.truth
    if truth_path is None and settings.expected is not None:
        truth_path = truth_next_to(settings.expected)
    if truth_path is not None:
        prepared.truth = load_truth(truth_path)
    if settings.observations is not None:
        return _replay_observations(settings, prepared, progress)
    return _replay_video(settings, prepared, progress, watchers)


def _replay_video(
    settings: ReplaySettings,
    prepared: _Prepared,
    progress: Progress | None,
    watchers: Sequence[Watcher] = (),
) -> ReplayReport:
    from stationcheck.sources.kinds import SourceOptions, open_source

    if settings.video is None:
        raise InputFileError("replay needs a video file (or --observations)")
    if settings.inputs is None:
        raise InputFileError("replay of a video needs the station inputs file (--inputs)")
    inputs = read_station_inputs(settings.inputs)
    plan, config = prepared.plan, prepared.config
    with ExitStack() as stack:
        source = open_source(
            settings.video,
            SourceOptions(first_frame=settings.first_frame, max_frames=settings.max_frames),
        )
        stack.callback(source.close)
        detector = _detector(settings, config, prepared.truth)
        plan = with_model_identity(plan, detector)
        judges = _judges(settings, config, plan, prepared.truth)
        outputs = _open_outputs(stack, settings, plan, source.fps, config)
        log = outputs.log
        frame_sinks: list[FrameSink] = []
        writer = None
        if settings.annotate is not None:
            from stationcheck.pipeline.annotated_video import AnnotatedVideoWriter

            writer = AnnotatedVideoWriter(
                settings.annotate, plan, source.fps, every=settings.annotate_every
            )
            stack.callback(writer.on_stop, None)
            outputs.sinks.append(writer)
            frame_sinks.append(writer)
        outputs.sinks.extend(watchers)
        frame_sinks.extend(watchers)
        decisions = DecisionCore(
            plan,
            rework_lookup=lambda serial: rework_positions_from_log(log, serial),
            sinks=outputs.sinks,
        )
        path = FramePath(plan, detector, decisions, judges)
        schedule = InputSchedule(inputs)
        if settings.first_frame > 0:
            schedule.skip_before(settings.first_frame / source.fps)
        evidence = outputs.log_sink.evidence
        stats = run_loop(
            source,
            path,
            schedule,
            frame_sinks,
            progress,
            on_read=evidence.see if evidence is not None else None,
        )
        if writer is not None:
            writer.raise_if_failed()
        return _report(
            settings,
            prepared,
            outputs,
            stats,
            settings.first_frame,
            detector_name=_detector_name(settings, path.model_file),
            judges_name=settings.judges,
        )


def _replay_observations(
    settings: ReplaySettings, prepared: _Prepared, progress: Progress | None
) -> ReplayReport:
    assert settings.observations is not None
    if settings.annotate is not None:
        raise InputFileError("an annotated video needs the video itself, not --observations")
    observations = list(read_observations(settings.observations, prepared.plan))
    with ExitStack() as stack:
        outputs = _open_outputs(stack, settings, prepared.plan, fps=None)
        decisions = DecisionCore(prepared.plan, sinks=outputs.sinks)
        stats = LoopStats()
        started = time.perf_counter()
        error: BaseException | None = None
        try:
            for number, observation in enumerate(observations, start=1):
                decisions.apply(observation)
                if observation.kind == "zone":
                    stats.frames += 1
                    if progress is not None:
                        progress(number, len(observations))
        except BaseException as exc:
            error = exc
            raise
        finally:
            stats.wall_s = time.perf_counter() - started
            decisions.stop(error)
        first = next((o.frame_index for o in observations if isinstance(o, ZoneObservation)), 0)
        return _report(
            settings,
            prepared,
            outputs,
            stats,
            first,
            detector_name="recorded observations",
            judges_name="recorded observations",
        )


@dataclass
class _Outputs:
    """Where every sequencer step goes: the step log, the trace kept for the report, and the
    observation recording if asked for."""

    log: SqliteStepLog
    log_sink: StepLogSink
    trace: RunTrace
    sinks: list[StepSink]


def _open_outputs(
    stack: ExitStack,
    settings: ReplaySettings,
    plan: StationPlan,
    fps: float | None,
    config: StationConfig | None = None,
) -> _Outputs:
    """``config`` given (a replay with frames): evidence images as the config's log section
    says, old ones pruned first."""
    log = open_fresh_log(settings.log_path, config.station_id if config is not None else None)
    stack.callback(log.close)
    evidence = None
    if config is not None:
        prune_evidence(log, config.log.retention_days)
        if config.log.evidence_images:
            evidence = EvidenceWriter(plan, settings.log_path.parent)
    log_sink, trace = StepLogSink(log, evidence=evidence), RunTrace()
    sinks: list[StepSink] = [log_sink, trace]
    if settings.record_observations is not None:
        recorder = ObservationRecorder(settings.record_observations, plan, fps)
        stack.callback(recorder.close)
        sinks.append(recorder)
    return _Outputs(log, log_sink, trace, sinks)


def _detector(
    settings: ReplaySettings, config: StationConfig, truth: TruthTable | None
) -> KeypointDetector:
    if settings.detector == "truth":
        if truth is None:
            raise InputFileError("--detector truth needs the ground-truth file (--truth)")
        return truth_detector(truth)
    from stationcheck.vision.detector import load_detector

    path = settings.model_path if settings.model_path is not None else config.model_path
    threads = settings.threads if settings.threads is not None else config.model.threads
    return load_detector(path, threads=threads)


def _detector_name(settings: ReplaySettings, model_file: Path | None) -> str:
    if settings.detector == "truth":
        return "ground truth (no model)"
    return str(model_file or "model")


def _judges(
    settings: ReplaySettings, config: StationConfig, plan: StationPlan, truth: TruthTable | None
) -> Sequence[ImageJudge]:
    if settings.judges == "truth":
        if truth is None:
            raise InputFileError("--judges truth needs the ground-truth file (--truth)")
        return [TruthJudge(truth, plan, (config.camera.width_px, config.camera.height_px))]
    from stationcheck.judgements.station import StationJudgements
    from stationcheck.pipeline.judging import StationImageJudge

    return [StationImageJudge(StationJudgements.from_config(config))]


def _report(
    settings: ReplaySettings,
    prepared: _Prepared,
    outputs: _Outputs,
    stats: LoopStats,
    first_frame: int,
    *,
    detector_name: str,
    judges_name: str,
) -> ReplayReport:
    trace = outputs.trace
    last_frame = trace.last_frame_index
    frames = trace.frames()
    end_t_s = frames[-1].t_s if frames else None
    units = summarise_units(trace.events, end_t_s)
    comparison = None
    if prepared.expected is not None:
        actual = decisions_from_events(trace.framed_events(), last_frame)
        expected = restrict_to_frames(prepared.expected, first_frame, last_frame)
        comparison = compare_decisions(
            expected, actual, edge_tolerance_frames=settings.edge_tolerance_frames
        )
    false_enables = None
    if prepared.truth is not None:
        false_enables = count_false_enables(frames, prepared.truth, prepared.plan)
    return ReplayReport(
        mode="observations" if settings.observations is not None else "video",
        source=str(settings.observations or settings.video),
        config_path=str(settings.config_path),
        detector=detector_name,
        judgements=judges_name,
        first_frame=first_frame,
        last_frame=last_frame,
        stats=stats,
        units=units,
        comparison=comparison,
        false_enables=false_enables,
        log_path=str(settings.log_path),
        events=outputs.log_sink.events_written,
        annotated_video=str(settings.annotate) if settings.annotate else None,
        observations_path=str(settings.record_observations)
        if settings.record_observations
        else None,
    )
