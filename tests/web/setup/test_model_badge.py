"""The setup page's model badge: whether the station's model is proven on the station."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from stationcheck.config import yaml_text
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.web.setup.checking import check_for_page


def _data(demo: bool) -> dict[str, object]:
    data = yaml_text.load_plain(DEMO_CONFIG.read_text(encoding="utf-8"), str(DEMO_CONFIG))
    data["station"]["demo_data"] = demo
    return dict(data)


def test_demo_station_shows_the_demo_model() -> None:
    page = check_for_page(_data(True), DEMO_CONFIG.parent, "demo")
    assert page["model"]["state"] == "demo"


def test_a_real_station_with_the_bundled_model_is_unproven(tmp_path: Path) -> None:
    shutil.copytree(DEMO_CONFIG.parent / "demo_station", tmp_path / "demo_station")
    page = check_for_page(_data(False), tmp_path, "station.yaml")
    assert page["model"]["state"] == "unproven"
    assert "UNPROVEN MODEL" in page["model"]["message"]
    assert "fitness" not in page["model"]


def test_a_fitness_report_for_another_file_does_not_prove_the_model(tmp_path: Path) -> None:
    shutil.copytree(DEMO_CONFIG.parent / "demo_station", tmp_path / "demo_station")
    (tmp_path / "model").mkdir()
    report = {"model_sha256": "0" * 64, "fit": True, "tip_p95_px": 2.0}
    (tmp_path / "model" / "fitness.json").write_text(json.dumps(report), encoding="utf-8")
    page = check_for_page(_data(False), tmp_path, "station.yaml")
    assert page["model"]["state"] == "unproven" and "another model file" in page["model"]["message"]
