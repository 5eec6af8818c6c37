"""Evidence images: one zone crop per tightening result, only when the config asks for it, a
failed write costing neither the event nor the run, old images removed by retention."""

from __future__ import annotations

import logging
from dataclasses import replace
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.config import load_config
from stationcheck.core import event_kinds as ev
from stationcheck.core.plan import StationPlan
from stationcheck.core.records import Frame
from stationcheck.pipeline.evidence import (
    DEFAULT_MARGIN_PX,
    EvidenceWriter,
    crop_box,
    prune_evidence,
    safe_name,
)
from stationcheck.store import SqliteStepLog
from stationcheck.store.retention import SECONDS_PER_DAY
from tests.event_examples import tightening, unit_started
from tests.pipeline.conftest import (
    CONFIG,
    FIRST_UNIT_FRAMES,
    Replay,
    demo_config_copy,
    needs_sample,
)

SQUARE = ((10.0, 20.0), (40.0, 20.0), (40.0, 50.0), (10.0, 50.0))


@pytest.mark.parametrize(
    ("polygon", "margin_px", "size", "expected"),
    [
        (SQUARE, 12, (200, 100), (0, 8, 52, 62)),  # left edge clipped at 0
        (SQUARE, 0, (200, 100), (10, 20, 40, 50)),
        (((190.5, 90.2), (199.0, 99.0), (185.0, 95.0)), 5, (200, 100), (180, 85, 200, 100)),
        (SQUARE, -1, (200, 100), ValueError),  # a negative margin is a mistake
        (((300.0, 300.0), (310.0, 310.0), (300.0, 310.0)), 2, (200, 100), ValueError),  # outside
    ],
)
def test_crop_box_is_the_zone_box_plus_margin_clipped_to_the_frame(
        polygon: tuple[tuple[float, float], ...], margin_px: int, size: tuple[int, int],
        expected: object) -> None:
    if expected is ValueError:
        with pytest.raises(ValueError):
            crop_box(polygon, margin_px, *size)
    else:
        assert crop_box(polygon, margin_px, *size) == expected


@pytest.mark.parametrize(
    ("text", "expected"),
    [("PC-000101", "PC-000101"), ("../../etc/passwd", "etc_passwd"), ("a b/c\\d", "a_b_c_d"),
     ("..", "x"), ("screw_1", "screw_1")],
)
def test_safe_name_keeps_names_inside_the_folder(text: str, expected: str) -> None:
    assert safe_name(text) == expected


def _fasten_rows(log_path: Path) -> list[tuple[str, str | None]]:
    log = SqliteStepLog(log_path, readonly=True)
    try:
        rows = []
        for unit in log.units().rows:
            rows += [(row.kind, row.evidence_path) for row in log.steps(unit.serial)]
        results = [s for s in log.events() if s.event.kind == "tightening_result"]
    finally:
        log.close()
    fasten = [row for row in rows if row[0] == "fasten"]
    assert len(fasten) == len(results)
    return fasten


@needs_sample
def test_replay_with_evidence_writes_one_zone_crop_per_tightening_result(
        replay: Replay, tmp_path: Path) -> None:
    config_dir, out = tmp_path / "config", tmp_path / "out"
    config_dir.mkdir()
    out.mkdir()
    config_path = demo_config_copy(config_dir, evidence_images=True)
    config = load_config(config_path)
    replay(config_path=config_path, log_path=out / "log.sqlite", max_frames=FIRST_UNIT_FRAMES)

    fasten = _fasten_rows(out / "log.sqlite")
    assert len(fasten) >= 3  # the clean unit tightens several positions
    files = sorted((out / "evidence").iterdir())
    assert len(files) == len(fasten)
    assert sorted(out / str(path) for _, path in fasten) == files
    zones = {zone.id: zone.polygon_px for zone in config.to_plan().zones}
    width, height = config.camera.width_px, config.camera.height_px
    for path in files:
        assert path.suffix == ".png" and path.name.startswith("PC-000101_pass1_")
        zone = path.stem.split("_pass1_", 1)[1].rsplit("_attempt", 1)[0]
        image = cv2.imread(str(path))
        assert image is not None
        x0, y0, x1, y1 = crop_box(zones[zone], DEFAULT_MARGIN_PX, width, height)
        assert image.shape[:2] == (y1 - y0, x1 - x0)
        assert image.shape[:2] != (height, width)  # never the whole frame


@needs_sample
def test_evidence_is_off_by_default(replay: Replay, tmp_path: Path) -> None:
    assert load_config(CONFIG).log.evidence_images is False
    out = tmp_path / "out"
    out.mkdir()
    replay(log_path=out / "log.sqlite", max_frames=FIRST_UNIT_FRAMES)
    fasten = _fasten_rows(out / "log.sqlite")
    assert fasten and all(path is None for _, path in fasten)
    assert not (out / "evidence").exists()
    assert all(p.name.startswith("log.sqlite") for p in out.iterdir())  # with its WAL files
    assert not list(tmp_path.rglob("*.png"))


def _plan() -> StationPlan:
    return load_config(CONFIG).to_plan()


def _result(serial: str, zone: str, attempt: int = 1) -> ev.TighteningResult:
    return tightening(1.0, serial, zone=zone, attempt=attempt)


def test_failed_write_keeps_the_event_without_a_path(
        tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    plan = _plan()
    (tmp_path / "evidence").write_text("a file where the folder should be")
    writer = EvidenceWriter(plan, tmp_path)
    writer.see(Frame(0, 0.0, np.zeros((480, 640, 3), np.uint8)))
    event = _result("PC-1", plan.zones[0].id)
    with caplog.at_level(logging.WARNING, logger="stationcheck.pipeline.evidence"):
        out = writer.attach([event])
    assert out == (event,)
    assert writer.failures == 1 and writer.images_written == 0
    assert any("not written" in r.getMessage() for r in caplog.records)


def test_writer_counts_passes_and_leaves_other_events_alone(tmp_path: Path) -> None:
    plan = _plan()
    zone = plan.zones[0].id
    writer = EvidenceWriter(plan, tmp_path)
    writer.see(Frame(0, 0.0, np.full((480, 640, 3), 7, np.uint8)))
    started = unit_started(0.0, "PC 1", rework=True)
    out = writer.attach([started, started, _result("PC 1", zone, attempt=2)])
    assert out[:2] == (started, started)
    result = out[2]
    assert isinstance(result, ev.TighteningResult) and result.evidence_path is not None
    assert result.evidence_path == f"evidence/PC_1_pass2_{zone}_attempt2.png"
    assert (tmp_path / result.evidence_path).is_file()


def test_retention_removes_old_evidence_and_keeps_new(tmp_path: Path) -> None:
    now_s = 1_800_000_000.0
    (tmp_path / "evidence").mkdir()
    old, new = tmp_path / "evidence" / "old.png", tmp_path / "evidence" / "new.png"
    old.write_bytes(b"png")
    new.write_bytes(b"png")
    log = SqliteStepLog(tmp_path / "log.sqlite")
    try:
        for serial, path, age_days in (("A", old, 91), ("B", new, 89)):
            event = _result(serial, "z")
            event = replace(event, evidence_path=f"evidence/{path.name}")
            log.append([event], recorded_at_s=now_s - age_days * SECONDS_PER_DAY)
        report = prune_evidence(log, 90, now_s=now_s)
    finally:
        log.close()
    assert report.evidence_files_removed == 1
    assert not old.exists() and new.exists()
