"""Settings from the config's ``judgements:`` section, and the benchmark section."""

from __future__ import annotations

import json
from pathlib import Path

import cv2
import pytest

from stationcheck.benches.measuring import load_sections
from stationcheck.cli import main
from stationcheck.config import check_data
from stationcheck.config.judgement_settings import (
    BinActivitySettings,
    CameraShiftSettings,
    JudgementSettings,
    PresenceSettings,
)
from stationcheck.config.schema import StationConfig
from tests.judgements.conftest import DEMO_CONFIG, Render


def test_a_config_without_the_section_gets_the_defaults(demo_config: StationConfig) -> None:
    assert demo_config.judgements.to_settings() == JudgementSettings()


def test_the_section_reaches_the_judgements(tmp_path: Path) -> None:
    import yaml

    data = yaml.safe_load(DEMO_CONFIG.read_text())
    data["judgements"] = {"bin_activity": {"changed_fraction": 0.1},
                          "presence": {"search_px": 5},
                          "camera_shift": {"tolerance_px": 6.5, "confirm_checks": 3}}
    result = check_data(data, DEMO_CONFIG.parent)
    assert result.config is not None
    settings = result.config.judgements.to_settings()
    assert settings.bin_activity == BinActivitySettings(changed_fraction=0.1)
    assert settings.presence == PresenceSettings(search_px=5)
    assert settings.camera_shift == CameraShiftSettings(tolerance_px=6.5, confirm_checks=3)


@pytest.mark.parametrize(("make", "message"), [
    (lambda: BinActivitySettings(changed_fraction=1.2), "changed_fraction must be <= 1"),
    (lambda: BinActivitySettings(settle_ms=-1), "settle_ms must be >= 0"),
    (lambda: PresenceSettings(min_match=-0.1), "min_match must be >= 0"),
    (lambda: PresenceSettings(search_px=-1), "search_px must be >= 0"),
    (lambda: CameraShiftSettings(tolerance_px=0.1), "tolerance_px must be >= 0.5"),
    (lambda: CameraShiftSettings(confirm_checks=0), "confirm_checks must be >= 1"),
])
def test_settings_refuse_impossible_values(make: object, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        make()  # type: ignore[operator]


def test_bench_section_reports_each_judgement(render: Render, tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    assert "judgements" in load_sections()
    video = tmp_path / "clip.mp4"
    writer = cv2.VideoWriter(str(video), cv2.VideoWriter_fourcc(*"mp4v"), 30.0, (640, 480))
    for k in range(20):
        writer.write(render(seed=k))
    writer.release()
    assert main(["bench", "--section", "judgements", "--frames", "20", "--video", str(video),
                 "--json"]) == 0
    rows = {r["name"]: r for r in json.loads(capsys.readouterr().out)["rows"]}
    for name in ("camera_shift", "bin_activity", "presence", "picture_quality"):
        assert rows[f"{name} per frame"]["median"] >= 0.0
        assert rows[f"{name} amortised (mean per frame)"]["median"] >= 0.0
    total = rows["all judgements amortised per frame"]
    assert total["median"] > 0.0 and "2 ms" in total["target"]
    assert rows["camera_shift per check"]["extra"]["checks"] >= 4  # 20 frames, every 200 ms
