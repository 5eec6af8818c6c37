"""Trainable weights rebuilt from an exported model compute what the file computes."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import onnxruntime as ort
import pytest

torch = pytest.importorskip("torch")

from stationcheck.errors import ModelError
from stationcheck.training.export import export_onnx
from stationcheck.training.weights import rebuild_network
from stationcheck.vision.detector import bundled_model_path


def _run(path: Path, x: np.ndarray) -> np.ndarray:
    session = ort.InferenceSession(str(path), providers=["CPUExecutionProvider"])
    out: np.ndarray = session.run(None, {session.get_inputs()[0].name: x})[0]
    return out


@pytest.mark.parametrize("stage", ["coarse", "refine"])
def test_bundled_model_rebuilds_and_exports_back_to_the_same_logits(
    stage: str, tmp_path: Path
) -> None:
    # Reference: onnxruntime running the shipped file itself.
    original = bundled_model_path().with_name(f"tool_tip.{stage}.onnx")
    net, info = rebuild_network(original)
    assert info.stage == stage
    again = export_onnx(net, info, tmp_path / f"again.{stage}.onnx")
    x = np.random.default_rng(3).uniform(-2, 2, (1, 3, info.input_height_px, info.input_width_px))
    x = x.astype(np.float32)
    np.testing.assert_allclose(_run(again, x), _run(original, x), atol=1e-3)
    assert any(p.requires_grad for p in net.parameters())


def test_a_file_that_is_not_a_model_is_refused_in_one_line(tmp_path: Path) -> None:
    bogus = tmp_path / "tool.onnx"
    bogus.write_bytes(b"this is not a protobuf")
    with pytest.raises(ModelError, match="tool.onnx"):
        rebuild_network(bogus)


def test_training_from_the_bundled_model_resumes_with_its_settings(tmp_path: Path) -> None:
    from stationcheck.training.loop import TrainConfig, build_networks, train
    from stationcheck.training.samples import FunctionSource
    from tests.training.conftest import toy_sample

    config = TrainConfig(
        seed=1,
        max_steps=2,
        batch_size=2,
        warmup_steps=1,
        log_every=1,
        workers=0,
        start_from=bundled_model_path(),
    )
    coarse, _ = build_networks(config)
    assert coarse.folded
    source = FunctionSource([(toy_sample, 1.0)])
    checkpoint = tmp_path / "ckpt.pt"
    first = train(source, config, checkpoint=checkpoint)
    assert first.steps == 2 and np.isfinite(first.losses).all()
    longer = TrainConfig(**{**config.__dict__, "max_steps": 3})
    again = train(source, longer, checkpoint=checkpoint, resume=True)
    assert again.steps == 3


def test_train_from_a_missing_model_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from stationcheck.cli import main

    code = main(["train", "--from", str(tmp_path / "none.onnx"), "--out", str(tmp_path)])
    err = capsys.readouterr().err.strip()
    assert code != 0
    assert "no such model file" in err and len(err.splitlines()) == 1
