"""The live station run: frame grabber, the frame loop's linked station (PLC link, clock,
watchdogs), and its set-up from a config."""

from __future__ import annotations
