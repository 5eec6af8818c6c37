"""Where frames come from: a protocol, a video file and a camera or stream read with OpenCV,
and an in-memory fake; :mod:`stationcheck.sources.kinds` picks the kind for a ``--source``.

The frame loop takes any :class:`FrameSource`; it never knows whether frames come from a file,
a camera or a test.
"""

from __future__ import annotations

from stationcheck.sources.frame_source import FrameSource
from stationcheck.sources.memory_source import MemoryFrameSource

__all__ = ["FrameSource", "MemoryFrameSource"]
