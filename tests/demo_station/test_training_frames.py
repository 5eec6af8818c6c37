"""Training frames: shapes and labels, determinism, and a COCO keypoint file that the
reference COCO API (pycocotools) loads and scores."""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pytest
from pycocotools.coco import COCO
from pycocotools.cocoeval import COCOeval

from stationcheck.demo_station import layout
from stationcheck.demo_station import training as demo_training
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.demo_station.training import (
    render_own_station_sample,
    render_sample,
    render_station_sample,
    render_training_sample,
    write_coco_dataset,
)
from stationcheck.errors import InputFileError
from stationcheck.training.sources import DEMO_MIXES, demo_sample_functions

W, H = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX


@pytest.mark.parametrize(
    "render", [render_training_sample, render_station_sample, render_own_station_sample]
)
def test_samples_have_the_promised_shape(render) -> None:  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(11)
    seen = set()
    for _ in range(12):
        image, kps = render(rng)
        assert image.shape == (H, W, 3) and image.dtype == np.uint8
        assert kps.shape == (2, 3)
        for x, y, v in kps:
            seen.add(int(v))
            assert v in (0.0, 1.0, 2.0)
            if v == 0:
                assert x == 0 and y == 0
            else:
                assert 0 <= x <= W - 1 and 0 <= y <= H - 1
    assert 2 in seen


@pytest.mark.parametrize("station_fraction", [0.0, 1.0])
def test_visible_keypoints_lie_on_the_visible_tool(station_fraction: float) -> None:
    rng = np.random.default_rng(5)
    checked = 0
    for _ in range(30):
        sample = render_sample(rng, station_fraction, want_mask=True)
        assert sample.tool_mask is not None
        for x, y, v in sample.keypoints:
            if v == 2:
                cx, cy = round(x), round(y)
                assert sample.tool_mask[max(0, cy - 1) : cy + 2, max(0, cx - 1) : cx + 2].any()
                checked += 1
    assert checked > 20


def test_samples_are_deterministic() -> None:
    a = render_training_sample(np.random.default_rng(42))
    b = render_training_sample(np.random.default_rng(42))
    assert np.array_equal(a[0], b[0]) and np.array_equal(a[1], b[1])
    c = render_station_sample(np.random.default_rng(42))
    d = render_station_sample(np.random.default_rng(42))
    assert np.array_equal(c[0], d[0]) and np.array_equal(c[1], d[1])
    e = render_own_station_sample(np.random.default_rng(42))
    f = render_own_station_sample(np.random.default_rng(42))
    assert np.array_equal(e[0], f[0]) and np.array_equal(e[1], f[1])


def _drawn_rigs(render, count: int, monkeypatch: pytest.MonkeyPatch) -> list[OperatorRig]:  # type: ignore[no-untyped-def]
    drawn: list[OperatorRig] = []
    draw_on = OperatorRig.draw_on

    def record(self: OperatorRig, *args, **kwargs):  # type: ignore[no-untyped-def]
        drawn.append(self)
        return draw_on(self, *args, **kwargs)

    with monkeypatch.context() as patch:
        patch.setattr(OperatorRig, "draw_on", record)
        rng = np.random.default_rng(8)
        for _ in range(count):
            render(rng)
    return drawn


def test_own_station_frames_show_only_the_station_tool(monkeypatch: pytest.MonkeyPatch) -> None:
    pools = demo_training._pools()
    own = _drawn_rigs(render_own_station_sample, 30, monkeypatch)
    mixed = _drawn_rigs(render_station_sample, 30, monkeypatch)
    station_rigs = {id(pools.station_rigs[i]) for i in range(len(pools.station_rigs))}
    assert len(own) > 20 and all(id(rig) in station_rigs for rig in own)
    # the randomised station frames do show other stations' tools
    assert any(id(rig) not in station_rigs for rig in mixed)


@pytest.mark.parametrize("mix", sorted(DEMO_MIXES))
def test_every_named_mix_finds_all_its_renderer_functions(mix: str) -> None:
    functions = demo_sample_functions(demo_training, mix)
    assert len(functions) == len(DEMO_MIXES[mix])
    assert sum(weight for _, weight in functions) == pytest.approx(1.0)


