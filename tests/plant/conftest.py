"""Factories for the plant database's tests: ONE throwaway PostgreSQL cluster per test session
(Debian's server, started by tests/plant/pg_cluster.py), the schema set up once, a station
registered per test with its own role, and step logs to forward (the demo's, generated)."""

from __future__ import annotations

import hashlib
import itertools
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

from stationcheck.plant.throwaway import ADMIN_PASSWORD, PG_BIN, Cluster, throwaway_cluster

REPO = Path(__file__).resolve().parents[2]
SAMPLE = REPO / "sample_video"
STATION_PASSWORD = "station-secret-for-tests"
_numbers = itertools.count(1)


@pytest.fixture(scope="session")
def pg() -> Iterator[Cluster]:
    pytest.importorskip("psycopg", reason="needs the plant extra (psycopg)")
    if not (PG_BIN / "initdb").exists():
        pytest.fail(f"PostgreSQL server binaries missing in {PG_BIN}: apt-get install postgresql")
    with throwaway_cluster() as cluster:
        from stationcheck.plant import connect, schema

        with connect.connect(cluster.url(), password_file=_write_secret(cluster, "admin",
                                                                          ADMIN_PASSWORD)) as conn:
            schema.migrate(conn)
        yield cluster


def _write_secret(cluster: Cluster, name: str, text: str) -> Path:
    path = cluster.folder / f"{name}.secret"
    path.write_text(text + "\n")
    return path


def admin_connection(pg: Cluster) -> Any:
    from stationcheck.plant import connect

    return connect.connect(pg.url(), password_file=_write_secret(pg, "admin", ADMIN_PASSWORD))


@pytest.fixture
def admin(pg: Cluster) -> Iterator[Any]:
    with admin_connection(pg) as conn:
        yield conn


@dataclass(frozen=True)
class Station:
    station_id: str
    role: str
    url: str
    password_file: Path


def add_station(pg: Cluster, admin: Any, line: str = "line-1") -> Station:
    from stationcheck.plant import schema

    station_id = f"cover-{next(_numbers)}"
    role = schema.add_station(admin, station_id, line, "demo-plant",
                              role_password=STATION_PASSWORD)
    return Station(station_id, role, pg.url(role),
                   _write_secret(pg, "station", STATION_PASSWORD))


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


def local_digest(log: Path) -> tuple[int, str]:
    """(count, md5 of 'seq:kind:data' lines in seq order) of a local step log."""
    import sqlite3

    conn = sqlite3.connect(f"file:{log}?mode=ro", uri=True)
    try:
        rows = conn.execute("SELECT seq, kind, data FROM events ORDER BY seq").fetchall()
    finally:
        conn.close()
    text = "\n".join(f"{seq}:{kind}:{data}" for seq, kind, data in rows)
    return len(rows), hashlib.md5(text.encode("utf-8")).hexdigest()


def central_digest(admin: Any, station_id: str) -> tuple[int, str, bool]:
    """(count, PostgreSQL's md5() of the same lines, whether seq runs 1..count with no gap)."""
    count, digest, first, last = admin.execute(
        "SELECT count(*), md5(coalesce(string_agg(seq || ':' || kind || ':' || data, E'\\n' "
        "ORDER BY seq), '')), min(seq), max(seq) FROM plant.events WHERE station_id = %s",
        (station_id,)).fetchone()
    return int(count), str(digest), count == 0 or (first == 1 and last == count)


def station_config(folder: Path, station_id: str, log: Path) -> Path:
    """The demo station's config with a plant section, written into ``folder``."""
    text = (REPO / "configs" / "demo_station.yaml").read_text(encoding="utf-8")
    text = text.replace("reference_frame: demo_station/",
                        f"reference_frame: {REPO / 'configs' / 'demo_station'}/")
    text = text.replace("source: ../sample_video/", f"source: {SAMPLE}/")
    text = text.replace("path: stationcheck-log.sqlite", f"path: {log}")
    text += f"\nplant:\n  station_id: {station_id}\n  line: line-1\n  plant: demo-plant\n"
    path = folder / "station.yaml"
    path.write_text(text, encoding="utf-8")
    return path
