"""SQLite failures as one clear :class:`StoreError` line each (full, locked, read-only, damaged)."""

from __future__ import annotations

import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from stationcheck.errors import StoreError

# Primary result codes (https://www.sqlite.org/rescode.html); extended codes carry them in the
# low byte.
SQLITE_PERM = 3
SQLITE_BUSY = 5
SQLITE_LOCKED = 6
SQLITE_READONLY = 8
SQLITE_IOERR = 10
SQLITE_CORRUPT = 11
SQLITE_FULL = 13
SQLITE_CANTOPEN = 14
SQLITE_NOTADB = 26

UNSAVED = "the events being written were not saved (everything committed before is kept)"


def describe(path: Path, action: str, exc: sqlite3.Error) -> str:
    code = getattr(exc, "sqlite_errorcode", None)
    primary = code & 0xFF if isinstance(code, int) else None
    name = getattr(exc, "sqlite_errorname", None) or type(exc).__name__
    where = f"step log {path}"
    if primary == SQLITE_FULL:
        return f"{where} is full (disk or size limit) while {action}; {UNSAVED}"
    if primary in (SQLITE_BUSY, SQLITE_LOCKED):
        return f"{where} is locked by another process while {action}; {UNSAVED}"
    if primary in (SQLITE_READONLY, SQLITE_PERM):
        return f"{where} is read-only while {action}; {UNSAVED}"
    if primary in (SQLITE_NOTADB, SQLITE_CORRUPT):
        return f"{where} is damaged or not a step log ({name}) while {action}"
    if primary == SQLITE_CANTOPEN:
        return f"{where} cannot be opened (missing folder or no permission) while {action}"
    if primary == SQLITE_IOERR:
        return f"{where}: disk I/O error ({name}) while {action}; {UNSAVED}"
    return f"{where}: {action} failed ({name}: {exc})"


@contextmanager
def store_errors(path: Path, action: str) -> Iterator[None]:
    """Turn SQLite errors raised inside into one-line :class:`StoreError`."""
    try:
        yield
    except sqlite3.Error as exc:
        raise StoreError(describe(path, action, exc)) from exc