def test_train_offers_exactly_the_named_mixes() -> None:
    from stationcheck.cli import build_parser

    train = build_parser()._subparsers._group_actions[0].choices["train"]  # type: ignore[union-attr]
    option = next(action for action in train._actions if action.dest == "demo_mix")
    assert tuple(option.choices) == tuple(DEMO_MIXES)
    assert option.default in DEMO_MIXES


def test_own_tool_mix_shows_the_station_tool_in_about_half_the_frames() -> None:
    # before tools were randomised, every station frame (half of all) showed the station's tool
    weights = dict(DEMO_MIXES["own-tool"])
    own_share = weights["render_own_station_sample"] + weights["render_station_sample"] * (
        1.0 - demo_training.OTHER_TOOL_P
    )
    assert 0.45 <= own_share <= 0.55
    assert weights["render_training_sample"] > 0 and weights["render_station_sample"] > 0


def test_an_unknown_mix_is_refused_in_one_line() -> None:
    with pytest.raises(InputFileError, match="unknown demo frame mix"):
        demo_sample_functions(demo_training, "nothing")


@pytest.fixture(scope="module")
def coco_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("coco")
    write_coco_dataset(out, 24, seed=3)
    return out


def _quiet_coco(path: Path) -> COCO:
    with contextlib.redirect_stdout(io.StringIO()):
        return COCO(str(path))


def test_coco_file_loads_with_pycocotools(coco_dir: Path) -> None:
    """Reference: the COCO API (pycocotools) reads the file and its keypoint category."""
    coco = _quiet_coco(coco_dir / "annotations.json")
    (cat,) = coco.loadCats(coco.getCatIds())
    assert cat["name"] == "fastening_tool"
    assert cat["keypoints"] == ["tip", "rear"] and cat["skeleton"] == [[1, 2]]
    assert len(coco.getImgIds()) == 24
    anns = coco.loadAnns(coco.getAnnIds())
    assert 10 <= len(anns) <= 24
    for ann in anns:
        img = coco.loadImgs(ann["image_id"])[0]
        assert (coco_dir / "images" / img["file_name"]).is_file()
        kps = np.asarray(ann["keypoints"], float).reshape(-1, 3)
        assert ann["num_keypoints"] == int((kps[:, 2] > 0).sum())
        x, y, w, h = ann["bbox"]
        assert 0 <= x and 0 <= y and x + w <= img["width"] and y + h <= img["height"]
        assert 0 < ann["area"] <= w * h
        for kx, ky, v in kps:
            if v == 2:  # a visible keypoint is on the visible tool, so inside its box
                assert x - 1 <= kx <= x + w and y - 1 <= ky <= y + h


def test_coco_ground_truth_scores_perfectly_against_itself(coco_dir: Path) -> None:
    """Reference: pycocotools COCOeval (keypoints) gives AP 1.0 when the detections are the
    ground truth itself; a malformed file would fail or score lower."""
    gt = _quiet_coco(coco_dir / "annotations.json")
    anns = [a for a in gt.loadAnns(gt.getAnnIds()) if a["num_keypoints"] > 0]
    detections = [
        {
            "image_id": a["image_id"],
            "category_id": a["category_id"],
            "keypoints": a["keypoints"],
            "score": 1.0,
        }
        for a in anns
    ]
    with contextlib.redirect_stdout(io.StringIO()):
        dt = gt.loadRes(detections)
        evaluator = COCOeval(gt, dt, iouType="keypoints")
        evaluator.params.kpt_oks_sigmas = np.asarray([0.05, 0.1])
        evaluator.evaluate()
        evaluator.accumulate()
        evaluator.summarize()
    assert evaluator.stats[0] == pytest.approx(1.0)


def test_coco_file_is_plain_json(coco_dir: Path) -> None:
    doc = json.loads((coco_dir / "annotations.json").read_text(encoding="utf-8"))
    assert set(doc) >= {"images", "annotations", "categories", "info", "licenses"}
    assert "demo data" in doc["info"]["description"]
