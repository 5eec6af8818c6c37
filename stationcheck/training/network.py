"""The heatmap keypoint network: a small dense 3x3 encoder to 1/16 scale and an upsampling
path with skip connections back to 1/``output_stride`` scale.

Dense 3x3 convolutions rather than depthwise-separable ones: on the CPU, torch trains them
several times faster at this size and onnxruntime runs them well. One output channel of logits
per keypoint; ``sigmoid(logit)`` is trained towards a Gaussian bump of peak 1.
"""

from __future__ import annotations

import torch
from torch import nn


def _conv(c_in: int, c_out: int, stride: int = 1, folded: bool = False) -> nn.Sequential:
    if folded:  # batch norm already folded into the convolution (as in an exported model)
        return nn.Sequential(
            nn.Conv2d(c_in, c_out, 3, stride=stride, padding=1, bias=True),
            nn.Identity(),
            nn.ReLU(inplace=True),
        )
    return nn.Sequential(
        nn.Conv2d(c_in, c_out, 3, stride=stride, padding=1, bias=False),
        nn.BatchNorm2d(c_out),
        nn.ReLU(inplace=True),
    )


class HeatmapNet(nn.Module):
    """``widths`` are the channels at 1/2, 1/4, 1/8 and 1/16 scale.

    ``folded=True`` builds the same network with each batch norm folded into its convolution's
    bias: the form an exported ONNX model has, so its weights can be loaded back and trained
    further (:mod:`stationcheck.training.weights`).
    """

    def __init__(
        self,
        num_keypoints: int,
        widths: tuple[int, int, int, int] = (16, 24, 40, 64),
        output_stride: int = 4,
        folded: bool = False,
    ) -> None:
        super().__init__()
        if output_stride not in (2, 4):
            raise ValueError(f"output_stride must be 2 or 4, got {output_stride}")
        w2, w4, w8, w16 = widths
        self.output_stride = output_stride
        f = folded
        self.folded = folded
        self.down2 = nn.Sequential(_conv(3, w2, 2, f), _conv(w2, w2, 1, f))
        self.down4 = nn.Sequential(_conv(w2, w4, 2, f), _conv(w4, w4, 1, f))
        self.down8 = nn.Sequential(_conv(w4, w8, 2, f), _conv(w8, w8, 1, f))
        self.down16 = nn.Sequential(_conv(w8, w16, 2, f), _conv(w16, w16, 1, f))
        self.up = nn.Upsample(scale_factor=2, mode="nearest")
        self.fuse8 = nn.Sequential(_conv(w16 + w8, w8, 1, f), _conv(w8, w8, 1, f))
        self.fuse4 = _conv(w8 + w4, w4, 1, f)
        self.fuse2 = _conv(w4 + w2, w2, 1, f) if output_stride == 2 else None
        head_in = w2 if output_stride == 2 else w4
        self.head = nn.Conv2d(head_in, num_keypoints, 1)
        assert self.head.bias is not None
        nn.init.constant_(self.head.bias, -4.0)  # start near "nothing here"

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        f2 = self.down2(x)
        f4 = self.down4(f2)
        f8 = self.down8(f4)
        f16 = self.down16(f8)
        y = self.fuse8(torch.cat([self.up(f16), f8], dim=1))
        y = self.fuse4(torch.cat([self.up(y), f4], dim=1))
        if self.fuse2 is not None:
            y = self.fuse2(torch.cat([self.up(y), f2], dim=1))
        out: torch.Tensor = self.head(y)
        return out


def count_parameters(model: nn.Module) -> int:
    return sum(p.numel() for p in model.parameters())
