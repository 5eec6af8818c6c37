"""Factories for the review screen's tests: step logs (a scripted one, and the demo's, replayed
from the sample video with the ground-truth detector), a running review server on 127.0.0.1
with a free port, and a small HTTP client."""

from __future__ import annotations

import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "quality"))  # review_logs

from review_logs import scripted_units, sequencer_events, write_log
from review_web_helpers import Client, DemoRun, serve

from stationcheck.store.synthetic import StationScript

REPO = Path(__file__).resolve().parents[3]
SAMPLE = REPO / "sample_video"
SHOTS = Path("/tmp/shots/review")


@pytest.fixture(scope="session")
def scripted_review_log(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_log(tmp_path_factory.mktemp("review-web") / "log.sqlite",
                     sequencer_events(scripted_units(StationScript())))


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> DemoRun:
    """The demo's step log (DEMO DATA): the whole sample video replayed with the ground-truth
    keypoints and judgements (a few seconds; the model is not what these tests are about)."""
    from stationcheck.pipeline.session import ReplaySettings, run_replay

    video = SAMPLE / "demo_station.mp4"
    if not video.is_file():
        pytest.skip("the sample video is not rendered (tools/render_sample_video)")
    log = tmp_path_factory.mktemp("review-demo") / "step-log.sqlite"
    report = run_replay(ReplaySettings(
        config_path=REPO / "configs" / "demo_station.yaml", log_path=log, video=video,
        inputs=SAMPLE / "demo_station_inputs.jsonl", truth=SAMPLE / "demo_station_truth.csv",
        detector="truth", judges="truth"))
    return DemoRun(log, report)


@pytest.fixture
def review(scripted_review_log: Path) -> Iterator[Client]:
    yield from serve(scripted_review_log)


@pytest.fixture
def demo_review(demo_run: DemoRun) -> Iterator[Client]:
    yield from serve(demo_run.log)


@pytest.fixture
def shots() -> Path:
    SHOTS.mkdir(parents=True, exist_ok=True)
    return SHOTS


@pytest.fixture(scope="session")
def generated_log(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """2,000 synthetic units (DEMO DATA) from the store's generator: enough for every chart."""
    from stationcheck.store.generator import generate_log

    path = tmp_path_factory.mktemp("review-generated") / "generated.sqlite"
    generate_log(path, 2000, seed=1)
    return path


@pytest.fixture
def generated_review(generated_log: Path) -> Iterator[Client]:
    yield from serve(generated_log)
