"""Retention: old evidence images and old resolved units go; open and unreleased units stay."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from step_log_helpers import QUICK, sequencer_batches, table_rows

from stationcheck.core.events import Event
from stationcheck.store import SqliteStepLog
from stationcheck.store.retention import SECONDS_PER_DAY, apply_retention, with_evidence
from stationcheck.store.synthetic import POSITIONS, StationScript
from tests.event_examples import alarm

NOW_S = 1_760_000_000.0
OLD_S = NOW_S - 40 * SECONDS_PER_DAY
NEW_S = NOW_S - 1 * SECONDS_PER_DAY


def still_open() -> StationScript:
    script = StationScript(200.0).start("OLD-OPEN").frames(None, 100).pick("bin_gasket")
    return script.pick("bin_cover").fasten(POSITIONS[:2], {})


# unit -> (script, recorded at); the sequencer runs once per module
UNITS = {
    "OLD-OK": (lambda: StationScript(0.0).unit("OLD-OK", {}), OLD_S),
    "OLD-NOK": (lambda: StationScript(100.0).unit("OLD-NOK", {"p3": 2}), OLD_S),
    "NEW-OK": (lambda: StationScript(3.0e6).unit("NEW-OK", {}), NEW_S),
    "OLD-OPEN": (still_open, OLD_S),
}


@pytest.fixture(scope="module")
def unit_batches() -> dict[str, list[tuple[Event, ...]]]:
    return {serial: sequencer_batches(make())[0] for serial, (make, _) in UNITS.items()}


def add_unit(log: SqliteStepLog, batches: list[tuple[Event, ...]], recorded_at_s: float,
             evidence: Path) -> list[Path]:
    """Append the unit's batches; tightening results get an evidence image file each."""
    images: list[Path] = []
    for batch in batches:
        events = []
        for event in batch:
            if event.kind == "tightening_result":
                image = evidence / f"{event.serial}-{event.zone}-{len(images)}.png"
                image.write_bytes(b"demo evidence crop")
                images.append(image)
                event = with_evidence(event, image)
            events.append(event)
        log.append(events, recorded_at_s)
    return images


@pytest.fixture
def station(
    tmp_path: Path, unit_batches: dict[str, list[tuple[Event, ...]]]
) -> Iterator[tuple[SqliteStepLog, dict[str, list[Path]]]]:
    evidence = tmp_path / "evidence"
    evidence.mkdir()
    log = SqliteStepLog(tmp_path / "log.sqlite", synchronous=QUICK)
    images = {}
    for serial, (_, recorded_at_s) in UNITS.items():
        images[serial] = add_unit(log, unit_batches[serial], recorded_at_s, evidence)
        if serial == "OLD-NOK":
            log.append([alarm(150.0, None, code="link_lost", message="demo")], OLD_S)
    yield log, images
    log.close()


def test_evidence_paths_are_recorded(station: tuple[SqliteStepLog, dict[str, list[Path]]]) -> None:
    log, images = station
    recorded = [s.evidence_path for s in log.steps("OLD-OK") if s.kind == "fasten"]
    assert recorded == [str(p) for p in images["OLD-OK"]] and len(recorded) == 6


def test_old_evidence_files_go_rows_stay(
    station: tuple[SqliteStepLog, dict[str, list[Path]]], tmp_path: Path
) -> None:
    log, images = station
    events_before = len(log.events())
    report = apply_retention(log, retention_days=30, now_s=NOW_S)
    old = images["OLD-OK"] + images["OLD-NOK"] + images["OLD-OPEN"]
    assert report.evidence_files_removed == len(old) and report.units_removed == 0
    assert not any(p.exists() for p in old) and all(p.exists() for p in images["NEW-OK"])
    assert len(log.events()) == events_before
    again = apply_retention(log, retention_days=30, now_s=NOW_S)
    assert (again.evidence_files_removed, again.evidence_files_missing) == (0, len(old))


@pytest.mark.parametrize(("keep_unreleased", "gone", "kept"), [
    (True, {"OLD-OK"}, {"OLD-NOK", "OLD-OPEN", "NEW-OK"}),
    (False, {"OLD-OK", "OLD-NOK"}, {"OLD-OPEN", "NEW-OK"}),
])
def test_old_resolved_units_go_with_their_events(
    station: tuple[SqliteStepLog, dict[str, list[Path]]], keep_unreleased: bool,
    gone: set[str], kept: set[str],
) -> None:
    log, _ = station
    open_before = log.open_unit()
    counts = {s: len(log.events(serial=s)) for s in gone}
    report = apply_retention(log, 30, NOW_S, evidence=False, rows=True,
                             keep_unreleased=keep_unreleased)
    assert report.units_removed == len(gone)
    assert report.events_removed == sum(counts.values()) + 1  # + the old station alarm
    assert {u.serial for u in log.units().rows} == kept
    for serial in gone:
        assert log.events(serial=serial) == () and log.steps(serial) == ()
    assert all(s.event.serial is not None for s in log.events())
    assert log.open_unit() == open_before is not None
    rows = table_rows(log.path)
    log.rebuild()
    assert table_rows(log.path) == rows  # what is left is still exactly what its events say


def test_retention_on_event_time(station: tuple[SqliteStepLog, dict[str, list[Path]]]) -> None:
    """On ``t_s``: the units started at 0..400 s are old against a 'now' of 1000 s."""
    log, _ = station
    report = apply_retention(log, 500.0 / SECONDS_PER_DAY, 1000.0, basis="t_s", evidence=False,
                             rows=True)
    assert report.units_removed == 1 and log.unit("OLD-OK") is None
    assert log.unit("NEW-OK") is not None  # started at 3e6 s


@pytest.mark.parametrize("days", [0.0, -1.0, float("nan")])
def test_bad_retention_limits_are_refused(
    station: tuple[SqliteStepLog, dict[str, list[Path]]], days: float
) -> None:
    with pytest.raises(ValueError, match="retention_days"):
        apply_retention(station[0], days, NOW_S)


def test_retention_needs_a_writer(station: tuple[SqliteStepLog, dict[str, list[Path]]]) -> None:
    with (SqliteStepLog(station[0].path, readonly=True) as reader,
          pytest.raises(ValueError, match="opened for writing")):
        apply_retention(reader, 30, NOW_S)
