"""Helpers of the plant database's tests (plain functions; the fixtures are in conftest.py)."""

from __future__ import annotations

import hashlib
import itertools
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from stationcheck.plant.forwarder import Forwarder
from stationcheck.plant.throwaway import ADMIN_PASSWORD, Cluster

REPO = Path(__file__).resolve().parents[2]
SAMPLE = REPO / "sample_video"
STATION_PASSWORD = "station-secret-for-tests"
_numbers = itertools.count(1)


def _write_secret(cluster: Cluster, name: str, text: str) -> Path:
    path = cluster.folder / f"{name}.secret"
    path.write_text(text + "\n")
    return path


def admin_connection(pg: Cluster) -> Any:
    from stationcheck.plant import connect

    return connect.connect(pg.url(), password_file=_write_secret(pg, "admin", ADMIN_PASSWORD))


@dataclass(frozen=True)
class Station:
    station_id: str
    role: str
    url: str
    password_file: Path


def add_station(pg: Cluster, admin: Any, line: str = "line-1") -> Station:
    from stationcheck.plant import plant_schema

    station_id = f"cover-{next(_numbers)}"
    role = plant_schema.add_station(admin, station_id, line, "demo-plant",
                              role_password=STATION_PASSWORD)
    return Station(station_id, role, pg.url(role),
                   _write_secret(pg, "station", STATION_PASSWORD))


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


def wait_until(condition: Callable[[], bool], timeout_s: float = 20.0) -> None:
    deadline = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError("condition not met within the deadline")
        time.sleep(0.01)


def forwarder(log: Path, station: Station, **options: Any) -> Forwarder:
    return Forwarder(log, station.station_id, station.url, station.password_file, **options)


class GatedForwarder(Forwarder):
    """Holds after its first batch until the test has stopped the server: a stop that is
    certainly in the middle of forwarding."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.first_batch_sent = threading.Event()
        self.server_stopped = threading.Event()

    def _send(self, rows: list[tuple[Any, ...]]) -> int:
        mark = super()._send(rows)
        if not self.first_batch_sent.is_set():
            self.first_batch_sent.set()
            self.server_stopped.wait(20)
        return mark
