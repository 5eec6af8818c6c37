"""The live station run: frame grabber, live loop with watchdogs, and its set-up from a config."""

from __future__ import annotations
