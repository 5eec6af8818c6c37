"""Recording the sequencer's observations as JSON lines, and reading them back.

The first line is a header (``{"stationcheck_observations": 1, ...}``) naming the format
version and the station plan it was recorded with; every other line is one observation as
:meth:`~stationcheck.core.observations.ObservationBase.to_dict` gives it, in the order the
sequencer saw them (rework positions already filled in). Replaying the lines through a
sequencer with the same plan gives the identical events.
"""

from __future__ import annotations

import hashlib
import json
import logging
from collections.abc import Iterator
from pathlib import Path
from typing import IO, Any

from stationcheck.core.observations import Observation, observation_from_dict
from stationcheck.core.plan import StationPlan
from stationcheck.errors import InputFileError
from stationcheck.pipeline.decision_core import DecisionStep
from stationcheck.pipeline.json_lines import read_json_lines

logger = logging.getLogger(__name__)

FORMAT_KEY = "stationcheck_observations"
FORMAT_VERSION = 1


def plan_digest(plan: StationPlan) -> str:
    """A short fingerprint of the plan, to warn when a stream is replayed with another one."""
    return hashlib.sha256(repr(plan).encode("utf-8")).hexdigest()[:16]


class ObservationRecorder:
    """Writes every observation the sequencer steps on (a pipeline sink)."""

    def __init__(self, path: Path | str, plan: StationPlan, fps: float | None = None) -> None:
        self.path = Path(path)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            # held open for the run and closed in on_stop
            self._handle: IO[str] = open(self.path, "w", encoding="utf-8")  # noqa: SIM115
        except OSError as exc:
            raise InputFileError(f"cannot write observations to {self.path}: {exc}") from exc
        header: dict[str, Any] = {FORMAT_KEY: FORMAT_VERSION, "plan": plan_digest(plan)}
        if fps is not None:
            header["fps"] = fps
        self._write(header)
        self.count = 0

    def _write(self, data: dict[str, Any]) -> None:
        try:
            self._handle.write(json.dumps(data, allow_nan=False, separators=(",", ":")) + "\n")
        except OSError as exc:
            raise InputFileError(f"cannot write observations to {self.path}: {exc}") from exc

    def on_step(self, step: DecisionStep) -> None:
        self._write(step.observation.to_dict())
        self.count += 1

    def on_stop(self, error: BaseException | None) -> None:
        self.close()

    def close(self) -> None:
        if not self._handle.closed:
            self._handle.close()


def read_observations(path: Path | str, plan: StationPlan | None = None) -> Iterator[Observation]:
    """The recorded observations in order; a malformed line raises :class:`InputFileError`
    naming its line. With ``plan``, a stream recorded with another plan is logged as a warning."""
    path = Path(path)
    lines = read_json_lines(path, "observations")
    first = next(lines, None)
    header = _header(path, first[1] if first is not None else None)
    if plan is not None and header.get("plan") not in (None, plan_digest(plan)):
        logger.warning("%s was recorded with another station plan; its events may differ", path)
    for where, data in lines:
        try:
            yield observation_from_dict(data)
        except InputFileError as exc:
            raise InputFileError(f"{where}: {exc}") from exc


def _header(path: Path, data: dict[str, Any] | None) -> dict[str, Any]:
    if data is None or FORMAT_KEY not in data:
        raise InputFileError(
            f"{path}:1: not an observation recording (no {FORMAT_KEY!r} header line)"
        )
    if data[FORMAT_KEY] != FORMAT_VERSION:
        raise InputFileError(
            f"{path}:1: observation format version {data[FORMAT_KEY]!r}; this stationcheck "
            f"reads version {FORMAT_VERSION}"
        )
    return data
