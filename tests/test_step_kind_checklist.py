"""Every step kind in ``core.step_kinds.STEP_KINDS`` reaches every place a kind must reach.

A new kind that lacks any of them fails here with the list of what is missing (the recipe is
``docs/recipes.md``, "Adding a step kind"). The places, layer by layer:

- core: its plan record in the ``Step`` union, its phase in ``state.Phase`` and in the
  transition table's phases, its guidance kinds in ``outputs.GuidanceKind``;
- config: its YAML section in ``schema.STEP_SECTIONS`` and in the ``StepEntry`` union;
- station view: words for its waiting reason and a meaning for each of its guidance kinds;
- operator screen: its wording (``STEP_WORDING``), which must say something of its own, and its
  panel (``STEP_PANEL``);
- setup screen: its new-step defaults and its card in ``steps_panel.js``, with its zone kind;
- demo: its reference rule in ``demo_station.decisions.STEP_DECISIONS``;
- this test: an example step, so the wording is tried for real.
"""

from __future__ import annotations

import re
import typing
from pathlib import Path

from stationcheck.config import schema
from stationcheck.core import plan as core_plan
from stationcheck.core.observations import UnitStarted
from stationcheck.core.outputs import GUIDANCE_KINDS
from stationcheck.core.plan import StationPlan, Step, ZoneSpec
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.state import Phase
from stationcheck.core.step_kinds import STEP_KINDS, StepKind
from stationcheck.core.transitions import OPEN
from stationcheck.demo_station.decisions import STEP_DECISIONS
from stationcheck.overlay.station_view import GUIDANCE_MEANING, REASON_WORDS, StationViewBuilder
from stationcheck.web.operator.screen_state import STEP_PANEL
from stationcheck.web.operator.wording import STEP_WORDING, Wording

STEPS_PANEL_JS = (Path(__file__).resolve().parents[1] / "stationcheck" / "web" / "static"
                  / "setup" / "steps_panel.js")
ZONES = tuple(
    ZoneSpec(zone_id, kind, ((0.0, 0.0), (10.0, 0.0), (10.0, 10.0)), label)  # type: ignore[arg-type]
    for zone_id, kind, label in (("s1", "fastener", "screw 1"), ("bin_a", "bin", "gasket bin"),
                                 ("chk", "check", "locking pin"))
)
EXAMPLES: dict[str, Step] = {
    "fasten": core_plan.FastenStep("fasten", ("s1",)),
    "pick": core_plan.PickStep("take_gasket", "bin_a"),
    "check": core_plan.CheckStep("pin", "chk"),
    "confirm": core_plan.ConfirmStep("done", "Put the unit on the conveyor"),
}
WAITING = "Waiting for the next unit"


def _js_object_keys(source: str, opening: str) -> set[str]:
    """Top-level keys of the JavaScript object literal that starts right after ``opening``."""
    start = source.index(opening) + len(opening)
    depth, keys, token = 1, set(), ""
    for char in source[start:]:
        if char in "{([":
            depth += 1
        elif char in "})]":
            depth -= 1
            if depth == 0:
                break
        elif depth == 1:
            token += char
            if char == ":":
                found = re.search(r"([A-Za-z_]\w*)\s*:$", token)
                if found:
                    keys.add(found.group(1))
                token = ""
            elif char == ",":
                token = ""
    return keys


def _js_zone_kinds(source: str) -> dict[str, str]:
    body = re.search(r"const ZONE_KIND = \{([^}]*)\}", source)
    assert body is not None, "steps_panel.js has no ZONE_KIND table"
    return dict(re.findall(r'(\w+):\s*"(\w+)"', body.group(1)))


def _first_instruction(step: Step) -> tuple[str, str, str]:
    """(guidance kind, instruction kind, instruction text) just after a unit starts."""
    plan = StationPlan(zones=ZONES, steps=(step,))
    sequencer = Sequencer(plan)
    _, output, events = sequencer.step(sequencer.initial_state(), UnitStarted(t_s=1.0,
                                                                              serial="U-1"))
    builder = StationViewBuilder(plan)
    builder.fold(events)
    said = Wording(plan).instruction(builder.view(output, frame_index=0, t_s=1.0))
    return output.guidance.kind, said.kind, said.text


