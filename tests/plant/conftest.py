"""Fixtures of the plant database's tests: ONE throwaway PostgreSQL cluster per test session
(Debian's server, started by stationcheck.plant.throwaway), the schema set up once, a station
registered per test with its own role, and the demo's step log to forward. Plain helpers are in
plant_helpers.py (a conftest module name is shared by every test folder)."""

from __future__ import annotations

import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

from plant_helpers import REPO, SAMPLE, Station, add_station, admin_connection

from stationcheck.plant.throwaway import PG_BIN, Cluster, throwaway_cluster


@pytest.fixture(scope="session")
def pg() -> Iterator[Cluster]:
    pytest.importorskip("psycopg", reason="needs the plant extra (psycopg)")
    if not (PG_BIN / "initdb").exists():
        pytest.fail(f"PostgreSQL server binaries missing in {PG_BIN}: apt-get install postgresql")
    with throwaway_cluster() as cluster:
        from stationcheck.plant import plant_schema

        with admin_connection(cluster) as conn:
            plant_schema.migrate(conn)
        yield cluster


@pytest.fixture
def admin(pg: Cluster) -> Iterator[Any]:
    with admin_connection(pg) as conn:
        yield conn


@pytest.fixture
def station(pg: Cluster, admin: Any) -> Station:
    return add_station(pg, admin)


@pytest.fixture(scope="session")
def demo_log(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's step log (DEMO DATA): the sample video replayed with the ground-truth
    keypoints and judgements."""
    from stationcheck.pipeline.session import ReplaySettings, run_replay

    video = SAMPLE / "demo_station.mp4"
    if not video.is_file():
        pytest.skip("the sample video is not rendered (tools/render_sample_video)")
    log = tmp_path_factory.mktemp("plant-demo") / "step-log.sqlite"
    run_replay(ReplaySettings(
        config_path=REPO / "configs" / "demo_station.yaml", log_path=log, video=video,
        inputs=SAMPLE / "demo_station_inputs.jsonl", truth=SAMPLE / "demo_station_truth.csv",
        detector="truth", judges="truth"))
    return log
