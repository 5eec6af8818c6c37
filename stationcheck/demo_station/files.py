"""Where the demo station's files live in the repository (all of it demo data).

Plain paths only, so the CLI and the benchmarks can name them without importing the renderer.
"""

from __future__ import annotations

from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[2]
SAMPLE_DIR = REPO_ROOT / "sample_video"
DEMO_CONFIG = REPO_ROOT / "configs" / "demo_station.yaml"
DEMO_SCRIPT = SAMPLE_DIR / "demo_script.yaml"

VIDEO_NAME = "demo_station.mp4"
TRUTH_NAME = "demo_station_truth.csv"
INPUTS_NAME = "demo_station_inputs.jsonl"
EXPECTED_NAME = "demo_station_expected.jsonl"
META_NAME = "demo_station_meta.json"

SAMPLE_VIDEO = SAMPLE_DIR / VIDEO_NAME
SAMPLE_TRUTH = SAMPLE_DIR / TRUTH_NAME
SAMPLE_INPUTS = SAMPLE_DIR / INPUTS_NAME
