"""Full, locked, read-only, damaged, foreign and newer files: one clear StoreError line each, and
what was committed before stays readable."""

from __future__ import annotations

import os
import sqlite3
import subprocess
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from stationcheck.core.events import Event
from stationcheck.errors import StoreError
from stationcheck.store import SqliteStepLog, sqlite_errors
from stationcheck.store.log_schema import APPLICATION_ID, SCHEMA_VERSION
from tests.event_examples import alarm, unit_started


def started(serial: str, t_s: float = 1.0) -> list[Event]:
    return [unit_started(t_s, serial)]


def good_log(path: Path) -> None:
    with SqliteStepLog(path) as log:
        log.append(started("PC-1"), 100.0)


def garbage(path: Path) -> None:
    path.write_bytes(b"this is not a database, just some bytes\n" * 200)


def damaged_header(path: Path) -> None:
    good_log(path)
    with path.open("r+b") as file:
        file.write(b"\x00garbage header\x00" * 4)


def foreign(path: Path) -> None:
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY, amount REAL)")
    conn.commit()
    conn.close()


def newer(path: Path) -> None:
    good_log(path)
    conn = sqlite3.connect(path)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()


def folder(path: Path) -> None:
    path.mkdir()


# (how the file is made, expected words in the message or None when it opens fine)
FILES: list[tuple[str, Callable[[Path], None], str | None]] = [
    ("good", good_log, None),
    ("new file", lambda path: None, None),
    ("garbage", garbage, "damaged or not a step log"),
    ("damaged header", damaged_header, "damaged or not a step log"),
    ("another program's database", foreign, "another program"),
    ("newer schema", newer, f"newer than this stationcheck knows ({SCHEMA_VERSION})"),
    ("a folder", folder, "is a folder"),
]


@pytest.mark.parametrize(("make", "expected"), [(m, e) for _, m, e in FILES],
                         ids=[name for name, _, _ in FILES])
def test_opening_a_file(tmp_path: Path, make: Callable[[Path], None], expected: str | None) -> None:
    path = tmp_path / "log.sqlite"
    make(path)
    if expected is None:
        with SqliteStepLog(path) as log:
            assert log.connection.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
            assert log.connection.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL
        return
    with pytest.raises(StoreError) as caught:
        SqliteStepLog(path)
    message = str(caught.value)
    assert expected in message and "\n" not in message and str(path) in message
    assert caught.value.exit_code == 6


def test_newer_schema_keeps_its_events(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    newer(path)
    with pytest.raises(StoreError):
        SqliteStepLog(path)
    conn = sqlite3.connect(path)
    assert conn.execute("SELECT serial FROM events").fetchall() == [("PC-1",)]
    assert conn.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    conn.close()


def test_result_codes_match_sqlite() -> None:
    """Primary result codes as the sqlite3 module (and https://www.sqlite.org/rescode.html)
    define them."""
    for name in ("SQLITE_PERM", "SQLITE_BUSY", "SQLITE_LOCKED", "SQLITE_READONLY",
                 "SQLITE_IOERR", "SQLITE_CORRUPT", "SQLITE_FULL", "SQLITE_CANTOPEN",
                 "SQLITE_NOTADB"):
        assert getattr(sqlite_errors, name) == getattr(sqlite3, name), name


def test_full_disk_loses_only_the_failing_batch(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path) as log:
        log.append(started("PC-1"), 100.0)
        pages = log.connection.execute("PRAGMA page_count").fetchone()[0]
        log.connection.execute(f"PRAGMA max_page_count = {pages + 12}")
        big = [alarm(2.0, "PC-1", message="x" * 5000)] * 3
        with pytest.raises(StoreError) as caught:
            for attempt in range(20):
                log.append(big, 101.0 + attempt)
        message = str(caught.value)
        assert "is full" in message and "not saved" in message and "\n" not in message
        saved = log.events()
        assert saved[0].event == started("PC-1")[0]
        assert len(saved) > 1 and (len(saved) - 1) % len(big) == 0  # whole batches only
        assert len(log.alarms("PC-1")) == len(saved) - 1
        log.connection.execute("PRAGMA max_page_count = 1073741823")
        log.append(started("PC-2", 3.0), 200.0)
        assert log.unit("PC-2") is not None
    with SqliteStepLog(path, readonly=True) as reader:
        assert len(reader.events()) == len(saved) + 1


def test_locked_file_raises_and_keeps_what_was_saved(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path, busy_timeout_ms=50) as log:
        log.append(started("PC-1"), 100.0)
        other = sqlite3.connect(path, isolation_level=None)
        other.execute("BEGIN IMMEDIATE")  # another writer holds the write lock
        try:
            with pytest.raises(StoreError, match="locked by another process"):
                log.append(started("PC-2", 2.0), 101.0)
        finally:
            other.execute("ROLLBACK")
            other.close()
        assert [s.event.serial for s in log.events()] == ["PC-1"]
        log.append(started("PC-2", 2.0), 102.0)
        assert log.units().total == 2


@pytest.fixture
def read_only_file(tmp_path: Path) -> Iterator[Path]:
    """A log file the process cannot write: mode 0444, and immutable when running as root (root
    ignores mode bits)."""
    path = tmp_path / "log.sqlite"
    good_log(path)
    os.chmod(path, 0o444)
    immutable = os.geteuid() == 0
    if immutable and subprocess.run(["chattr", "+i", str(path)], check=False).returncode != 0:
        pytest.skip("running as root and chattr +i is not available here")
    try:
        yield path
    finally:
        if immutable:
            subprocess.run(["chattr", "-i", str(path)], check=True)
        os.chmod(path, 0o644)


def test_read_only_file_is_reported_and_still_readable(read_only_file: Path) -> None:
    with pytest.raises(StoreError, match="is read-only"):
        SqliteStepLog(read_only_file)
    with SqliteStepLog(read_only_file, readonly=True) as reader:
        assert [s.event.serial for s in reader.events()] == ["PC-1"]


def test_reader_cannot_write(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    good_log(path)
    with SqliteStepLog(path, readonly=True) as reader:
        with pytest.raises(StoreError, match="read-only"):
            reader.append(started("PC-2"), 1.0)
        with pytest.raises(StoreError, match="read-only"):
            reader.rebuild()
        with pytest.raises(sqlite3.OperationalError):
            reader.connection.execute("DELETE FROM events")


@pytest.mark.parametrize(("make", "expected"), [
    (lambda path: None, "does not exist"),
    (garbage, "damaged or not a step log"),
    (good_log, None),
])
def test_opening_for_reading(tmp_path: Path, make: Callable[[Path], None],
                             expected: str | None) -> None:
    path = tmp_path / "log.sqlite"
    make(path)
    if expected is None:
        with SqliteStepLog(path, readonly=True) as reader:
            assert reader.unit("PC-1") is not None
        return
    with pytest.raises(StoreError, match=expected):
        SqliteStepLog(path, readonly=True)


def test_unknown_synchronous_mode_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="synchronous"):
        SqliteStepLog(tmp_path / "log.sqlite", synchronous="EXTRA")  # type: ignore[arg-type]
