"""What checking a station config found: located errors and warnings.

An error means the station cannot run with this file; a warning means it can, but something
is probably not what the engineer meant.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

from stationcheck.config.error_wording import Location, format_path

if TYPE_CHECKING:
    from stationcheck.config.parts import ConfigParts
    from stationcheck.config.schema import StationConfig

Severity = Literal["error", "warning"]


@dataclass(frozen=True)
class Finding:
    severity: Severity
    path: Location
    message: str
    line: int | None = None  # 1-based line in the YAML file, when known

    def __post_init__(self) -> None:
        if self.severity not in ("error", "warning"):
            raise ValueError(f"severity must be 'error' or 'warning', got {self.severity!r}")
        if not self.message:
            raise ValueError("a finding needs a message")

    @property
    def path_text(self) -> str:
        return format_path(self.path) or "(top level)"

    def format(self, source: str) -> str:
        """``file:line: severity: path: message`` (``file: ...`` when the line is unknown)."""
        where = f"{source}:{self.line}" if self.line is not None else source
        return f"{where}: {self.severity}: {self.path_text}: {self.message}"

    def to_json(self) -> dict[str, Any]:
        return {
            "severity": self.severity,
            "path": self.path_text,
            "line": self.line,
            "message": self.message,
        }


def error(path: Location, message: str) -> Finding:
    return Finding("error", path, message)


def warning(path: Location, message: str) -> Finding:
    return Finding("warning", path, message)


def sort_findings(
    findings: Iterable[Finding], position_of: Callable[[Location], int] | None = None
) -> list[Finding]:
    """In file order: by line, then by where the path comes in the data, then as made."""
    indexed = list(enumerate(findings))
    indexed.sort(
        key=lambda item: (
            item[1].line is None,
            item[1].line or 0,
            position_of(item[1].path) if position_of is not None else 0,
            item[0],
        )
    )
    return [finding for _, finding in indexed]


@dataclass(frozen=True)
class CheckResult:
    """All findings for one config, and the validated config when there are no errors."""

    source: str
    findings: tuple[Finding, ...]
    config: StationConfig | None = field(default=None, compare=False)
    parts: ConfigParts | None = field(default=None, compare=False)  # zones and steps as read

    @property
    def errors(self) -> list[Finding]:
        return [f for f in self.findings if f.severity == "error"]

    @property
    def warnings(self) -> list[Finding]:
        return [f for f in self.findings if f.severity == "warning"]

    @property
    def ok(self) -> bool:
        return not self.errors

    def lines(self) -> list[str]:
        return [finding.format(self.source) for finding in self.findings]

    def summary(self) -> str:
        if not self.findings:
            detail = ""
            if self.config is not None:
                plan = self.config.to_plan()
                detail = f" ({_count(len(plan.zones), 'zone')}, {_count(len(plan.steps), 'step')})"
            return f"{self.source}: OK, no errors or warnings{detail}"
        counts = f"{_count(len(self.errors), 'error')}, {_count(len(self.warnings), 'warning')}"
        verdict = "OK with warnings" if self.ok else "NOT usable"
        return f"{self.source}: {verdict}: {counts}"

    def to_json(self) -> dict[str, Any]:
        return {
            "file": self.source,
            "ok": self.ok,
            "errors": len(self.errors),
            "warnings": len(self.warnings),
            "findings": [finding.to_json() for finding in self.findings],
        }


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}{'' if n == 1 else 's'}"
