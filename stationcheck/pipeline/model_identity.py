"""Which model decides: every unit's ``unit_started`` event names the SHA-256 of the coarse
model file the detector runs (``model_sha256``), so the step log says which model decided each
unit (a retrained or swapped model shows as a new hash)."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from stationcheck.config.model_proof import file_sha256
from stationcheck.core.plan import StationPlan


def model_file_of(detector: object) -> Path | None:
    """The coarse model file behind an ONNX detector; None for other detectors (ground truth,
    recorded answers)."""
    path = getattr(getattr(detector, "coarse", None), "path", None)
    return path if isinstance(path, Path) else None


def with_model_identity(plan: StationPlan, detector: object) -> StationPlan:
    path = model_file_of(detector)
    if path is None:
        return plan
    return replace(plan, model_sha256=file_sha256(path))
