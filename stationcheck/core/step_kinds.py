"""The step kinds the sequencer knows, in one table: what the core needs of each kind.

Layers above the core keep their own tables keyed by the same kind name and never make the core
import them: the config's YAML sections (``config.schema.STEP_SECTIONS``), the operator screen's
wording (``web.operator.wording.STEP_WORDING``) and its panels
(``web.operator.screen_state.STEP_PANEL``), the setup screen's steps panel
(``web/static/setup/steps_panel.js``) and the demo's reference decisions
(``demo_station.decisions.STEP_DECISIONS``). ``tests/test_step_kind_checklist.py`` fails when a
kind here lacks an entry in any of them; ``docs/recipes.md`` lists the files to touch.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from stationcheck.core.outputs import GuidanceKind
from stationcheck.core.plan import CheckStep, ConfirmStep, FastenStep, PickStep, Step, ZoneKind

# what a rework pass does with a step of the kind: keep only the positions it was given, keep
# the step (a unit is never released unchecked), or leave it out (done on the first pass)
ReworkRule = Literal["given_positions", "keep", "leave_out"]


@dataclass(frozen=True)
class StepKind:
    name: str
    record: type[Step]  # the plan record (core.plan)
    zone_kind: ZoneKind | None  # the kind of zone the step's zone(s) must be; None: no zone
    on_rework: ReworkRule
    fastens: bool  # the step gives fastening targets; otherwise the tool is off while it lasts
    timed: bool  # completes in conditions.settle after any input (a timer), not only by a row
    guidance: tuple[GuidanceKind, ...]  # the guidance kinds the operator may get during it

    def __post_init__(self) -> None:
        if getattr(self.record, "kind", None) != self.name:
            raise ValueError(
                f"StepKind {self.name!r}: its record's kind is "
                f"{getattr(self.record, 'kind', None)!r}"
            )

    @property
    def waiting_reason(self) -> str:
        """The enable reason while a step of this kind holds the tool off (conditions)."""
        return f"{self.name}_step"


STEP_KINDS: dict[str, StepKind] = {
    kind.name: kind
    for kind in (
        StepKind(
            "fasten",
            FastenStep,
            "fastener",
            "given_positions",
            fastens=True,
            timed=False,
            guidance=("fasten", "rework", "wrong_position", "show_tool"),
        ),
        StepKind(
            "pick",
            PickStep,
            "bin",
            "leave_out",
            fastens=False,
            timed=True,
            guidance=("take_part", "wrong_bin"),
        ),
        StepKind(
            "check", CheckStep, "check", "keep", fastens=False, timed=False, guidance=("check",)
        ),
        StepKind(
            "confirm",
            ConfirmStep,
            None,
            "leave_out",
            fastens=False,
            timed=False,
            guidance=("acknowledge",),
        ),
    )
}
