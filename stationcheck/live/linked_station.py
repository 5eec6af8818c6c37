"""The live run's side of the frame loop: the newest grabbed frame, the loop's clock, the PLC
link worker, the watchdogs, the heartbeat and the enable publishing.

:class:`LiveLoop` is the :class:`~stationcheck.pipeline.frame_loop.FrameLoop` wired with a
:class:`GrabberFeed` and a :class:`LinkedStation`; the loop itself is the one replay runs.

The loop never waits on the PLC (the link worker does the I/O) and waits for a frame at most
one watchdog cycle. A frame's image judgements run on the frame path's judging thread while the
loop waits for and detects the next frame; their findings are decided before anything else in
the next cycle. Observations from the PLC come next, stamped with the loop's current time, so
time never runs backwards for the sequencer; then the new frame's tool position. A cycle's
step-log records are committed right after its outputs are handed to the link worker (the
disk's sync time never delays the enable), and the PLC's handshakes are acknowledged only once
what they brought is committed. Fail towards inhibit: the link counts as down until the worker
proves it; whatever ends the loop, :meth:`LinkedStation.stop` publishes the enable off and
stops the link worker, whose last act is writing it.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable, Sequence
from dataclasses import replace

from stationcheck.core.observations import LinkStatus, Observation
from stationcheck.core.outputs import Output
from stationcheck.core.records import Frame
from stationcheck.errors import first_line, stop_requested
from stationcheck.live.grabber import FrameGrabber
from stationcheck.live.watchdog import WatchdogLimits, Watchdogs
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.frame_loop import (
    FrameLoop,
    FrameSink,
    GrabbedFrame,
    LoopStats,
)
from stationcheck.pipeline.frame_path import FramePath, Sighting
from stationcheck.plc.signals import OutputEncoder, OutputSignals
from stationcheck.plc.worker import LinkWorker

logger = logging.getLogger(__name__)


class GrabberFeed:
    """The newest grabbed frame, waiting at most one watchdog cycle for it."""

    def __init__(self, grabber: FrameGrabber, cycle_s: float) -> None:
        self.grabber = grabber
        self.cycle_s = cycle_s

    def take(self) -> GrabbedFrame | None:
        return self.grabber.take(self.cycle_s)

    @property
    def ended(self) -> bool:
        return self.grabber.ended

    def stop(self) -> None:
        self.grabber.stop()


class LinkedStation:
    """The station over a signal link: the loop's clock (the newest frame's time, moved on by
    waiting), the link and frame watchdogs, the heartbeat, and the outputs as signals."""

    def __init__(self, decisions: DecisionCore, worker: LinkWorker, limits: WatchdogLimits) -> None:
        self.decisions = decisions
        self.worker = worker
        self.watchdogs = Watchdogs(limits)
        self.encoder = OutputEncoder(decisions.plan)
        self.heartbeat = 0
        self.t_s = 0.0  # the loop's time: the newest frame's, moved on by waiting
        self.last_frame_at = time.perf_counter()  # when the loop last had a frame in hand
        self._last_frame_t_s: float | None = None
        self._frame_in_hand_s: float | None = None
        self._acks_taken = (0, 0)
        self._acks_committed = (0, 0)  # handshakes whose records are on disk

    def start(self, started_at_s: float) -> Sequence[Observation]:
        self.last_frame_at = started_at_s
        self.watchdogs.link_ok = False
        return [LinkStatus(t_s=0.0, ok=False)]  # until the worker proves the link

    def cycle_started(self, now_s: float) -> None:
        if self._last_frame_t_s is not None:
            waited = now_s - self.last_frame_at
            self.t_s = max(self.t_s, self._last_frame_t_s + max(0.0, waited))

    def frame_in(self, frame: Frame) -> Frame:
        if frame.t_s < self.t_s:
            frame = replace(frame, t_s=self.t_s)
        self.watchdogs.frame_arrived()
        return frame

    def inputs(self, sighting: Sighting | None) -> Sequence[Observation]:
        """What the PLC brought, stamped with the loop's time, after any link status change."""
        found = [
            replace(o, t_s=self.t_s) for o in self.worker.take() if not isinstance(o, LinkStatus)
        ]
        self._acks_taken = self.worker.acks
        return self.watchdogs.check_link(self.worker.up, self.worker.silent_s(), self.t_s) + found

    def no_frame(self, now_s: float) -> Sequence[Observation]:
        return self.watchdogs.check_frames(now_s - self.last_frame_at, self.t_s)

    def deciding(self, sighting: Sighting, grabbed_at_s: float) -> None:
        self._frame_in_hand_s = grabbed_at_s
        if sighting.keypoints is not None and self.watchdogs.link_ok:
            self.heartbeat = (self.heartbeat + 1) & 0xFFFF  # goes out with the decision

    def on_decided(self, output: Output) -> None:
        """The frame's tool-position decision, sent at once with the cycle's heartbeat (which
        counts only for a frame the detector read and over a working link)."""
        self._send(output, self._frame_in_hand_s)

    def decided(self, sighting: Sighting, grabbed_at_s: float) -> None:
        self._frame_in_hand_s = None
        self.t_s = self._last_frame_t_s = sighting.frame.t_s
        self.last_frame_at = grabbed_at_s

    def cycle_done(self, grabbed_at_s: float | None) -> None:
        """The cycle's outputs (written only if they changed since the decision), then its
        step-log records committed; handshakes are acknowledged from then on."""
        self._send(self.decisions.last_output, grabbed_at_s)
        self.decisions.flush()
        self._acks_committed = self._acks_taken

    def after_last(self) -> Sequence[Observation]:
        return ()

    def finish(self, stats: LoopStats) -> None:
        self.decisions.flush()

    def stop(self, error: BaseException | None) -> None:
        if error is not None:
            if stop_requested(error):
                logger.info("live loop stopped on request")
            else:
                logger.error("live loop stopped: %s", first_line(error))
        self._send(self.decisions.last_output, None, force_inhibit=True)
        self.worker.stop()

    def _send(
        self, output: Output | None, since_s: float | None, force_inhibit: bool = False
    ) -> None:
        """``output`` as signals with the heartbeat and the committed handshakes."""
        unit_ack, result_ack = self._acks_committed
        if output is None:
            signals = OutputSignals(
                heartbeat=self.heartbeat, unit_ack=unit_ack, result_ack=result_ack
            )
        else:
            signals = self.encoder.encode(
                output,
                heartbeat=self.heartbeat,
                unit_ack=unit_ack,
                result_ack=result_ack,
                force_inhibit=force_inhibit,
            )
        self.worker.publish(signals, since_s)


class LiveLoop(FrameLoop):
    """The frame loop over a frame grabber and a signal link (it only wires them)."""

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
        limits = limits or WatchdogLimits()
        self.grabber = grabber
        self.worker = worker
        self.linked = LinkedStation(path.decisions, worker, limits)  # also ``self.station``
        self.watchdogs = self.linked.watchdogs
        super().__init__(
            path,
            GrabberFeed(grabber, limits.cycle_s),
            self.linked,
            frame_sinks=frame_sinks,
            on_frame_taken=on_frame_taken,
        )

    @property
    def _last_frame_at(self) -> float:
        """When the loop last had a frame in hand (perf_counter)."""
        return self.linked.last_frame_at
