"""What the operator screen says: one short instruction per moment, alarms with what to do.

Instructions are built from the station plan (step kinds, zone labels and the number each
fastener position carries), not from the sequencer's longer guidance sentence: the screen's
big line must be readable from two metres, so it names the action and the place only, and
the detail (attempt, rework pass) goes on a smaller second line.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

from stationcheck.core.plan import CheckStep, ConfirmStep, StationPlan, Step
from stationcheck.overlay.scene import short_names
from stationcheck.overlay.station_view import (
    ALARM_WORDS,
    Meaning,
    StationView,
    StationViewBuilder,
    TighteningShown,
)

# code -> (what happened, what to do); conditions last while their cause lasts. Their meaning
# is the station view's (ALARM_WORDS), the same as on the annotated video.
CONDITION_WORDS: dict[str, tuple[str, str]] = {
    "camera_moved": ("Camera moved", "Call setup to put the camera back and check it."),
    "camera_unchecked": (
        "Picture too dark or too noisy to check the camera",
        "Check the light and the lens. The tool stays off.",
    ),
    "cannot_judge": (
        "Cannot judge the bins and checks: the picture is too poor",
        "Check the light, lens and picture settings. The tool stays off.",
    ),
    "detector_fault": ("Tool detection failed", "Call setup. The tool stays off."),
    "frame_stale": (
        "No fresh camera image",
        "Check the camera cable and light, then call maintenance.",
    ),
    "link_lost": ("PLC link lost", "Call maintenance. The tool stays off."),
    "tool_lost": ("Tool not seen", "Bring the tool back into view of the camera."),
    "wrong_position": ("Wrong position", "Move the tool to the marked position."),
    "wrong_bin": ("Wrong bin", "Put the part back; take it from the marked bin."),
    "image_frozen": (
        "Camera picture frozen",
        "Check the camera and its cable, then call maintenance.",
    ),
    "run_too_long": (
        "Tool ran too long",
        "Let go of the trigger. If the tool keeps running, call maintenance.",
    ),
}
# one-off alarms: shown for a while after they happened
EVENT_ALARMS: dict[str, tuple[Meaning, str, str]] = {
    "result_without_enable": (
        "fault",
        "Tightening result without enable",
        "It does not count. Call your team leader.",
    ),
    "ran_while_inhibited": (
        "fault",
        "The tool ran while it was off",
        "Call your team leader to check the tool.",
    ),
    "unit_interrupted": (
        "abnormal",
        "A new unit came before this one was finished",
        "The unfinished unit goes to rework.",
    ),
    "rework_nothing_to_do": (
        "abnormal",
        "Rework asked, but nothing is left to do",
        "Check the serial with your team leader.",
    ),
    "run_without_result": (
        "abnormal",
        "The tool ran but sent no result",
        "Fasten the position again.",
    ),
    "result_outside_limits": (
        "abnormal",
        "OK result outside the torque or angle limits",
        "Tell quality if it happens again.",
    ),
    "check_failed": (
        "fault",
        "Check acknowledged without passing",
        "The unit is not released; it goes to rework.",
    ),
    "tip_left_during_run": (
        "fault",
        "The tool left the position while running",
        "Check that fastener; fasten it again if asked.",
    ),
    "result_of_cut_run": (
        "abnormal",
        "Result of a tightening that was cut off",
        "Check that fastener; fasten it again if asked.",
    ),
}
# what a check zone was last judged, in the screen's words
CHECK_SEEN = {
    "present": "in place",
    "absent": "not there",
    "undecided": "not clear yet: keep it in view",
}
# A NOK with an attempt left is abnormal (IEC 60073 yellow: the operator puts it right here);
# a position left for rework is a fault (red: the unit will not be released as it is).
NOK_RETRY_MEANING: Meaning = "abnormal"
NOK_LEFT_MEANING: Meaning = "fault"
NOK_SHOWN_S = 5.0  # a NOK left for rework before another kind of step: headline this long
ENGAGE_NOUNS = ("pin", "latch", "clamp", "lock", "lever", "bolt")
_BIN_LABEL = re.compile(r"^(?P<part>.+?)\s+bin(?:\s*\((?P<where>[^)]+)\))?$", re.IGNORECASE)


@dataclass(frozen=True)
class Instruction:
    """The big line (``text``), a smaller line under it (``detail``) and its meaning."""

    kind: str
    text: str
    detail: str
    meaning: Meaning

    def __post_init__(self) -> None:
        if not self.text:
            raise ValueError("Instruction.text must not be empty")


def _article(noun: str) -> str:
    return "an" if noun[:1].lower() in "aeiou" else "a"


class Wording:
    """Instructions for one station plan."""

    def __init__(self, plan: StationPlan) -> None:
        self.plan = plan
        self.position_names = short_names(plan, StationViewBuilder(plan).position_order())
        self.steps: dict[str, Step] = {step.id: step for step in plan.steps}

    def label(self, zone_id: str | None) -> str:
        if zone_id is None:
            return ""
        try:
            return self.plan.zone(zone_id).label or zone_id.replace("_", " ")
        except KeyError:
            return zone_id.replace("_", " ")

    def position(self, zone_id: str) -> str:
        """``"position 4"`` for a fastener zone (the number the station marks it with)."""
        return f"position {self.position_names.get(zone_id, zone_id)}"

    def take_from(self, bin_id: str, step_id: str | None) -> str:
        """``"Take a gasket from the left bin"`` from the label ``"gasket bin (left)"``."""
        label = self.label(bin_id)
        found = _BIN_LABEL.match(label)
        if found is not None:
            part = found["part"].strip()
            where = found["where"]
            place = f"the {where.strip()} bin" if where else f"the {part} bin"
            return f"Take {_article(part)} {part} from {place}"
        if step_id is not None and step_id.startswith(("take_", "pick_")):
            part = step_id.split("_", 1)[1].replace("_", " ")
            return f"Take {_article(part)} {part} from the {label}"
        return f"Take the part from the {label}"

    def check_action(self, step: CheckStep) -> str:
        label = self.label(step.zone)
        noun = label.split()[-1].lower() if label else ""
        if step.expect == "absent":
            return f"Remove the {label}"
        if noun in ENGAGE_NOUNS:
            # "fixture locking pin" -> "Engage the locking pin": the fixture is where it is
            words = label.split()
            shown = " ".join(words[1:]) if len(words) > 2 else label
            return f"Engage the {shown}"
        return f"Put the {label} in place"

    def instruction(self, view: StationView, mode: str = "live") -> Instruction:
        """What to do now. After the last position of a fasten step is left for rework, the
        next step's instruction waits ``NOK_SHOWN_S`` behind the NOK, named in the detail."""
        said = self._instruction(view, mode)
        last = view.last_tightening
        if (
            said.kind in ("take_part", "check", "acknowledge")
            and last is not None
            and not last.ok
            and last.zone in view.failed_zones
            and 0.0 <= view.t_s - last.t_s <= NOK_SHOWN_S
        ):
            return Instruction(
                "nok_left",
                f"NOK at {self.position(last.zone)}: left for rework",
                f"{_sentence(nok_reason(last))} · next: {said.text}",
                NOK_LEFT_MEANING,
            )
        return said

    def _instruction(self, view: StationView, mode: str) -> Instruction:
        out = view.output
        kind = out.guidance.kind
        step = self.steps.get(out.step_id or "")
        words = STEP_WORDING.get(step.kind) if step is not None else None
        said = words(self, view, step, mode) if words is not None and step is not None else None
        if said is not None:
            return said
        target = out.target.zone if out.target is not None else out.guidance.target
        if kind == "show_tool":
            where = f" at {self.position(target)}" if target else ""
            return Instruction(
                kind,
                "Bring the tool back into view",
                f"Then continue{where}.",
                view.guidance_meaning,
            )
        if kind == "inhibited":
            return Instruction(
                kind, "Tool off: station fault", self._fault_words(view), view.guidance_meaning
            )
        if kind == "unit_finished":
            return self._finished(view)
        return Instruction(
            kind, "Waiting for the next unit", "Load a unit to start.", view.guidance_meaning
        )

    def fasten_words(self, view: StationView, step: Step, mode: str) -> Instruction | None:
        out = view.output
        kind, meaning = out.guidance.kind, view.guidance_meaning
        target = out.target.zone if out.target is not None else out.guidance.target
        attempt = self._attempt_words(view)
        if kind in ("fasten", "rework") and target is not None:
            nok = self._after_nok(view, target, attempt)
            if nok is not None:
                return nok
            verb = "Rework" if kind == "rework" else "Fasten"
            detail = f"{self.label(target)} · {attempt}" if attempt else self.label(target)
            if kind == "rework":
                detail = f"Rework pass · {detail}"
            return Instruction(kind, f"{verb} {self.position(target)}", detail, meaning)
        if kind == "wrong_position" and target is not None:
            here = self.position(view.wrong_zone) if view.wrong_zone else "another position"
            return Instruction(
                kind,
                f"Wrong position: go to {self.position(target)}",
                f"The tool is at {here}.",
                meaning,
            )
        return None

    def pick_words(self, view: StationView, step: Step, mode: str) -> Instruction | None:
        out = view.output
        kind, meaning = out.guidance.kind, view.guidance_meaning
        if kind not in ("take_part", "wrong_bin") or out.guidance.target is None:
            return None
        text = self.take_from(out.guidance.target, out.step_id)
        if kind == "wrong_bin":
            return Instruction(
                kind,
                f"Wrong bin. {text}",
                f"Activity seen at the {self.label(view.wrong_bin)}.",
                meaning,
            )
        return Instruction(kind, text, f"Step {out.step_number} of {out.step_count}", meaning)

    def check_words(self, view: StationView, step: Step, mode: str) -> Instruction | None:
        if view.output.guidance.kind != "check" or not isinstance(step, CheckStep):
            return None
        seen = CHECK_SEEN.get(view.check_verdict or "", "not judged yet")
        return Instruction(
            "check",
            self.check_action(step),
            f"{self.label(step.zone)}: {seen}",
            view.guidance_meaning,
        )

    def confirm_words(self, view: StationView, step: Step, mode: str) -> Instruction | None:
        if view.output.guidance.kind != "acknowledge" or not isinstance(step, ConfirmStep):
            return None
        how = (
            "Then press ACKNOWLEDGE."
            if mode == "live"
            else "Replay: the acknowledge comes from the recording."
        )
        return Instruction("acknowledge", step.prompt.rstrip("."), how, view.guidance_meaning)

    def _after_nok(self, view: StationView, target: str, attempt: str) -> Instruction | None:
        """The headline while the unit's newest tightening is a NOK: what failed and what to
        do now (fasten it again, or go on and leave it for rework)."""
        last = view.last_tightening
        if last is None or last.ok:
            return None
        where = self.position(last.zone)
        why = _sentence(nok_reason(last))
        if target == last.zone:
            detail = f"{why} · {attempt}" if attempt else why
            return Instruction(
                "nok_retry", f"NOK at {where}: fasten it again", detail, NOK_RETRY_MEANING
            )
        return Instruction(
            "nok_left",
            f"NOK at {where}: go on to {self.position(target)}",
            f"{why} · {where} is left for rework",
            NOK_LEFT_MEANING,
        )

    def _attempt_words(self, view: StationView) -> str:
        out = view.output
        step = self.steps.get(out.step_id or "")
        limit = getattr(step, "max_attempts", None)
        if not out.attempt:
            return ""
        if limit is None:
            return f"attempt {out.attempt}"
        return f"attempt {out.attempt} of {limit}"

    def _fault_words(self, view: StationView) -> str:
        for code in view.output.alarms:
            meaning, words, todo = condition_alarm(code)
            if meaning == "fault" and code in CONDITION_WORDS:
                return f"{words}. {todo}"
        return view.enable_reason_words

    def _finished(self, view: StationView) -> Instruction:
        unit = view.last_unit
        meaning = view.guidance_meaning
        if unit is None:
            return Instruction("unit_finished", "Waiting for the next unit", "", meaning)
        if unit.released:
            return Instruction(
                "unit_finished",
                f"Unit {unit.serial} OK",
                "Released. Waiting for the next unit.",
                meaning,
            )
        if unit.result != "NOK":  # aborted, or replaced by the next unit before it ended
            return Instruction(
                "unit_finished",
                f"Unit {unit.serial} {unit.result}",
                view.output.guidance.words,
                meaning,
            )
        if unit.failed_zones:
            places = ", ".join(self.position(z) for z in unit.failed_zones)
            return Instruction(
                "unit_finished",
                f"Unit {unit.serial} NOK: to rework",
                f"Not released. Rework needed at {places}.",
                meaning,
            )
        said = view.output.guidance.words
        prefix = f"Unit {unit.serial} not released: "
        why = said.removeprefix(prefix)
        return Instruction(
            "unit_finished", f"Unit {unit.serial} NOK: to rework", f"Not released: {why}", meaning
        )


