"""A live run put together from a station config: frame source, detector, image judgements,
step log, signal link and watchdogs. Used by ``stationcheck run``."""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from contextlib import ExitStack
from dataclasses import dataclass
from pathlib import Path

from stationcheck.config import StationConfig, load_config
from stationcheck.core.observations import PositionRef
from stationcheck.errors import InputFileError, first_line
from stationcheck.live.grabber import FrameGrabber, SourceOpener
from stationcheck.live.linked_station import LiveLoop
from stationcheck.live.watchdog import WatchdogLimits
from stationcheck.pipeline.frame_loop import LoopStats
from stationcheck.plc.link import SignalLink
from stationcheck.plc.link_session import SessionSettings
from stationcheck.plc.links import LinkSettings, open_link
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from stationcheck.sources.frame_source import FrameSource
from stationcheck.sources.kinds import SourceOptions, parse_source, source_kind

logger = logging.getLogger(__name__)

LinkChoice = str  # a name in stationcheck.plc.links.LINKS


@dataclass(frozen=True)
class LiveSettings:
    config_path: Path
    log_path: Path | None = None
    source: str | None = None  # camera index, URL or video file; None: the config's
    link: LinkChoice | None = None  # None: the config's plc.mode
    host: str | None = None
    port: int | None = None
    timeout_ms: float | None = None  # None: the config's plc.timeout_ms
    pace: bool = True  # a video file plays at its own frame rate
    speed: float = 1.0  # ... or this many times faster (a quicker dry run)
    max_frames: int | None = None
    model_path: Path | None = None


def make_link(config: StationConfig, settings: LiveSettings) -> SignalLink:
    plc = config.plc
    return open_link(
        settings.link or plc.mode,
        LinkSettings(
            host=settings.host or plc.host,
            port=settings.port or plc.port,
            device_id=plc.device_id,
            timeout_ms=plc.timeout_ms if settings.timeout_ms is None else settings.timeout_ms,
            retries=plc.retries,
            address_map=plc.address_map,
        ),
    )


def worker_settings(config: StationConfig) -> WorkerSettings:
    """The PLC's liveness counter is watched (Modbus links; a console link has none)."""
    plc = config.plc
    return WorkerSettings(
        liveness_timeout_s=plc.liveness_timeout_ms / 1000.0,
        session=SessionSettings(serial_pattern=plc.serial_pattern),
    )


def source_opener(
    config: StationConfig, settings: LiveSettings, clock: Callable[[], float]
) -> tuple[SourceOpener, bool, str]:
    """How to (re)open the frame source, whether it is a file, and its name."""
    where = parse_source(settings.source) if settings.source is not None else config.camera_source
    kind = source_kind(where)
    options = SourceOptions(clock=clock, max_frames=settings.max_frames)
    return (lambda: kind.open(where, options)), kind.is_file, str(where)


def link_limits(config: StationConfig, timeout_ms: float | None = None) -> WatchdogLimits:
    """A frozen PLC blocks one request for (retries + 1) x timeout; the loop calls the link
    lost once no full exchange happened for that long plus one link cycle (inputs are read once
    per cycle) and a margin of two requests."""
    plc = config.plc
    request_s = (timeout_ms if timeout_ms is not None else plc.timeout_ms) / 1000.0
    stale_s = min(config.to_plan().thresholds.stale_frame_ms / 1000.0, 0.08)
    return WatchdogLimits(
        frame_timeout_s=stale_s,
        link_timeout_s=(plc.retries + 1) * request_s + 2 * request_s + WorkerSettings().cycle_s,
    )


def run_live(
    settings: LiveSettings,
    should_stop: Callable[[], bool] = lambda: False,
    on_ready: Callable[[LiveLoop], None] | None = None,
) -> LoopStats:
    from stationcheck.judgements.station import StationJudgements
    from stationcheck.pipeline.decision_core import DecisionCore
    from stationcheck.pipeline.evidence import EvidenceWriter, prune_evidence
    from stationcheck.pipeline.frame_path import FramePath
    from stationcheck.pipeline.judging import StationImageJudge
    from stationcheck.pipeline.log_sink import StepLogSink, rework_positions_from_log
    from stationcheck.pipeline.model_identity import with_model_identity
    from stationcheck.store.sqlite_log import SqliteStepLog
    from stationcheck.vision.detector import load_detector

    config = load_config(settings.config_path)
    plan = config.to_plan()
    link = make_link(config, settings)
    started = time.perf_counter()

    def clock() -> float:
        return time.perf_counter() - started

    opener, is_file, source_name = source_opener(config, settings, clock)
    opener = opened_first(opener, source_name)
    log_path = settings.log_path or config.resolve(config.log.path)
    with ExitStack() as stack:
        detector = load_detector(
            settings.model_path or config.model_path, threads=config.model.threads
        )
        plan = with_model_identity(plan, detector)
        judges = [StationImageJudge(StationJudgements.from_config(config))]
        log = SqliteStepLog(log_path, station_id=config.station_id)
        stack.callback(log.close)
        open_unit = log.open_unit_events()  # a unit left open by a stopped run continues
        if open_unit:
            logger.info("continuing the open unit from the step log (%d events)", len(open_unit))
        prune_evidence(log, config.log.retention_days)
        evidence = EvidenceWriter(plan, log_path.parent) if config.log.evidence_images else None
        log_sink = StepLogSink(log, evidence=evidence, deferred=True)

        def rework_lookup(serial: str) -> tuple[PositionRef, ...]:
            log_sink.flush()  # the unit's last pass must be on disk before it is read back
            return rework_positions_from_log(log, serial)

        decisions = DecisionCore(
            plan, sinks=[log_sink], resume_from=open_unit, rework_lookup=rework_lookup
        )
        path = FramePath(plan, detector, decisions, judges)
        grabber = FrameGrabber(
            opener, pace=is_file and settings.pace, speed=settings.speed, retry=not is_file
        ).start()
        stack.callback(grabber.stop)
        shutdown = getattr(link, "shutdown", None)
        if shutdown is not None:
            stack.callback(shutdown)  # a server link serves until the run ends
        worker = LinkWorker(link, clock, worker_settings(config)).start()
        stack.callback(worker.stop)
        loop = LiveLoop(
            path,
            grabber,
            worker,
            limits=link_limits(config, settings.timeout_ms),
            on_frame_taken=evidence.see if evidence is not None else None,
        )
        if on_ready is not None:
            on_ready(loop)
        logger.info("live run: %s, link %s, log %s", source_name, link.name, log_path)
        stats = loop.run(should_stop)
        if stats.frames == 0 and grabber.last_error:
            raise InputFileError(f"{source_name}: no frame could be read ({grabber.last_error})")
        return stats


def opened_first(opener: SourceOpener, name: str) -> SourceOpener:
    """Opens the source once now, so a source that cannot be opened at start-up ends the run
    with one line (exit 3) instead of a retrying grabber; the grabber gets that opened source
    first and re-opens through ``opener`` after a failure."""
    try:
        first = opener()
    except Exception as exc:  # ours, and OpenCV's and FFmpeg's own errors
        raise InputFileError(f"cannot open the frame source {name}: {first_line(exc)}") from exc
    handed = [first]

    def reopen() -> FrameSource:
        return handed.pop() if handed else opener()

    return reopen
