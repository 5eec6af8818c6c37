"""The review's queries: filters, orders, pages and counts, read-only beside a writer."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
from step_log_helpers import QUICK, RECORDED_AT_S

from stationcheck.store import MemoryStepLog, SqliteStepLog, StepLog, UnitQuery, UnitRow
from stationcheck.store.synthetic import UnitStream

UNITS = 90


SEED = 12  # a seed whose first 90 units hold every story (clean, retry, rework, scrapped, ...)


def fill(log: StepLog, units: int = UNITS, seed: int = SEED, first: int = 0) -> None:
    stream = UnitStream(seed)
    for index, (_, batches) in enumerate(stream.units(first + units)):
        if index >= first:
            log.append([e for b in batches for e in b], RECORDED_AT_S + 10.0 * index)


@pytest.fixture(scope="module")
def logs(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[StepLog, StepLog]]:
    path = tmp_path_factory.mktemp("queries") / "log.sqlite"
    sqlite, memory = SqliteStepLog(path, synchronous=QUICK), MemoryStepLog()
    fill(sqlite)
    fill(memory)
    yield sqlite, memory
    sqlite.close()


def everything(log: StepLog) -> list[UnitRow]:
    return list(log.units(UnitQuery(limit=10_000, order="serial")).rows)


def expected_serials(log: StepLog, keep: Callable[[UnitRow], bool]) -> list[str]:
    """Brute force over every unit, its steps and its alarms."""
    return sorted(u.serial for u in everything(log) if keep(u))


def failed_at(log: StepLog, zone: str) -> Callable[[UnitRow], bool]:
    return lambda u: any(s.position == zone and s.position_result == "NotOK"
                         for s in log.steps(u.serial))


def had_alarm(log: StepLog, code: str) -> Callable[[UnitRow], bool]:
    return lambda u: any(a.code == code for a in log.alarms(u.serial))


T0 = 1_700_000_000.0
QUERIES: list[tuple[str, dict[str, object], Callable[[StepLog], Callable[[UnitRow], bool]]]] = [
    ("all", {}, lambda log: lambda u: True),
    ("serial", {"serial": "DEMO-0000007"}, lambda log: lambda u: u.serial == "DEMO-0000007"),
    ("unknown serial", {"serial": "NOPE"}, lambda log: lambda u: False),
    ("prefix", {"serial_prefix": "DEMO-000001"},
     lambda log: lambda u: u.serial.startswith("DEMO-000001")),
    ("time range", {"from_s": T0 + 300.0, "to_s": T0 + 900.0, "time_basis": "t_s"},
     lambda log: lambda u: T0 + 300.0 <= u.started_t_s < T0 + 900.0),
    ("wall clock range", {"from_s": RECORDED_AT_S + 100.0, "to_s": RECORDED_AT_S + 300.0},
     lambda log: lambda u: RECORDED_AT_S + 100.0 <= u.started_at_s < RECORDED_AT_S + 300.0),
    ("OK", {"result": "OK"}, lambda log: lambda u: u.status == "OK"),
    ("NOK", {"result": "NOK"}, lambda log: lambda u: u.status == "NotOK"),
    ("aborted", {"result": "aborted"}, lambda log: lambda u: u.status == "NotDecidable"),
    ("reworked", {"result": "reworked"}, lambda log: lambda u: u.passes > 1),
    ("first time through", {"result": "first_time_through"},
     lambda log: lambda u: u.passes == 1 and u.status == "OK" and u.retries == 0),
    ("failed position", {"failed_position": "p3"}, lambda log: failed_at(log, "p3")),
    ("alarm", {"alarm_code": "wrong_position"}, lambda log: had_alarm(log, "wrong_position")),
    ("combined", {"result": "OK", "serial_prefix": "DEMO-00000"},
     lambda log: lambda u: u.status == "OK" and u.serial.startswith("DEMO-00000")),
    ("failed position, reworked", {"failed_position": "p3", "result": "reworked"},
     lambda log: lambda u: failed_at(log, "p3")(u) and u.passes > 1),
    ("alarm, event time", {"alarm_code": "wrong_position", "time_basis": "t_s",
                           "from_s": T0, "to_s": T0 + 1e7},
     lambda log: had_alarm(log, "wrong_position")),
    ("alarm and failed position", {"alarm_code": "wrong_position", "failed_position": "p3"},
     lambda log: lambda u: had_alarm(log, "wrong_position")(u) and failed_at(log, "p3")(u)),
]


@pytest.mark.parametrize(("fields", "keep"), [(f, k) for _, f, k in QUERIES],
                         ids=[name for name, _, _ in QUERIES])
@pytest.mark.parametrize("which", [0, 1], ids=["sqlite", "memory"])
def test_filters_match_brute_force(
    logs: tuple[StepLog, StepLog], which: int, fields: dict[str, object],
    keep: Callable[[StepLog], Callable[[UnitRow], bool]],
) -> None:
    log = logs[which]
    page = log.units(UnitQuery(limit=10_000, **fields))  # type: ignore[arg-type]
    expected = expected_serials(log, keep(log))
    assert sorted(u.serial for u in page.rows) == expected
    assert page.total == len(page.rows)
    assert expected or "serial" in fields or "failed_position" in fields and "alarm_code" in fields


def test_the_synthetic_mix_has_every_kind_of_unit(logs: tuple[StepLog, StepLog]) -> None:
    units = everything(logs[0])
    assert len(units) == UNITS
    assert {u.status for u in units} == {"OK", "NotOK", "NotDecidable"}
    assert any(u.reworked for u in units) and any(u.retries for u in units)
    assert any(not u.first_time_through for u in units if u.status == "OK")


def test_both_logs_give_the_same_rows(logs: tuple[StepLog, StepLog]) -> None:
    sqlite, memory = logs
    assert everything(sqlite) == everything(memory)
    for unit in everything(sqlite)[::7]:
        assert sqlite.steps(unit.serial) == memory.steps(unit.serial)
        assert sqlite.alarms(unit.serial) == memory.alarms(unit.serial)


PAGED: list[dict[str, object]] = [
    {}, {"result": "OK"}, {"alarm_code": "wrong_position"}, {"time_basis": "t_s"},
    {"failed_position": "p3", "time_basis": "t_s"},
]


@pytest.mark.parametrize("order", ["newest", "oldest", "serial"])
@pytest.mark.parametrize("which", [0, 1], ids=["sqlite", "memory"])
@pytest.mark.parametrize("fields", PAGED, ids=[str(sorted(f.items())) for f in PAGED])
def test_pages_cover_every_unit_once_in_order(
    logs: tuple[StepLog, StepLog], which: int, order: str, fields: dict[str, object]
) -> None:
    log = logs[which]
    whole = log.units(UnitQuery(limit=10_000, order=order, **fields)).rows  # type: ignore[arg-type]
    size = max(1, len(whole) // 7)
    by_keyset: list[UnitRow] = []
    after = None
    while True:
        page = log.units(UnitQuery(limit=size, order=order, after=after, **fields))  # type: ignore[arg-type]
        assert page.total == len(whole)
        by_keyset += page.rows
        after = page.next_after
        if after is None:
            break
    by_offset = [u for offset in range(0, len(whole), size)
                 for u in log.units(UnitQuery(limit=size, offset=offset, order=order,
                                              **fields)).rows]  # type: ignore[arg-type]
    assert whole and by_keyset == by_offset == list(whole)
    basis = "started_t_s" if fields.get("time_basis") == "t_s" else "started_at_s"
    keys = [u.serial if order == "serial" else (getattr(u, basis), u.serial) for u in whole]
    assert keys == sorted(keys, reverse=order == "newest")


def test_steps_and_alarms_are_in_log_order(logs: tuple[StepLog, StepLog]) -> None:
    for unit in everything(logs[0])[:20]:
        seqs = [s.seq for s in logs[0].steps(unit.serial)]
        assert seqs == sorted(seqs) and all(s.serial == unit.serial
                                            for s in logs[0].steps(unit.serial))


@pytest.mark.parametrize(("fields", "message"), [
    ({"limit": 0}, "limit"),
    ({"limit": 10_001}, "limit"),
    ({"offset": -1}, "offset"),
    ({"order": "random"}, "order"),
    ({"result": "maybe"}, "result"),
    ({"time_basis": "local"}, "time_basis"),
    ({"from_s": float("nan")}, "from_s"),
    ({"after": "[1, \"a\"]", "offset": 5}, "not both"),
])
def test_bad_queries_are_refused(fields: dict[str, object], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        UnitQuery(**fields)  # type: ignore[arg-type]


@pytest.mark.parametrize("token", ["not json", "[1, 2, 3]", "{}"])
def test_bad_page_tokens_are_refused(logs: tuple[StepLog, StepLog], token: str) -> None:
    with pytest.raises(ValueError, match="page token"):
        logs[0].units(UnitQuery(after=token))


def test_reader_sees_what_the_writer_commits(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path) as writer:
        fill(writer, units=3)
        with SqliteStepLog(path, readonly=True) as reader:
            assert reader.units().total == 3
            fill(writer, units=2, first=3)
            assert reader.units().total == 5
            newest = reader.units(UnitQuery(limit=1)).rows[0]
            assert newest == writer.unit(newest.serial)
            assert reader.open_unit() == writer.open_unit()


def test_both_logs_keep_the_protocol(logs: tuple[StepLog, StepLog]) -> None:
    assert all(isinstance(log, StepLog) for log in logs)


def test_station_alarms_in_a_time_range(logs: tuple[StepLog, StepLog]) -> None:
    sqlite = logs[0]
    assert isinstance(sqlite, SqliteStepLog)
    alarms = [a for u in everything(sqlite) for a in sqlite.alarms(u.serial)]
    assert len(alarms) >= 2, "the synthetic mix has alarms"
    for basis, clock in (("t_s", "t_s"), ("recorded_at", "recorded_at_s")):
        every = sorted(alarms, key=lambda a: (getattr(a, clock), a.seq))
        middle = getattr(every[len(every) // 2], clock)
        found = sqlite.station_alarms(middle, middle + 1e9, time_basis=basis)  # type: ignore[arg-type]
        assert list(found) == [a for a in every if getattr(a, clock) >= middle]
        assert sqlite.station_alarms(middle, middle + 1e9, limit=1,
                                     time_basis=basis) == found[:1]  # type: ignore[arg-type]
