"""Frames held in memory: a fake source for tests and for frames made on the fly."""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence

import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame


class MemoryFrameSource:
    """Gives ``images`` as frames ``first_index, first_index + 1, ...`` at ``fps``.

    ``fail_at`` (a frame index) makes iteration raise ``error`` instead of giving that frame,
    to test how the loop behaves when a source breaks part-way.
    """

    def __init__(
        self,
        images: Sequence[npt.NDArray[np.uint8]] | Iterable[npt.NDArray[np.uint8]],
        fps: float = 30.0,
        *,
        first_index: int = 0,
        name: str = "frames in memory",
        fail_at: int | None = None,
        error: Exception | None = None,
    ) -> None:
        if fps <= 0:
            raise ValueError(f"MemoryFrameSource.fps must be > 0, got {fps}")
        self._images = list(images)
        self.fps = float(fps)
        self.first_index = first_index
        self.name = name
        self.frame_count: int | None = len(self._images)
        self._fail_at = fail_at
        self._error = error
        self.closed = False

    def __iter__(self) -> Iterator[Frame]:
        for offset, image in enumerate(self._images):
            index = self.first_index + offset
            if self._fail_at is not None and index >= self._fail_at:
                raise self._error if self._error is not None else RuntimeError("source failed")
            yield Frame(index=index, t_s=index / self.fps, image=image)

    def close(self) -> None:
        self.closed = True
