"""Western Electric run rules on individual values against a centre line and sigma.

Rules (Western Electric Statistical Quality Control Handbook, 1956):
1. one value beyond 3 sigma;
2. two of three consecutive values beyond 2 sigma on the same side;
3. four of five consecutive values beyond 1 sigma on the same side;
4. eight consecutive values on the same side of the centre line.
A rule fires at the value that completes its pattern, and only if that value is itself one of
the values beyond the zone (so each hit points at a value that is part of the pattern). "Beyond"
is strict; a value exactly on the centre line breaks a rule 4 run.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

RULE_TEXT = {
    1: "1 value beyond 3 sigma",
    2: "2 of 3 values beyond 2 sigma, same side",
    3: "4 of 5 values beyond 1 sigma, same side",
    4: "8 values in a row on one side of the centre",
}
# (rule, window length, values needed, zone in sigmas)
_WINDOW_RULES = ((2, 3, 2, 2.0), (3, 5, 4, 1.0))
RUN_LENGTH = 8


@dataclass(frozen=True)
class RuleHit:
    index: int
    rule: int
    side: int  # +1 above the centre line, -1 below

    @property
    def text(self) -> str:
        return f"{RULE_TEXT[self.rule]} ({'above' if self.side > 0 else 'below'})"


def western_electric(values: Sequence[float], centre: float, sigma: float) -> tuple[RuleHit, ...]:
    """Every rule hit, ordered by index then rule."""
    if not (math.isfinite(sigma) and sigma > 0.0):
        raise ValueError(f"sigma must be a positive number, got {sigma!r}")
    z = [(v - centre) / sigma for v in values]
    if not all(math.isfinite(v) for v in z):
        raise ValueError("western_electric: every value must be a finite number")
    hits: list[RuleHit] = []
    run_side, run_length = 0, 0
    for i, zi in enumerate(z):
        side = (zi > 0) - (zi < 0)
        if abs(zi) > 3.0:
            hits.append(RuleHit(i, 1, side))
        for rule, window, needed, zone in _WINDOW_RULES:
            if side == 0 or abs(zi) <= zone or i + 1 < needed:
                continue
            recent = z[max(0, i - window + 1) : i + 1]
            if sum(1 for v in recent if v * side > zone) >= needed:
                hits.append(RuleHit(i, rule, side))
        run_length = run_length + 1 if side != 0 and side == run_side else (1 if side else 0)
        run_side = side
        if run_length >= RUN_LENGTH:
            hits.append(RuleHit(i, 4, side))
    return tuple(hits)
