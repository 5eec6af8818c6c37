"""stationcheck: camera-based fastening-order error-proofing for manual assembly stations.

Enable/inhibit is an error-proofing aid for quality, not a safety function.
"""

from __future__ import annotations

__version__ = "0.1.0"