# step kind (core.step_kinds.STEP_KINDS) -> the instruction while a step of that kind is current
# (None: the guidance is not the step's own, e.g. a station fault; the general words apply)
StepWords = Callable[[Wording, StationView, Step, str], Instruction | None]
STEP_WORDING: dict[str, StepWords] = {
    "fasten": Wording.fasten_words,
    "pick": Wording.pick_words,
    "check": Wording.check_words,
    "confirm": Wording.confirm_words,
}


def _limit_words(
    name: str,
    value: float | None,
    limits: tuple[float | None, float | None],
    unit: str,
    digits: int,
) -> str | None:
    low, high = limits
    if value is None:
        return None
    if low is not None and value < low:
        return f"{name} {value:.{digits}f}{unit} below its limit {low:.{digits}f}{unit}"
    if high is not None and value > high:
        return f"{name} {value:.{digits}f}{unit} above its limit {high:.{digits}f}{unit}"
    return None


def nok_reason(result: TighteningShown) -> str:
    """Why a tightening is NOK, from its values and the step's limits; the controller's word
    when the values are inside them (the controller's verdict stays authoritative)."""
    found = [
        words
        for words in (
            _limit_words("torque", result.torque_nm, result.torque_limits_nm, " Nm", 2),
            _limit_words("angle", result.angle_deg, result.angle_limits_deg, "°", 1),
        )
        if words
    ]
    return ", ".join(found) if found else "the tightening controller reported NOK"


def _sentence(words: str) -> str:
    return words[:1].upper() + words[1:]


def _plain(code: str) -> str:
    return code.replace("_", " ").capitalize()


def condition_alarm(code: str) -> tuple[Meaning, str, str]:
    """Meaning, words and what to do for a condition alarm code (any code gets words)."""
    meaning, words = ALARM_WORDS.get(code, ("abnormal", _plain(code)))
    words, todo = CONDITION_WORDS.get(code, (words, ""))
    return meaning, words, todo


def event_alarm(code: str) -> tuple[Meaning, str, str]:
    """Meaning, words and what to do for a one-off alarm code (any code gets words)."""
    return EVENT_ALARMS.get(code, ("abnormal", _plain(code), ""))
