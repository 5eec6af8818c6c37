"""Training smoke run, export parity with torch, checkpoint resume, calibration."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

torch = pytest.importorskip("torch")

from stationcheck.core.records import Frame
from stationcheck.training.bundle import write_bundle
from stationcheck.training.calibration import fit_logistic
from stationcheck.training.export import export_onnx
from stationcheck.training.loop import TrainConfig, learning_rate_factor, train
from stationcheck.training.network import HeatmapNet, count_parameters
from stationcheck.training.samples import BatchMaker, FunctionSource
from stationcheck.vision.detector import load_detector
from stationcheck.vision.onnx_model import KeypointModel
from stationcheck.vision.preprocessing import Preprocessor
from tests.training.conftest import toy_sample

SMALL = TrainConfig(
    seed=3, max_steps=4, batch_size=4, warmup_steps=2, log_every=2, checkpoint_every=2, workers=0
)


@pytest.mark.train
def test_smoke_training_writes_a_working_bundle(tmp_path: Path) -> None:
    source = FunctionSource([(toy_sample, 1.0)])
    seen = []
    result = train(source, SMALL, checkpoint=tmp_path / "ckpt.pt", on_progress=seen.append)
    assert result.steps == 4 and len(result.losses) == 4 and np.isfinite(result.losses).all()
    assert [p.step for p in seen] == [2, 4]
    path = write_bundle(result, SMALL, tmp_path / "out", source, calibration_frames=12)
    detector = load_detector(path)
    assert detector.refine is not None
    assert detector.coarse.info.score_calibration.keys() == {"tip", "rear"}
    image, _ = toy_sample(np.random.default_rng(0))
    keypoints = detector.detect(Frame(0, 0.0, image))
    assert [p.name for p in keypoints.points] == ["tip", "rear"]
    assert "score =" in detector.coarse.info.description


@pytest.mark.train
def test_onnx_matches_torch_on_frames(tmp_path: Path) -> None:
    torch.manual_seed(0)
    config = TrainConfig()
    net = HeatmapNet(2).eval()
    with torch.no_grad():  # non-trivial batch-norm statistics
        for module in net.modules():
            if isinstance(module, torch.nn.BatchNorm2d):
                module.running_mean.uniform_(-0.2, 0.2)
                module.running_var.uniform_(0.5, 1.5)
    path = export_onnx(net, config.coarse_info(), tmp_path / "m.coarse.onnx")
    model = KeypointModel(path)
    pre = Preprocessor(model.info)
    rng = np.random.default_rng(5)
    for _ in range(3):
        image, _ = toy_sample(rng)
        blob, _ = pre.whole_frame(image)
        with torch.no_grad():
            expected = net(torch.from_numpy(blob)).numpy()[0]
        assert np.abs(model.run(blob) - expected).max() < 1e-4


@pytest.mark.train
def test_resume_continues_where_the_run_stopped(tmp_path: Path) -> None:
    source = FunctionSource([(toy_sample, 1.0)])
    straight = train(source, SMALL)
    ckpt = tmp_path / "ckpt.pt"
    half = TrainConfig(**{**SMALL.__dict__, "max_steps": 2})
    train(source, half, checkpoint=ckpt)
    resumed = train(source, SMALL, checkpoint=ckpt, resume=True)
    assert resumed.steps == 4
    for a, b in zip(
        straight.coarse.state_dict().values(), resumed.coarse.state_dict().values(), strict=True
    ):
        assert torch.allclose(a.float(), b.float(), atol=1e-4)


def test_resume_refuses_a_checkpoint_of_other_settings(tmp_path: Path) -> None:
    from stationcheck.errors import InputFileError
    from stationcheck.training.loop import build_networks, save_checkpoint

    coarse, refine = build_networks(SMALL)
    optimizer = torch.optim.AdamW(list(coarse.parameters()) + list(refine.parameters()))
    ckpt = tmp_path / "ckpt.pt"
    save_checkpoint(ckpt, SMALL, coarse, refine, optimizer, step=1, elapsed_s=1.0)
    other = TrainConfig(**{**SMALL.__dict__, "seed": 99})
    with pytest.raises(InputFileError, match="resume with the same settings"):
        train(FunctionSource([(toy_sample, 1.0)]), other, checkpoint=ckpt, resume=True)


def test_resume_refuses_an_unreadable_checkpoint(tmp_path: Path) -> None:
    from stationcheck.errors import InputFileError

    ckpt = tmp_path / "ckpt.pt"
    ckpt.write_bytes(b"not a checkpoint")
    with pytest.raises(InputFileError, match="not a readable training checkpoint"):
        train(FunctionSource([(toy_sample, 1.0)]), SMALL, checkpoint=ckpt, resume=True)


def test_batches_are_reproducible_from_seed_and_index() -> None:
    config = TrainConfig()
    source = FunctionSource([(toy_sample, 1.0)])
    a = BatchMaker(source, config.coarse_info(), config.refine_info(), 3, seed=11).batch(7)
    b = BatchMaker(source, config.coarse_info(), config.refine_info(), 3, seed=11).batch(7)
    c = BatchMaker(source, config.coarse_info(), config.refine_info(), 3, seed=11).batch(8)
    assert np.array_equal(a.coarse_x, b.coarse_x) and np.array_equal(a.refine_y, b.refine_y)
    assert not np.array_equal(a.coarse_x, c.coarse_x)
    assert a.coarse_x.shape == (3, 3, 96, 128) and a.coarse_y.shape == (3, 2, 24, 32)
    assert a.refine_x.shape == (3, 3, 96, 96) and a.refine_y.shape == (3, 1, 24, 24)
    assert 0.0 <= a.coarse_y.min() and a.coarse_y.max() <= 1.0


def test_network_size_and_output_shape() -> None:
    net = HeatmapNet(2)
    assert 100_000 < count_parameters(net) < 300_000
    assert net(torch.zeros(1, 3, 96, 128)).shape == (1, 2, 24, 32)


def test_learning_rate_warms_up_then_decays() -> None:
    config = TrainConfig(max_steps=1000, warmup_steps=100)
    factors = [learning_rate_factor(config, s, 0.0) for s in (0, 99, 100, 500, 1000)]
    assert factors[0] < factors[1] == pytest.approx(1.0)
    assert factors[2] > factors[3] > factors[4] == pytest.approx(0.02)


@pytest.mark.parametrize(
    ("slope", "offset"),
    [(1.0, 0.0), (0.5, -1.0), (2.0, 1.5)],
)
def test_logistic_fit_recovers_known_parameters(slope: float, offset: float) -> None:
    rng = np.random.default_rng(2)
    x = rng.uniform(-8, 8, 20_000)
    y = rng.random(x.size) < 1.0 / (1.0 + np.exp(-(slope * x + offset)))
    fitted = fit_logistic(x, y)
    assert fitted.slope == pytest.approx(slope, rel=0.1)
    assert fitted.offset == pytest.approx(offset, abs=0.15)


@pytest.mark.parametrize("labels", [[True] * 5, [False] * 5])
def test_logistic_fit_keeps_identity_for_one_class(labels: list[bool]) -> None:
    fitted = fit_logistic(np.arange(5.0), labels)
    assert (fitted.slope, fitted.offset) == (1.0, 0.0)


def test_logistic_fit_weighs_in_the_coarse_logit_when_it_helps() -> None:
    rng = np.random.default_rng(9)
    refine = rng.uniform(-6, 6, 20_000)
    coarse = rng.uniform(-6, 6, refine.size)
    y = rng.random(refine.size) < 1.0 / (1.0 + np.exp(-(1.5 * refine + 0.8 * coarse - 0.5)))
    fitted = fit_logistic(refine, y, coarse)
    assert fitted.slope == pytest.approx(1.5, rel=0.1)
    assert fitted.coarse_slope == pytest.approx(0.8, rel=0.1)
    assert fitted.offset == pytest.approx(-0.5, abs=0.15)
    # A coarse logit that only hurts gets no weight.
    noise_only = fit_logistic(refine, y, -coarse)
    assert noise_only.coarse_slope == 0.0


def test_trailing_motion_blur_keeps_the_label_at_the_leading_end() -> None:
    import cv2

    from stationcheck.training.augment import trailing_kernel

    dot = np.zeros((61, 61), np.float32)
    dot[30, 30] = 1.0
    streak = cv2.filter2D(dot, -1, trailing_kernel(10.0, 0.0))  # moving towards +x
    ys, xs = np.nonzero(streak > 1e-3)
    assert set(ys) <= {29, 30, 31}
    assert xs.max() == 30 and xs.min() == 20  # smeared behind (towards -x), not ahead


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_tool_motion_blur_equals_a_whole_frame_filter_under_its_mask(seed: int) -> None:
    """The smear is filtered in a window around the tool only; reference: OpenCV's filter2D
    over the whole frame, blended with the same mask."""
    import cv2

    from stationcheck.training.augment import AugmentSettings, motion_blur_tool, trailing_kernel

    rng = np.random.default_rng(seed)
    image = rng.integers(0, 256, (480, 640, 3), dtype=np.uint8)
    tip = (rng.uniform(0, 640), rng.uniform(0, 480))  # anywhere, the picture's edges included
    kps = np.array([[*tip, 2.0], [tip[0] + 90.0, tip[1] + 40.0, 2.0]])
    settings = AugmentSettings()
    got = motion_blur_tool(np.random.default_rng(seed), image, kps, settings)
    again = np.random.default_rng(seed)  # the same draws as inside
    length = again.uniform(*settings.motion_blur_px)
    kernel = trailing_kernel(length, again.uniform(0, 2 * np.pi))
    smeared = cv2.filter2D(image, -1, kernel, borderType=cv2.BORDER_REFLECT_101)
    mask = np.zeros((480, 640), np.float32)
    width = int(40 + 2 * length)
    ends = [tuple(int(v) for v in p) for p in kps[:, :2]]
    cv2.line(mask, ends[0], ends[1], 1.0, width)
    cv2.circle(mask, ends[0], width // 2, 1.0, -1)
    soft = cv2.GaussianBlur(mask, (0, 0), 8.0)[..., None]
    expected = np.clip(image * (1.0 - soft) + smeared * soft + 0.5, 0, 255).astype(np.uint8)
    assert np.abs(got.astype(int) - expected.astype(int)).max() <= 1
    assert (got != image).any()
