"""Station inputs from a JSON-lines file, and their merge into the frame stream by time.

One JSON object per line, in time order, each with ``t_s`` (seconds on the video's clock) and
``kind``:

==================  =========================================================================
kind                fields
==================  =========================================================================
unit_started        ``serial``, ``rework`` (default false); a rework pass's positions are
                    looked up in the step log
tool_running        ``on`` (true when the tool starts, false when it stops)
tightening_result   ``ok``, ``torque_nm``, ``angle_deg`` (optional), ``sequence`` (optional:
                    the tightening controller's result counter)
operator_ack        (none)
reset / abort       ``reason``
link_status         ``ok``
==================  =========================================================================

``frame`` and ``position`` may be present for people reading the file; they are ignored
(the tightening controller does not know where the tool was; the camera decides that).

Merge rule: an input stamped ``t_s`` is applied before the first frame whose time is at or
after it (within :data:`TIME_TOLERANCE_S`, which absorbs timestamps rounded to microseconds).
Inputs stamped up to one frame period after the last frame are applied after it; later ones
lie beyond the frames processed and are left out (and counted).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

from stationcheck.core.observations import (
    Abort,
    LinkStatus,
    Observation,
    OperatorAck,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.errors import InputFileError
from stationcheck.pipeline.json_lines import read_json_lines

TIME_TOLERANCE_S = 1e-4
IGNORED_KEYS = frozenset({"frame", "position"})
INPUT_KINDS: dict[str, tuple[type[Observation], frozenset[str], frozenset[str]]] = {
    # kind: (observation, required fields, optional fields)
    "unit_started": (UnitStarted, frozenset({"serial"}), frozenset({"rework"})),
    "tool_running": (ToolRunning, frozenset({"on"}), frozenset()),
    "tightening_result": (
        TighteningResult,
        frozenset({"ok"}),
        frozenset({"torque_nm", "angle_deg", "sequence"}),
    ),
    "operator_ack": (OperatorAck, frozenset(), frozenset()),
    "reset": (Reset, frozenset({"reason"}), frozenset()),
    "abort": (Abort, frozenset({"reason"}), frozenset()),
    "link_status": (LinkStatus, frozenset({"ok"}), frozenset()),
}


def parse_input(data: Any, where: str) -> Observation:
    """One input line (already JSON-decoded) as an observation; ``where`` prefixes errors."""
    if not isinstance(data, dict):
        raise InputFileError(f"{where}: expected a JSON object, got {type(data).__name__}")
    kind = data.get("kind")
    if kind not in INPUT_KINDS:
        raise InputFileError(f"{where}: kind must be one of {sorted(INPUT_KINDS)}, got {kind!r}")
    cls, required, optional = INPUT_KINDS[kind]
    fields = set(data) - {"kind", "t_s"} - IGNORED_KEYS
    missing = sorted(required - fields)
    unknown = sorted(fields - required - optional)
    if "t_s" not in data:
        missing.insert(0, "t_s")
    if missing:
        raise InputFileError(f"{where}: {kind} needs {', '.join(missing)}")
    if unknown:
        raise InputFileError(
            f"{where}: {kind} does not take {', '.join(unknown)}; "
            f"it takes {', '.join(sorted(required | optional | {'t_s'}))}"
        )
    kwargs = {name: data[name] for name in fields}
    try:
        return cls(t_s=data["t_s"], **kwargs)
    except (TypeError, ValueError) as exc:
        raise InputFileError(f"{where}: {kind} is malformed: {exc}") from exc


def read_station_inputs(path: Path | str) -> tuple[Observation, ...]:
    """Every input of the file in order; the first bad line raises :class:`InputFileError`."""
    inputs: list[Observation] = []
    for where, data in read_json_lines(Path(path), "station inputs"):
        observation = parse_input(data, where)
        if inputs and observation.t_s < inputs[-1].t_s:
            raise InputFileError(
                f"{where}: inputs must be in time order; t_s {observation.t_s} comes after "
                f"{inputs[-1].t_s}"
            )
        inputs.append(observation)
    return tuple(inputs)


class InputSchedule:
    """Hands out the inputs due before each frame (see the module's merge rule)."""

    def __init__(self, inputs: Sequence[Observation]) -> None:
        self._inputs = tuple(inputs)
        self._next = 0

    def due(self, frame_t_s: float) -> tuple[Observation, ...]:
        """Inputs stamped at or before this frame's time that were not handed out yet."""
        start = self._next
        limit = frame_t_s + TIME_TOLERANCE_S
        while self._next < len(self._inputs) and self._inputs[self._next].t_s <= limit:
            self._next += 1
        return self._inputs[start : self._next]

    def skip_before(self, t_s: float) -> int:
        """Drop inputs before ``t_s`` (a run that starts part-way into a recording); returns how
        many were dropped."""
        start = self._next
        limit = t_s - TIME_TOLERANCE_S
        while self._next < len(self._inputs) and self._inputs[self._next].t_s < limit:
            self._next += 1
        return self._next - start

    @property
    def pending(self) -> int:
        return len(self._inputs) - self._next
