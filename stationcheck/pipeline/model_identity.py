"""Which model decides: every unit's ``unit_started`` event names the SHA-256 of the coarse
model file the detector runs (``model_sha256``), so the step log says which model decided each
unit (a retrained or swapped model shows as a new hash)."""

from __future__ import annotations

from dataclasses import replace

from stationcheck.config.model_proof import file_sha256
from stationcheck.core.plan import StationPlan
from stationcheck.pipeline.frame_path import model_file_of


def with_model_identity(plan: StationPlan, detector: object) -> StationPlan:
    path = model_file_of(detector)
    if path is None:
        return plan
    return replace(plan, model_sha256=file_sha256(path))
