"""The live loop: newest frame -> frame path -> outputs to the link worker, with watchdogs.

The loop never waits on the PLC (the link worker does the I/O) and waits for a frame at most
one watchdog cycle. A frame's image judgements run on the frame path's judging thread while the
loop waits for and detects the next frame; their findings are decided before anything else in
the next cycle. Observations from the PLC come next, stamped with the loop's current time, so
time never runs backwards for the sequencer; then the new frame's tool position. A cycle's
step-log records are committed right after its outputs are handed to the link worker (the
disk's sync time never delays the enable), and the PLC's handshakes are acknowledged only once
what they brought is committed. Whatever ends the loop, the ``finally`` block publishes the
enable off and stops the link worker, whose last act is writing it.
"""

from __future__ import annotations

import logging
import statistics
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from stationcheck.core.observations import LinkStatus, Observation
from stationcheck.core.outputs import Output
from stationcheck.core.records import Frame
from stationcheck.errors import first_line, stop_requested
from stationcheck.live.grabber import FrameGrabber
from stationcheck.live.watchdog import WatchdogLimits, Watchdogs
from stationcheck.pipeline.frame_path import FramePath, FrameResult, Sighting
from stationcheck.pipeline.loop import FrameSink
from stationcheck.plc.signals import OutputEncoder, OutputSignals
from stationcheck.plc.worker import LinkWorker

logger = logging.getLogger(__name__)


@dataclass
class LiveStats:
    frames: int = 0
    cycles: int = 0
    wall_s: float = 0.0
    process_ms: list[float] = field(default_factory=list)
    busy_ms: list[float] = field(default_factory=list)  # frame taken -> outputs out, log committed
    heartbeat: int = 0

    @property
    def fps(self) -> float:
        return self.frames / self.wall_s if self.wall_s > 0 else 0.0

    def process_ms_median(self) -> float:
        return statistics.median(self.process_ms) if self.process_ms else 0.0


