"""The live loop's watchdogs: what turns into an observation when something stops answering.

Frames and the PLC link are checked every loop cycle, whether or not a frame came, so the
sequencer inhibits the tool within one cycle of a limit being passed. The detector (errors
become ``DetectorFault`` in the frame path), lost track (the tracker's grace) and camera
movement (an image judgement) are watched inside the frame path itself.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

from stationcheck.core.observations import FrameStale, LinkStatus, Observation

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class WatchdogLimits:
    frame_timeout_s: float = 0.08  # plus one loop cycle stays inside 100 ms
    link_timeout_s: float = 0.08  # no complete PLC exchange for this long = link lost
    cycle_s: float = 0.01  # the longest the loop waits for a frame before checking again

    def __post_init__(self) -> None:
        for name in ("frame_timeout_s", "link_timeout_s", "cycle_s"):
            value = getattr(self, name)
            if not value > 0:
                raise ValueError(f"WatchdogLimits.{name} must be > 0, got {value}")


class Watchdogs:
    """Remembers what the sequencer was last told, so each change is said once and logged."""

    def __init__(self, limits: WatchdogLimits) -> None:
        self.limits = limits
        self.frame_stale = False
        self.link_ok: bool | None = None
        self.alarms: list[str] = []

    def check_frames(self, age_s: float, t_s: float) -> list[Observation]:
        if age_s > self.limits.frame_timeout_s:
            if not self.frame_stale:
                self.frame_stale = True
                self._alarm(f"no new frame for {age_s * 1e3:.0f} ms")
            return [FrameStale(t_s=t_s, age_ms=age_s * 1e3)]
        return []

    def frame_arrived(self) -> None:
        if self.frame_stale:
            logger.info("frames again")
        self.frame_stale = False

    def check_link(self, up: bool, silent_s: float, t_s: float) -> list[Observation]:
        ok = up and silent_s <= self.limits.link_timeout_s
        if ok == self.link_ok:
            return []
        self.link_ok = ok
        if ok:
            logger.info("PLC link healthy")
        else:
            reason = "down" if not up else f"silent for {silent_s * 1e3:.0f} ms"
            self._alarm(f"PLC link {reason}")
        return [LinkStatus(t_s=t_s, ok=ok)]

    def _alarm(self, message: str) -> None:
        self.alarms.append(message)
        logger.warning("watchdog: %s; tool inhibited", message)
