"""Frame to model input: the whole frame resized (coarse stage) or a crop (refine stage).

Training builds its inputs with these same functions, so what a model learns and what it sees
at the station are the same pixels. The frame-to-input mapping is an axis-aligned affine map
with pixel centres at integer coordinates (OpenCV's convention); :class:`InputWindow` holds it
and maps decoded points back to frame pixels.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.vision.model_contract import ModelInfo

FloatArray = npt.NDArray[np.float32]


@dataclass(frozen=True)
class InputWindow:
    """``input = scale * frame + offset`` per axis (pixel centres at integer coordinates)."""

    scale_x: float
    offset_x: float
    scale_y: float
    offset_y: float

    @classmethod
    def whole_frame(cls, frame_w: int, frame_h: int, input_w: int, input_h: int) -> InputWindow:
        sx, sy = input_w / frame_w, input_h / frame_h
        return cls(sx, 0.5 * sx - 0.5, sy, 0.5 * sy - 0.5)

    @classmethod
    def crop(
        cls, centre_x_px: float, centre_y_px: float, input_w: int, input_h: int, crop_scale: float
    ) -> InputWindow:
        """A crop of ``input * crop_scale`` frame pixels whose input pixel ``(w // 2, h // 2)``
        is the frame pixel nearest the point; at ``crop_scale`` 1 the crop is an exact copy of
        frame pixels (integer offsets, no interpolation)."""
        s = 1.0 / crop_scale
        cx, cy = round(centre_x_px), round(centre_y_px)
        return cls(s, input_w // 2 - s * cx, s, input_h // 2 - s * cy)

    def to_input(self, x_px: float, y_px: float) -> tuple[float, float]:
        return self.scale_x * x_px + self.offset_x, self.scale_y * y_px + self.offset_y

    def to_frame(self, u: float, v: float) -> tuple[float, float]:
        return (u - self.offset_x) / self.scale_x, (v - self.offset_y) / self.scale_y

    def matrix(self) -> npt.NDArray[np.float64]:
        return np.array(
            [[self.scale_x, 0.0, self.offset_x], [0.0, self.scale_y, self.offset_y]],
            dtype=np.float64,
        )


class Preprocessor:
    """Turns BGR frames into the NCHW float32 blob one model expects.

    Uses ``cv2.resize``/``cv2.warpAffine`` into a reused buffer and ``cv2.dnn.blobFromImage``
    for the colour swap and normalisation (several times faster than the same steps in numpy).
    """

    def __init__(self, info: ModelInfo) -> None:
        self.info = info
        self._size = (info.input_width_px, info.input_height_px)
        self._small = np.empty((info.input_height_px, info.input_width_px, 3), np.uint8)
        self._mean_255 = tuple(255.0 * m for m in info.mean)
        stds = set(info.std)
        self._uniform_scale = 1.0 / (255.0 * info.std[0]) if len(stds) == 1 else None
        self._channel_scale = (1.0 / (255.0 * np.asarray(info.std, np.float32))).reshape(1, 3, 1, 1)

    def whole_frame(self, image_bgr: npt.NDArray[np.uint8]) -> tuple[FloatArray, InputWindow]:
        h, w = image_bgr.shape[:2]
        window = InputWindow.whole_frame(w, h, *self._size)
        if (w, h) == self._size:
            np.copyto(self._small, image_bgr)
        else:
            cv2.resize(image_bgr, self._size, dst=self._small, interpolation=cv2.INTER_AREA)
        return self._blob(self._small), window

    def crop(
        self, image_bgr: npt.NDArray[np.uint8], centre_x_px: float, centre_y_px: float
    ) -> tuple[FloatArray, InputWindow]:
        window = InputWindow.crop(centre_x_px, centre_y_px, *self._size, self.info.crop_scale)
        cv2.warpAffine(
            image_bgr,
            window.matrix(),
            self._size,
            dst=self._small,
            flags=cv2.INTER_LINEAR if self.info.crop_scale != 1.0 else cv2.INTER_NEAREST,
            borderMode=cv2.BORDER_REPLICATE,
        )
        return self._blob(self._small), window

    def _blob(self, small_bgr: npt.NDArray[np.uint8]) -> FloatArray:
        scale = self._uniform_scale if self._uniform_scale is not None else 1.0
        blob: FloatArray = np.asarray(
            cv2.dnn.blobFromImage(
                small_bgr, scalefactor=scale, mean=self._mean_255, swapRB=True, crop=False
            ),
            dtype=np.float32,
        )
        if self._uniform_scale is None:
            blob *= self._channel_scale
        return blob
