"""stationcheck: camera-based fastening-order error-proofing for manual assembly stations.

Enable/inhibit is an error-proofing aid for quality, not a safety function.
"""

from __future__ import annotations

import os

# FFmpeg (inside OpenCV) reads its log level once, when the first video is opened, by whichever
# module that is: quiet from the start, so a damaged video gives our one-line error only.
os.environ.setdefault("OPENCV_FFMPEG_LOGLEVEL", "-8")  # AV_LOG_QUIET; a user's setting wins

__version__ = "0.1.0"
