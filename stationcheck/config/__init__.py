"""The station config: a versioned YAML file validated with pydantic and linted for geometry.

``check_file`` reports every problem with its place in the file; ``load_config`` returns a
usable :class:`StationConfig` (``to_plan()`` gives the core's records) or raises
:class:`~stationcheck.errors.ConfigError`.
"""

from __future__ import annotations

from stationcheck.config.config_check import check_data, check_file, load_config
from stationcheck.config.findings import CheckResult, Finding, Severity
from stationcheck.config.schema import FORMAT_VERSION, StationConfig

__all__ = [
    "FORMAT_VERSION",
    "CheckResult",
    "Finding",
    "Severity",
    "StationConfig",
    "check_data",
    "check_file",
    "load_config",
]