def missing_places(kind: StepKind) -> list[str]:
    name, missing = kind.name, []
    js = STEPS_PANEL_JS.read_text(encoding="utf-8")
    if kind.record not in typing.get_args(Step):
        missing.append("core/plan.py: its record in the Step union")
    if name not in typing.get_args(Phase) or name not in OPEN:
        missing.append("core/state.py Phase and core/transitions.py phases")
    missing += [f"core/outputs.py GuidanceKind: {g}" for g in kind.guidance
                if g not in GUIDANCE_KINDS]
    section = schema.STEP_SECTIONS.get(name)
    entries = typing.get_args(typing.get_args(schema.StepEntry)[0])
    if section is None or section not in entries:
        missing.append("config/schema.py: a YAML section in STEP_SECTIONS and StepEntry")
    if not kind.fastens and kind.waiting_reason not in REASON_WORDS:
        missing.append(f"overlay/station_view.py REASON_WORDS: {kind.waiting_reason}")
    missing += [f"overlay/station_view.py GUIDANCE_MEANING: {g}" for g in kind.guidance
                if g not in GUIDANCE_MEANING]
    if name not in STEP_WORDING:
        missing.append("web/operator/wording.py: STEP_WORDING")
    if name not in STEP_PANEL:
        missing.append("web/operator/screen_state.py: STEP_PANEL")
    if name not in _js_object_keys(js, "const NEW_STEP = {"):
        missing.append("web/static/setup/steps_panel.js: NEW_STEP")
    if name not in _js_object_keys(js, "const body = {"):
        missing.append("web/static/setup/steps_panel.js: its card in stepCard")
    if kind.zone_kind is not None and _js_zone_kinds(js).get(name) != kind.zone_kind:
        missing.append(f"web/static/setup/steps_panel.js: ZONE_KIND {name}: {kind.zone_kind}")
    if name not in STEP_DECISIONS:
        missing.append("demo_station/decisions.py: STEP_DECISIONS")
    example = EXAMPLES.get(name)
    if example is None:
        missing.append("tests/test_step_kind_checklist.py: an example step in EXAMPLES")
    elif name in STEP_WORDING:
        guidance, said_kind, text = _first_instruction(example)
        if said_kind != guidance or text.startswith(WAITING):
            missing.append(f"web/operator/wording.py: words of its own for {guidance!r} "
                           f"(said {said_kind!r}: {text!r})")
    return missing


def test_every_step_kind_reaches_every_layer() -> None:
    missing = {name: places for name, kind in STEP_KINDS.items()
               if (places := missing_places(kind))}
    assert missing == {}, "\n".join(f"step kind {name!r} lacks: " + "; ".join(places)
                                    for name, places in missing.items())


def test_no_layer_knows_a_kind_the_core_does_not() -> None:
    core = set(STEP_KINDS)
    js = STEPS_PANEL_JS.read_text(encoding="utf-8")
    assert set(schema.STEP_SECTIONS) == core
    assert set(STEP_WORDING) == core
    assert set(STEP_PANEL) == core
    assert set(STEP_DECISIONS) == core
    assert _js_object_keys(js, "const NEW_STEP = {") == core
    assert _js_object_keys(js, "const body = {") == core
    assert set(typing.get_args(Phase)) - {"idle"} == core
    assert {record.kind for record in typing.get_args(Step)} == core
    assert set(schema.STEP_ZONE_KIND) == {n for n, k in STEP_KINDS.items() if k.zone_kind}


def test_the_checklist_names_what_a_half_added_kind_lacks() -> None:
    half = StepKind("check", core_plan.CheckStep, "check", "keep", fastens=False, timed=False,
                    guidance=("check",))
    object.__setattr__(half, "name", "glue")  # a kind only the core table would know
    lacks = "\n".join(missing_places(half))
    for place in ("config/schema.py", "STEP_WORDING", "STEP_PANEL", "NEW_STEP", "stepCard",
                  "STEP_DECISIONS", "EXAMPLES", "core/state.py Phase", "glue_step"):
        assert place in lacks
