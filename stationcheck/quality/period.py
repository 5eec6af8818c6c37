"""A review period: wall-clock seconds since the epoch (the log's ``recorded_at`` clock), either
end open. Text forms accepted from people: ISO dates/times (local time unless an offset is
given) and plain epoch seconds."""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timedelta

# SQLite compares REAL with these like any other number; they stand for an open end.
OPEN_START_S = -1.0e18
OPEN_END_S = 1.0e18


@dataclass(frozen=True)
class Period:
    from_s: float | None = None  # inclusive
    to_s: float | None = None  # exclusive

    def __post_init__(self) -> None:
        for name in ("from_s", "to_s"):
            value = getattr(self, name)
            if value is not None and not math.isfinite(value):
                raise ValueError(f"Period.{name} must be a finite number, got {value!r}")
        if self.from_s is not None and self.to_s is not None and self.from_s >= self.to_s:
            raise ValueError(
                f"Period: the start ({self.from_s}) must be before the end ({self.to_s})"
            )

    @property
    def bounds(self) -> tuple[float, float]:
        """(from, to) with open ends as huge numbers, for index range conditions."""
        return (
            OPEN_START_S if self.from_s is None else self.from_s,
            OPEN_END_S if self.to_s is None else self.to_s,
        )

    def describe(self) -> str:
        def show(value: float | None, open_word: str) -> str:
            return open_word if value is None else format_time(value)

        return f"{show(self.from_s, 'the first unit')} to {show(self.to_s, 'the last unit')}"


def format_time(epoch_s: float) -> str:
    """Local time, to the second, with its UTC offset."""
    return datetime.fromtimestamp(epoch_s).astimezone().isoformat(timespec="seconds")


def parse_time(text: str, *, end: bool = False) -> float:
    """Epoch seconds from ``2026-03-01``, ``2026-03-01T14:30``, ``...+01:00`` or ``1767225600``.
    A bare date given as an ``end`` means the end of that day (so ``--until 2026-03-01``
    includes the whole day)."""
    raw = text.strip()
    try:
        return float(raw) if raw.replace(".", "", 1).isdigit() else _parse_iso(raw, end)
    except ValueError as exc:
        raise ValueError(
            f"not a date/time: {text!r} (use e.g. 2026-03-01 or 2026-03-01T14:30 or epoch seconds)"
        ) from exc


def _parse_iso(raw: str, end: bool) -> float:
    moment = datetime.fromisoformat(raw)
    if end and len(raw) == 10:
        moment += timedelta(days=1)
    if moment.tzinfo is None:
        moment = moment.astimezone()  # local time
    return moment.timestamp()
