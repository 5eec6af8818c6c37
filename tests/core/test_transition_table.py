"""The transition table is total, unambiguous and made of plain module functions."""

from __future__ import annotations

import inspect

import pytest

from stationcheck.core import handlers
from stationcheck.core.observations import OBSERVATION_TYPES
from stationcheck.core.transitions import PHASES, TABLE, TRANSITIONS, Row, _index, handler_for


def test_every_phase_and_input_kind_has_exactly_one_row() -> None:
    expected = {(phase, kind) for phase in PHASES for kind in OBSERVATION_TYPES}
    assert set(TRANSITIONS) == expected
    assert sum(len(row.phases) for row in TABLE) == len(expected)


def test_handlers_are_plain_functions_of_the_handlers_module() -> None:
    for row in TABLE:
        assert inspect.isfunction(row.handler)
        assert row.handler.__module__ == handlers.__name__
        assert getattr(handlers, row.handler.__name__) is row.handler


@pytest.mark.parametrize(
    ("phase", "kind", "handler"),
    [
        ("idle", "unit_started", handlers.start_unit),
        ("check", "unit_started", handlers.replace_unit),
        ("fasten", "tightening_result", handlers.take_result),
        ("pick", "tightening_result", handlers.reject_result),
        ("check", "check_verdict", handlers.judge_check),
        ("fasten", "check_verdict", handlers.ignore),
        ("confirm", "operator_ack", handlers.confirm_step),
        ("check", "operator_ack", handlers.fail_check),
        ("fasten", "operator_ack", handlers.ignore),
        ("idle", "abort", handlers.ignore),
        ("pick", "abort", handlers.abort_unit),
    ],
)
def test_lookup_picks_the_row_for_the_phase(phase: str, kind: str, handler: object) -> None:
    assert handler_for(phase, kind) is handler  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("rows", "message"),
    [
        (
            (
                Row(("idle",), "tick", handlers.ignore, ("same",)),
                Row(("idle",), "tick", handlers.ignore, ("same",)),
            ),
            "two rows for ('idle', 'tick')",
        ),
        (
            (Row(("idle",), "teleport", handlers.ignore, ("same",)),),
            "must be an observation kind, got 'teleport'",
        ),
    ],
)
def test_a_broken_table_is_refused_at_import(rows: tuple[Row, ...], message: str) -> None:
    with pytest.raises(ValueError, match=message.replace("(", r"\(").replace(")", r"\)")):
        _index(rows)