class LiveLoop:
    def __init__(
        self,
        path: FramePath,
        grabber: FrameGrabber,
        worker: LinkWorker,
        *,
        limits: WatchdogLimits | None = None,
        frame_sinks: tuple[FrameSink, ...] = (),
        on_frame_taken: Callable[[Frame], None] | None = None,
    ) -> None:
        self.path = path
        self.decisions = path.decisions
        self.grabber = grabber
        self.worker = worker
        self.watchdogs = Watchdogs(limits or WatchdogLimits())
        self.encoder = OutputEncoder(path.plan)
        self.frame_sinks = frame_sinks
        self.on_frame_taken = on_frame_taken
        self._frame_in_hand_s: float | None = None
        self._taken_at = 0.0
        path.on_decided = self._publish_decided  # the enable goes out before the judgements
        self._acks_taken = (0, 0)
        self._acks_committed = (0, 0)  # handshakes whose records are on disk
        self.stats = LiveStats()
        self.t_s = 0.0  # the loop's time: the newest frame's, moved on by waiting
        self._last_frame_at = time.perf_counter()
        self._last_frame_t_s: float | None = None

    def run(self, should_stop: Callable[[], bool] = lambda: False) -> LiveStats:
        started = time.perf_counter()
        self._last_frame_at = started
        error: BaseException | None = None
        try:
            self._apply(LinkStatus(t_s=0.0, ok=False))  # until the worker proves the link
            self.watchdogs.link_ok = False
            while not should_stop():
                grabbed = self.grabber.take(self.watchdogs.limits.cycle_s)
                if grabbed is None and self.grabber.ended:
                    break
                self.stats.cycles += 1
                now = time.perf_counter()
                self._advance_clock(now)
                taken = (
                    None if grabbed is None else (self._sight(grabbed.frame), grabbed.grabbed_at_s)
                )
                previous = self.path.settle()  # the previous frame's judgements decided
                for observation in self._link_observations(now):
                    self._apply(observation)
                if taken is None:
                    for observation in self.watchdogs.check_frames(
                        now - self._last_frame_at, self.t_s
                    ):
                        self._apply(observation)
                    since_s = None
                else:
                    sighting, since_s = taken
                    self._decide(sighting, since_s)
                    self._last_frame_at = since_s
                self._publish(since_s)
                self.decisions.flush()
                self._acks_committed = self._acks_taken
                if grabbed is not None:
                    self.stats.busy_ms.append((time.perf_counter() - now) * 1e3)
                self._hand_on(previous)
            self._hand_on(self.path.settle())
            self.decisions.flush()
        except BaseException as exc:
            error = exc
            if stop_requested(exc):
                logger.info("live loop stopped on request")
            else:
                logger.error("live loop stopped: %s", first_line(exc))
            raise
        finally:
            self.stats.wall_s = time.perf_counter() - started
            self.path.close()
            self._publish(None, force_inhibit=True)
            self.worker.stop()
            self.grabber.stop()
            self.decisions.stop(error, also=self.frame_sinks)
        return self.stats

    def _advance_clock(self, now: float) -> None:
        if self._last_frame_t_s is not None:
            waited = now - self._last_frame_at
            self.t_s = max(self.t_s, self._last_frame_t_s + max(0.0, waited))

    def _link_observations(self, now: float) -> list[Observation]:
        found = [
            replace(o, t_s=self.t_s) for o in self.worker.take() if not isinstance(o, LinkStatus)
        ]
        self._acks_taken = self.worker.acks
        return self.watchdogs.check_link(self.worker.up, self.worker.silent_s(), self.t_s) + found

    def _sight(self, frame: Frame) -> Sighting:
        if self.on_frame_taken is not None:
            self.on_frame_taken(frame)
        if frame.t_s < self.t_s:
            frame = replace(frame, t_s=self.t_s)
        self.watchdogs.frame_arrived()
        self._taken_at = time.perf_counter()
        return self.path.sight(frame)

    def _decide(self, sighting: Sighting, in_hand_s: float) -> None:
        self._frame_in_hand_s = in_hand_s
        if sighting.keypoints is not None and self.watchdogs.link_ok:
            self.stats.heartbeat = (self.stats.heartbeat + 1) & 0xFFFF  # goes out with the decision
        self.path.decide(sighting)
        self._frame_in_hand_s = None
        self.stats.process_ms.append((time.perf_counter() - self._taken_at) * 1e3)
        self.stats.frames += 1
        self.t_s = sighting.frame.t_s
        self._last_frame_t_s = sighting.frame.t_s

    def _hand_on(self, result: FrameResult | None) -> None:
        if result is not None:
            for sink in self.frame_sinks:
                sink.on_frame(result)

    def _apply(self, observation: Observation) -> None:
        self.decisions.apply(observation)

    def _publish_decided(self, output: Output) -> None:
        """The frame's tool-position decision, sent at once with the cycle's heartbeat (which
        counts only for a frame the detector read and over a working link)."""
        self._send(output, self._frame_in_hand_s)

    def _publish(self, since_s: float | None, force_inhibit: bool = False) -> None:
        """The cycle's outputs; the link writes them only if they changed since the decision."""
        self._send(self.decisions.last_output, since_s, force_inhibit)

    def _send(
        self, output: Output | None, since_s: float | None, force_inhibit: bool = False
    ) -> None:
        """``output`` as signals with the heartbeat and the committed handshakes."""
        unit_ack, result_ack = self._acks_committed
        if output is None:
            signals = OutputSignals(
                heartbeat=self.stats.heartbeat, unit_ack=unit_ack, result_ack=result_ack
            )
        else:
            signals = self.encoder.encode(
                output,
                heartbeat=self.stats.heartbeat,
                unit_ack=unit_ack,
                result_ack=result_ack,
                force_inhibit=force_inhibit,
            )
        self.worker.publish(signals, since_s)
