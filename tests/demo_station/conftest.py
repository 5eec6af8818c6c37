"""Factories for the demo station tests: one planned sample video (no pixels) per session."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from stationcheck.config import load_config
from stationcheck.core.plan import StationPlan
from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.rig import OperatorRig

SAMPLE_DIR = sv.REPO_ROOT / "sample_video"


@pytest.fixture(scope="session")
def demo_plan() -> StationPlan:
    return load_config(sv.DEFAULT_CONFIG).to_plan()


@pytest.fixture(scope="session")
def demo_rig() -> OperatorRig:
    return OperatorRig()


@pytest.fixture(scope="session")
def production(demo_rig: OperatorRig) -> sv.Production:
    """The sample video's plan, ground truth and expected decisions from the committed script."""
    return sv.produce(rig=demo_rig)


@pytest.fixture(scope="session")
def renderer(production: sv.Production) -> sv.FrameRenderer:
    return sv.FrameRenderer(production)


@pytest.fixture(scope="session")
def sample_dir() -> Path:
    return SAMPLE_DIR


@pytest.fixture(scope="session")
def read_jsonl() -> Callable[[Path], list[dict[str, Any]]]:
    return _read_jsonl


@pytest.fixture(scope="session")
def script_doc() -> Callable[..., dict[str, Any]]:
    return _script_doc


def _read_jsonl(path: Path) -> list[dict[str, Any]]:
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line]


def _script_doc(**unit: Any) -> dict[str, Any]:
    """A one-unit scene script document with a clean fastening, overridable per key."""
    base: dict[str, Any] = {
        "serial": "PC-000900",
        "picks": ["bin_gasket", "bin_cover"],
        "fasten": [
            {"tighten": z, "ok": True, "torque_nm": 5.0, "angle_deg": 30.0}
            for z in ("screw_1", "screw_4", "screw_2", "screw_5", "screw_3", "screw_6")
        ],
        "pin": "push",
    }
    base.update(unit)
    return {"format_version": 1, "seed": 3, "units": [base]}
