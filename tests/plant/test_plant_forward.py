"""Forwarding to a real PostgreSQL server (Debian's postgresql 15, a throwaway cluster): every
event arrives once and in order, whatever happens to the connection. The reference for "the
same events" is PostgreSQL's own md5() over the stored rows against Python's hashlib over the
station's SQLite log."""

from __future__ import annotations

import shutil
import threading
from pathlib import Path
from typing import Any

from plant_helpers import (
    GatedForwarder,
    Station,
    add_station,
    admin_connection,
    central_digest,
    forwarder,
    local_digest,
    wait_until,
)

from stationcheck.plant.forwarder import Backoff, Forwarder
from stationcheck.plant.throwaway import Cluster
from tests.event_examples import alarm


def test_demo_log_forwarded_twice_arrives_once(demo_log: Path, station: Station, admin: Any,
                                               tmp_path: Path) -> None:
    before = demo_log.read_bytes()
    first = forwarder(demo_log, station, batch_events=50)
    try:
        sent = first.forward_once()
    finally:
        first.close()
    count, digest = local_digest(demo_log)
    assert sent == count > 100
    assert central_digest(admin, station.station_id) == (count, digest, True)
    assert first.status.lag_events == 0 and first.status.server_seq == count
    again = forwarder(demo_log, station)  # a restarted station: resumes from the server's mark
    try:
        assert again.forward_once() == 0
    finally:
        again.close()
    assert central_digest(admin, station.station_id) == (count, digest, True)
    assert demo_log.read_bytes() == before  # forwarding never changes the local log


def test_server_down_mid_forward(pg: Cluster, station: Station, tmp_path: Path) -> None:
    """The station keeps logging while the server is stopped; after the restart every event is
    there once, in order."""
    from stationcheck.store.sqlite_log import SqliteStepLog

    log_path = tmp_path / "station.sqlite"
    writer = SqliteStepLog(log_path, synchronous="OFF", station_id=station.station_id)
    def log_event(i: int) -> None:
        writer.append([alarm(float(i), None, code="demo", subject=str(i))], 1.7e9 + i)

    for i in range(2000):
        log_event(i)
    fwd = GatedForwarder(log_path, station.station_id, station.url, station.password_file,
                         batch_events=100, poll_s=0.05, backoff=Backoff(first_s=0.05, max_s=0.2))
    stop = threading.Event()
    thread = threading.Thread(target=fwd.run, args=(stop,), daemon=True)
    thread.start()
    try:
        assert fwd.first_batch_sent.wait(20)
        pg.stop("fast")  # mid-forward: 100 of 2,000 events are on the server
        fwd.server_stopped.set()
        wait_until(lambda: fwd.status.server_seq == 100)
        for i in range(2000, 2500):  # the station keeps logging with the server away
            log_event(i)
        wait_until(lambda: not fwd.status.connected and fwd.status.failures > 0)
        assert fwd.status.lag_events > 0 and fwd.status.last_error
        pg.start()
        wait_until(lambda: fwd.status.server_seq == 2500, timeout_s=30.0)
    finally:
        stop.set()
        thread.join(10)
        writer.close()
    count, digest = local_digest(log_path)
    assert count == 2500
    with admin_connection(pg) as admin:
        assert central_digest(admin, station.station_id) == (count, digest, True)
    assert fwd.status.lag_events == 0 and fwd.status.lag_s == 0.0


def test_two_stations_forward_at_once(pg: Cluster, admin: Any, tmp_path: Path,
                                      demo_log: Path) -> None:
    stations = [add_station(pg, admin, line="line-2") for _ in range(2)]
    logs = []
    for n, _ in enumerate(stations):
        copy = tmp_path / f"station-{n}.sqlite"
        shutil.copy(demo_log, copy)
        logs.append(copy)
    forwarders = [forwarder(log, s, batch_events=20) for log, s in zip(logs, stations,
                                                                        strict=True)]
    sent: list[int] = []

    def forward_all(f: Forwarder) -> None:
        try:
            sent.append(f.forward_once())
        finally:
            f.close()

    threads = [threading.Thread(target=forward_all, args=(f,)) for f in forwarders]
    for t in threads:
        t.start()
    for t in threads:
        t.join(30)
    count, digest = local_digest(demo_log)
    assert sent == [count, count]
    for s in stations:
        assert central_digest(admin, s.station_id) == (count, digest, True)


def test_log_of_another_station_is_refused(station: Station, tmp_path: Path) -> None:
    import pytest

    from stationcheck.errors import StoreError
    from stationcheck.store.sqlite_log import SqliteStepLog

    log_path = tmp_path / "other.sqlite"
    with SqliteStepLog(log_path, station_id="someone-else") as log:
        log.append([alarm(0.0, None, code="x")], 1.7e9)
    fwd = forwarder(log_path, station)
    with pytest.raises(StoreError, match="someone-else"):
        fwd.forward_once()
    fwd.close()


def test_forward_command_beside_a_run(demo_log: Path, station: Station, admin: Any,
                                      tmp_path: Path, monkeypatch: Any) -> None:
    """``forward`` as ``run --forward-to`` starts it: a child process reporting its status;
    the station id comes from the config's plant section."""
    from plant_helpers import station_config

    from stationcheck.plant.supervisor import ForwardChild

    log = tmp_path / "log.sqlite"
    shutil.copy(demo_log, log)
    config = station_config(tmp_path, station.station_id, log)
    monkeypatch.delenv("STATIONCHECK_PG_PASSWORD", raising=False)
    child = ForwardChild(config, station.url, password_file=station.password_file)
    try:
        wait_until(lambda: (s := child.status) is not None and s.connected
                   and s.lag_events == 0, timeout_s=30.0)
    finally:
        assert child.stop() in (0, -15)
    count, digest = local_digest(log)
    assert central_digest(admin, station.station_id) == (count, digest, True)
    assert f"server at seq {count}" in child.line()
