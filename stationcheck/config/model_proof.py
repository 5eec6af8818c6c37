"""Whether a station's model has been proven on the station: its fitness report
(``<station folder>/model/fitness.json``) names the model file's SHA-256 and a verdict.

A report counts only for the exact files it measured: retrain, copy in another model or edit
the file, and the station's model is unproven again until ``stationcheck eval --station`` (or
``train --station``, which ends with it) measures it. ``check``, the setup screen and ``run``
read :func:`model_proof` and warn when the model is unproven or unfit.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from stationcheck.config.findings import Finding, warning
from stationcheck.config.schema import BUNDLED_MODEL, resolve_path

if TYPE_CHECKING:
    from stationcheck.config.schema import StationConfig

FITNESS_NAME = "fitness.json"
MODEL_DIR = "model"
BUNDLED_COARSE_NAME = "tool_tip.coarse.onnx"  # in the stationcheck.models package

ProofState = Literal["fit", "unfit", "unproven", "demo"]


def file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def fitness_path(station_dir: Path) -> Path:
    return station_dir / MODEL_DIR / FITNESS_NAME


@dataclass(frozen=True)
class ModelProof:
    state: ProofState
    message: str  # one line for people
    model_sha256: str = ""
    report: dict[str, Any] | None = None  # the matching fitness report, if any

    @property
    def warns(self) -> bool:
        return self.state in ("unfit", "unproven")


def model_proof(model_file: Path, station_dir: Path, demo_bundled: bool = False) -> ModelProof:
    """The proof state of ``model_file`` (the coarse model the station runs) at the station.

    ``demo_bundled``: the bundled demo model at a demo-data station, which counts as proven by
    the sample video's figures (``stationcheck eval``); everywhere else a fitness report must
    match the file.
    """
    try:
        sha = file_sha256(model_file)
    except OSError as exc:
        return ModelProof("unproven", f"model file {model_file} cannot be read ({exc})")
    report_path = fitness_path(station_dir)
    report = _read(report_path)
    if (
        report is None
        or report.get("model_sha256") != sha
        or not _refine_matches(report, model_file)
    ):
        if demo_bundled:
            return ModelProof("demo", "bundled demo model on the demo station", sha)
        why = (
            "no fitness report"
            if report is None
            else "the fitness report was made for another model file"
        )
        return ModelProof(
            "unproven",
            f"UNPROVEN MODEL: {why} ({report_path}); the model has not been measured on this "
            "station's held-out frames: run 'stationcheck eval --station CONFIG' before going live",
            sha,
        )
    if report.get("fit") is True:
        return ModelProof(
            "fit", "model fit for this station (" + _figures(report) + ")", sha, report
        )
    reasons = "; ".join(str(r) for r in report.get("reasons", [])) or "see the fitness report"
    return ModelProof(
        "unfit", f"MODEL NOT FIT for this station: {reasons} ({report_path})", sha, report
    )


def _figures(report: dict[str, Any]) -> str:
    def number(key: str, fmt: str) -> str:
        value = report.get(key)
        return format(value, fmt) if isinstance(value, int | float) else "-"

    return (
        f"tip p95 {number('tip_p95_px', '.2f')} px, misses {number('miss_rate', '.1%')}, "
        f"false detections {number('false_detection_rate', '.1%')}"
    )


def _refine_matches(report: dict[str, Any], model_file: Path) -> bool:
    name, expected = report.get("refine_model"), report.get("refine_sha256")
    if not name or not expected:
        return True
    try:
        return file_sha256(model_file.parent / str(name)) == str(expected)
    except OSError:
        return False


def _read(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def station_model_file(config: StationConfig) -> Path:
    """The coarse model file the station runs: the config's, or the bundled one."""
    path = config.model_path
    if path is not None:
        return path
    return Path(str(resources.files("stationcheck.models").joinpath(BUNDLED_COARSE_NAME)))


def station_model_proof(config: StationConfig) -> ModelProof:
    """:func:`model_proof` for the model a loaded station config names."""
    return model_proof(
        station_model_file(config),
        config.resolve("."),
        demo_bundled=config.model_path is None and config.station.demo_data,
    )


def proof_of_data(data: dict[str, Any], base_dir: Path) -> ModelProof | None:
    """:func:`model_proof` for a config held as plain data (the setup page's); None when the
    model file it names is not there (``station_files`` reports that)."""
    model = data.get("model")
    station = data.get("station")
    written = model.get("path", BUNDLED_MODEL) if isinstance(model, dict) else BUNDLED_MODEL
    if not isinstance(written, str):
        return None
    bundled = written == BUNDLED_MODEL
    if bundled:
        path = Path(str(resources.files("stationcheck.models").joinpath(BUNDLED_COARSE_NAME)))
    else:
        path = resolve_path(base_dir, written)
        if not path.is_file():
            return None
    demo = isinstance(station, dict) and station.get("demo_data") is True
    return model_proof(path, base_dir, demo_bundled=bundled and demo)


def lint_model_proof(data: dict[str, Any], base_dir: Path) -> list[Finding]:
    """A warning at ``model.path`` when the station's own model file is unproven or unfit,
    or when the bundled model was measured on this station and found unfit. (The bundled model
    at a station that never measured it is said by ``check``, ``run`` and the setup screen's
    model badge through :func:`station_model_proof`, not as a config finding.)"""
    proof = proof_of_data(data, base_dir)
    if proof is None or not proof.warns:
        return []
    model = data.get("model")
    bundled = not isinstance(model, dict) or model.get("path", BUNDLED_MODEL) == BUNDLED_MODEL
    if bundled and proof.report is None:
        return []
    return [warning(("model", "path"), proof.message)]
