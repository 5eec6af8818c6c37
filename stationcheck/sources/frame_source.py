"""The frame source edge: anything that hands out :class:`~stationcheck.core.records.Frame`."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Protocol, runtime_checkable

from stationcheck.core.records import Frame


@runtime_checkable
class FrameSource(Protocol):
    """Frames in capture order with rising ``t_s``.

    ``fps`` is the nominal frame rate; ``frame_count`` the number of frames this source will give
    when known (a file), else None (a camera). ``name`` says where frames come from, for
    messages. Iterating may raise :class:`~stationcheck.errors.InputFileError` when the source
    fails part-way; the frames given before stay valid.
    """

    name: str
    fps: float
    frame_count: int | None

    def __iter__(self) -> Iterator[Frame]: ...

    def close(self) -> None: ...
