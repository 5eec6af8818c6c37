"""Checking a station config: schema, geometry and references, all findings in one pass."""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from stationcheck.config.bounds import lint_bounds
from stationcheck.config.document import YamlDocument, read_yaml_file
from stationcheck.config.error_wording import plain_errors
from stationcheck.config.findings import CheckResult, Finding, sort_findings
from stationcheck.config.geometry_lint import lint_geometry
from stationcheck.config.model_proof import lint_model_proof
from stationcheck.config.parts import parts_of_data
from stationcheck.config.reference_lint import lint_references
from stationcheck.config.schema import StationConfig
from stationcheck.config.station_files import lint_files
from stationcheck.errors import ConfigError

logger = logging.getLogger(__name__)


def check_file(path: Path | str, shown_as: str | None = None) -> CheckResult:
    """Check the config file at ``path``.

    Raises:
        ConfigError: the file is missing, unreadable, not YAML, empty or not a mapping.
    """
    path = Path(path)
    name = shown_as or str(path)
    document = read_yaml_file(path, name)
    return check_document(document, base_dir=path.resolve().parent, source=name)


def check_data(data: dict[str, Any], base_dir: Path, source: str = "<config>") -> CheckResult:
    """Check a config held in memory (e.g. edited in a form); findings carry no lines."""
    return check_document(YamlDocument(data=data), base_dir=base_dir, source=source)


def check_document(document: YamlDocument, base_dir: Path, source: str) -> CheckResult:
    findings: list[Finding] = list(document.problems)
    config: StationConfig | None = None
    try:
        config = StationConfig.model_validate(document.data)
    except ValidationError as exc:
        findings += [
            Finding("error", plain.path, plain.message)
            for plain in plain_errors(StationConfig, exc.errors(include_url=False))
        ]
    findings += lint_bounds(document.data)
    parts = parts_of_data(document.data)
    findings += lint_geometry(parts)
    findings += lint_references(parts)
    findings += lint_files(document.data, parts, base_dir)
    if config is not None:
        findings += lint_model_proof(document.data, base_dir)
    located = [
        f
        if f.line is not None
        else Finding(f.severity, f.path, f.message, document.line_of(f.path))
        for f in findings
    ]
    ordered = tuple(sort_findings(located, document.position_of))
    has_errors = any(f.severity == "error" for f in ordered)
    usable = config.with_base_dir(base_dir) if config is not None and not has_errors else None
    return CheckResult(source=source, findings=ordered, config=usable, parts=parts)


def load_config(path: Path | str) -> StationConfig:
    """The validated config at ``path``; warnings are logged.

    Raises:
        ConfigError: the file cannot be read, or checking it found errors.
    """
    result = check_file(path)
    for finding in result.warnings:
        logger.warning("%s", finding.format(result.source))
    if result.config is None:
        first, count = result.errors[0], len(result.errors)
        where = f"{result.source}:{first.line}" if first.line is not None else result.source
        more = f" (and {count - 1} more error{'s' if count > 2 else ''})" if count > 1 else ""
        raise ConfigError(
            f"{where}: {first.path_text}: {first.message}{more}; "
            f"run 'stationcheck check {result.source}' to see every finding"
        )
    return result.config
