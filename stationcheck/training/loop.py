"""The training run: both stages trained together on the same augmented frames.

One worker process makes batches (:class:`~stationcheck.training.samples.BatchMaker`, batch
``n`` depends only on the seed and ``n``, so a resumed run sees the same data an uninterrupted
one would). The main process trains the coarse and refine networks with AdamW and a warm-up +
cosine schedule, stops at a step or time budget, checkpoints atomically, and at the end exports
both ONNX files and calibrates their scores on held-out frames.
"""

from __future__ import annotations

import logging
import math
import os
import time
from collections.abc import Callable, Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import torch
from torch import nn
from torch.utils.data import DataLoader, IterableDataset

from stationcheck.errors import InputFileError
from stationcheck.training.network import HeatmapNet
from stationcheck.training.samples import Batch, BatchMaker, ExampleSettings, FrameSource
from stationcheck.vision.model_contract import ModelInfo, Stage

logger = logging.getLogger(__name__)

KEYPOINT_NAMES = ("tip", "rear")
MEAN = (0.45, 0.45, 0.45)
STD = (0.25, 0.25, 0.25)


@dataclass(frozen=True)
class TrainConfig:
    seed: int = 0
    max_steps: int = 3000
    max_minutes: float | None = None
    batch_size: int = 32
    learning_rate: float = 3e-3
    weight_decay: float = 1e-4
    warmup_steps: int = 100
    checkpoint_every: int = 200
    log_every: int = 25
    threads: int = 1
    workers: int = 1
    coarse_size_px: tuple[int, int] = (128, 96)
    refine_size_px: tuple[int, int] = (96, 96)
    output_stride: int = 4
    coarse_widths: tuple[int, int, int, int] = (16, 24, 40, 64)
    refine_widths: tuple[int, int, int, int] = (16, 24, 40, 64)
    model_name: str = "tool_tip"
    # An exported coarse model (its refine partner beside it) whose weights training starts
    # from instead of random ones; the networks are then the folded form of the file's.
    start_from: Path | None = None

    def coarse_info(self) -> ModelInfo:
        return self._info(
            "coarse",
            KEYPOINT_NAMES,
            self.coarse_size_px,
            refine_model=f"{self.model_name}.refine.onnx",
        )

    def refine_info(self) -> ModelInfo:
        return self._info("refine", KEYPOINT_NAMES[:1], self.refine_size_px, crop_scale=1.0)

    def _info(
        self, stage: Stage, names: tuple[str, ...], size_px: tuple[int, int], **extra: Any
    ) -> ModelInfo:
        return ModelInfo(
            keypoint_names=names,
            input_width_px=size_px[0],
            input_height_px=size_px[1],
            mean=MEAN,
            std=STD,
            output_stride=self.output_stride,
            stage=stage,
            **extra,
        )


@dataclass
class Progress:
    step: int
    max_steps: int
    loss: float
    images_per_s: float
    elapsed_s: float


@dataclass
class TrainResult:
    coarse: HeatmapNet
    refine: HeatmapNet
    steps: int
    elapsed_s: float
    checkpoint: Path | None
    losses: list[float] = field(default_factory=list)


class _BatchStream(IterableDataset[Batch]):
    def __init__(self, maker: BatchMaker, start: int, stop: int) -> None:
        self.maker, self.start, self.stop = maker, start, stop

    def __iter__(self) -> Iterator[Batch]:
        info = torch.utils.data.get_worker_info()
        workers = info.num_workers if info is not None else 1
        worker_id = info.id if info is not None else 0
        for index in range(self.start + worker_id, self.stop, workers):
            yield self.maker.batch(index)


def _worker_init(_: int) -> None:
    import cv2

    torch.set_num_threads(1)
    cv2.setNumThreads(1)


def build_networks(config: TrainConfig) -> tuple[HeatmapNet, HeatmapNet]:
    torch.manual_seed(config.seed)
    if config.start_from is not None:
        return _networks_from(config.start_from)
    coarse = HeatmapNet(len(KEYPOINT_NAMES), config.coarse_widths, config.output_stride)
    refine = HeatmapNet(1, config.refine_widths, config.output_stride)
    return coarse, refine


def _networks_from(coarse_path: Path) -> tuple[HeatmapNet, HeatmapNet]:
    from stationcheck.training.weights import rebuild_network

    coarse, info = rebuild_network(coarse_path)
    if info.stage != "coarse" or not info.refine_model:
        raise InputFileError(f"{coarse_path}: a coarse model naming its refine partner is needed")
    refine, _ = rebuild_network(coarse_path.with_name(info.refine_model))
    return coarse, refine


def learning_rate_factor(config: TrainConfig, step: int, elapsed_s: float) -> float:
    """Linear warm-up, then cosine to 2 % over the budget (steps or time, whichever is
    further along)."""
    if step < config.warmup_steps:
        return (step + 1) / config.warmup_steps
    done = step / max(config.max_steps, 1)
    if config.max_minutes:
        done = max(done, elapsed_s / (60.0 * config.max_minutes))
    return 0.02 + 0.98 * 0.5 * (1.0 + math.cos(math.pi * min(done, 1.0)))


def heatmap_loss(logits: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
    """Binary cross-entropy against Gaussian targets, summed over cells, mean over samples."""
    bce = nn.functional.binary_cross_entropy_with_logits(logits, target, reduction="sum")
    return bce / logits.shape[0]


def train(
    source: FrameSource,
    config: TrainConfig,
    checkpoint: Path | None = None,
    resume: bool = False,
    on_progress: Callable[[Progress], None] | None = None,
    example_settings: ExampleSettings | None = None,
) -> TrainResult:
    torch.set_num_threads(config.threads)
    coarse, refine = build_networks(config)
    params = list(coarse.parameters()) + list(refine.parameters())
    optimizer = torch.optim.AdamW(params, lr=config.learning_rate, weight_decay=config.weight_decay)
    start_step, elapsed_before = 0, 0.0
    if resume and checkpoint is not None and checkpoint.exists():
        start_step, elapsed_before = load_checkpoint(checkpoint, config, coarse, refine, optimizer)
        logger.info("resumed from %s at step %d", checkpoint, start_step)
    coarse.to(memory_format=torch.channels_last).train()  # type: ignore[call-overload]
    refine.to(memory_format=torch.channels_last).train()  # type: ignore[call-overload]
    maker = BatchMaker(
        source,
        config.coarse_info(),
        config.refine_info(),
        config.batch_size,
        config.seed,
        example_settings or ExampleSettings(),
    )
    loader = DataLoader(
        _BatchStream(maker, start_step, config.max_steps),
        batch_size=None,
        num_workers=config.workers,
        worker_init_fn=_worker_init if config.workers else None,
        prefetch_factor=4 if config.workers else None,
    )
    t_start = time.monotonic()
    step, losses, window_t, window_n = start_step, [], time.monotonic(), 0
    for batch in loader:
        elapsed = elapsed_before + time.monotonic() - t_start
        if config.max_minutes is not None and elapsed >= 60.0 * config.max_minutes:
            logger.info("time budget of %.1f min reached at step %d", config.max_minutes, step)
            break
        for group in optimizer.param_groups:
            group["lr"] = config.learning_rate * learning_rate_factor(config, step, elapsed)
        loss = _train_step(coarse, refine, optimizer, batch)
        losses.append(loss)
        step += 1
        window_n += config.batch_size
        if step % config.log_every == 0 or step == config.max_steps:
            now = time.monotonic()
            progress = Progress(
                step,
                config.max_steps,
                float(np.mean(losses[-config.log_every :])),
                window_n / max(now - window_t, 1e-9),
                elapsed,
            )
            window_t, window_n = now, 0
            logger.info(
                "step %d/%d loss %.3f %.0f img/s",
                step,
                config.max_steps,
                progress.loss,
                progress.images_per_s,
            )
            if on_progress is not None:
                on_progress(progress)
        if checkpoint is not None and step % config.checkpoint_every == 0:
            save_checkpoint(
                checkpoint,
                config,
                coarse,
                refine,
                optimizer,
                step,
                elapsed_before + time.monotonic() - t_start,
            )
    elapsed_total = elapsed_before + time.monotonic() - t_start
    if checkpoint is not None:
        save_checkpoint(checkpoint, config, coarse, refine, optimizer, step, elapsed_total)
    coarse.eval()
    refine.eval()
    return TrainResult(coarse, refine, step, elapsed_total, checkpoint, losses)


def _train_step(
    coarse: nn.Module, refine: nn.Module, optimizer: torch.optim.Optimizer, batch: Batch
) -> float:
    def tensor(a: npt.NDArray[np.float32]) -> torch.Tensor:
        return torch.from_numpy(a).contiguous(memory_format=torch.channels_last)

    loss = heatmap_loss(coarse(tensor(batch.coarse_x)), torch.from_numpy(batch.coarse_y))
    loss = loss + heatmap_loss(refine(tensor(batch.refine_x)), torch.from_numpy(batch.refine_y))
    optimizer.zero_grad(set_to_none=True)
    loss.backward()  # type: ignore[no-untyped-call]
    optimizer.step()
    return float(loss.detach())


def save_checkpoint(
    path: Path,
    config: TrainConfig,
    coarse: nn.Module,
    refine: nn.Module,
    optimizer: torch.optim.Optimizer,
    step: int,
    elapsed_s: float,
) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(path.suffix + ".tmp")
    torch.save(
        {
            "step": step,
            "elapsed_s": elapsed_s,
            "config": _config_dict(config),
            "coarse": coarse.state_dict(),
            "refine": refine.state_dict(),
            "optimizer": optimizer.state_dict(),
        },
        tmp,
    )
    os.replace(tmp, path)
    logger.info("checkpoint at step %d: %s", step, path)


def load_checkpoint(
    path: Path,
    config: TrainConfig,
    coarse: nn.Module,
    refine: nn.Module,
    optimizer: torch.optim.Optimizer,
) -> tuple[int, float]:
    try:
        state: dict[str, Any] = torch.load(path, map_location="cpu", weights_only=True)
    except Exception as exc:
        raise InputFileError(f"{path}: not a readable training checkpoint ({exc})") from exc
    saved = state.get("config", {})
    for key in (
        "coarse_size_px",
        "refine_size_px",
        "output_stride",
        "coarse_widths",
        "refine_widths",
        "seed",
        "batch_size",
    ):
        if saved.get(key) != _config_dict(config)[key]:
            raise InputFileError(
                f"{path}: checkpoint was made with {key}={saved.get(key)}, this run has "
                f"{_config_dict(config)[key]}; resume with the same settings"
            )
    coarse.load_state_dict(state["coarse"])
    refine.load_state_dict(state["refine"])
    optimizer.load_state_dict(state["optimizer"])
    return int(state["step"]), float(state["elapsed_s"])


def _config_dict(config: TrainConfig) -> dict[str, Any]:
    def plain(value: Any) -> Any:
        if isinstance(value, tuple):
            return list(value)
        return str(value) if isinstance(value, Path) else value

    return {k: plain(v) for k, v in asdict(config).items()}
