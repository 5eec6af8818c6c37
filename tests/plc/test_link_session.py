"""The input decoder under the link-session rule (stationcheck.plc.link_session)."""

from __future__ import annotations

import pytest

from stationcheck.core.observations import (
    LinkEvent,
    OperatorAck,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.plc.link_session import InputDecoder, SessionSettings, restarted
from stationcheck.plc.signals import InputSignals


def test_decoder_takes_baseline_then_edges_and_sequences() -> None:
    decoder = InputDecoder()
    assert decoder.decode(InputSignals(unit_sequence=4, serial="OLD", result_sequence=9),
                          0.0) == [UnitStarted(t_s=0.0, serial="OLD")]  # presented before start
    unit = InputSignals(unit_sequence=5, serial="PC-000001", result_sequence=9)
    assert decoder.decode(unit, 1.0) == [UnitStarted(t_s=1.0, serial="PC-000001")]
    assert decoder.decode(unit, 1.1) == []  # same sequence: nothing new
    running = InputSignals(unit_sequence=5, serial="PC-000001", result_sequence=9,
                           tool_running=True)
    assert decoder.decode(running, 2.0) == [ToolRunning(t_s=2.0, on=True)]
    result = InputSignals(unit_sequence=5, serial="PC-000001", result_sequence=10,
                          result_ok=False, torque_nm=4.5, angle_deg=20.0)
    found = decoder.decode(result, 3.0)
    assert found == [ToolRunning(t_s=3.0, on=False),
                     TighteningResult(t_s=3.0, ok=False, torque_nm=4.5, angle_deg=20.0,
                                      sequence=10)]
    assert (decoder.unit_ack, decoder.result_ack) == (5, 10)
    ack = InputSignals(unit_sequence=5, serial="PC-000001", result_sequence=10,
                       result_ok=False, torque_nm=4.5, angle_deg=20.0, operator_ack=True,
                       reset=True)
    assert decoder.decode(ack, 4.0) == [Reset(t_s=4.0, reason="PLC reset input"),
                                        OperatorAck(t_s=4.0)]
    assert decoder.decode(ack, 4.1) == []  # held bits act once


def test_decoder_ignores_unit_without_serial() -> None:
    decoder = InputDecoder()
    decoder.decode(InputSignals(), 0.0)
    assert decoder.decode(InputSignals(unit_sequence=1, serial=""), 1.0) == []
    assert decoder.unit_ack == 0  # not taken in: the serial is still missing
    assert decoder.decode(InputSignals(unit_sequence=1, serial="S1"), 1.5) == [
        UnitStarted(t_s=1.5, serial="S1")]
    assert decoder.decode(InputSignals(unit_sequence=2, serial="S2", rework=True), 2.0) == [
        UnitStarted(t_s=2.0, serial="S2", rework=True)]


@pytest.mark.parametrize(
    ("before", "after", "restart"),
    [(6, 7, False), (6, 6, False), (6, 0, True), (65535, 0, False), (6, 2, True),
     (0, 1, False), (1, 0, True), (40000, 5, False), (5, 40000, True)],
)
def test_restart_is_backwards_or_to_zero(before: int, after: int, restart: bool) -> None:
    assert restarted(before, after) is restart


def codes(found: list[object]) -> list[str]:
    return [o.code for o in found if isinstance(o, LinkEvent)]


def test_result_counter_back_to_zero_is_a_new_session_not_a_result() -> None:
    decoder = InputDecoder()
    decoder.decode(InputSignals(unit_sequence=5, serial="A", result_sequence=6), 0.0)
    found = decoder.decode(InputSignals(unit_sequence=5, serial="A", result_sequence=0), 1.0)
    assert codes(found) == ["plc_session_restart"]
    assert not any(isinstance(o, TighteningResult) for o in found)  # no phantom result
    assert (decoder.unit_ack, decoder.result_ack) == (5, 0)  # echoes re-synchronised
    found = decoder.decode(InputSignals(unit_sequence=5, serial="A", result_sequence=1), 2.0)
    assert [o.sequence for o in found if isinstance(o, TighteningResult)] == [1]


def test_plc_restart_with_counters_at_zero_never_ignores_a_unit() -> None:
    """Units counted 1..5 again after a restart are all taken, 5 (the old echo) included."""
    decoder = InputDecoder()
    decoder.decode(InputSignals(unit_sequence=5, serial="OLD-5", plc_liveness=70), 0.0)
    found = decoder.decode(InputSignals(unit_sequence=0, serial="", plc_liveness=0), 1.0)
    assert codes(found) == ["plc_session_restart"] and decoder.unit_ack == 0
    started = []
    for n in range(1, 6):
        found = decoder.decode(InputSignals(unit_sequence=n, serial=f"NEW-{n}",
                                            plc_liveness=n), 1.0 + n)
        started += [o.serial for o in found if isinstance(o, UnitStarted)]
        assert decoder.unit_ack == n
    assert started == [f"NEW-{n}" for n in range(1, 6)]


def test_restart_straight_to_a_presented_unit_takes_it() -> None:
    decoder = InputDecoder()
    decoder.decode(InputSignals(unit_sequence=5, serial="OLD"), 0.0)
    found = decoder.decode(InputSignals(unit_sequence=1, serial="NEW"), 1.0)
    assert codes(found) == ["plc_session_restart"]
    assert [o.serial for o in found if isinstance(o, UnitStarted)] == ["NEW"]
    assert decoder.unit_ack == 1


def test_liveness_restart_alone_resyncs_without_restarting_the_unit() -> None:
    decoder = InputDecoder()
    decoder.decode(InputSignals(unit_sequence=3, serial="U", plc_liveness=900), 0.0)
    found = decoder.decode(InputSignals(unit_sequence=3, serial="U", plc_liveness=0), 1.0)
    assert codes(found) == ["plc_session_restart"]
    assert not any(isinstance(o, UnitStarted) for o in found)
    assert decoder.sessions == 2


@pytest.mark.parametrize(
    ("serial", "problem", "pattern"),
    [("PC-\\xc3\\xa9", "non-ASCII byte 0xC3", None),
     ("", "all serial registers are 0xFFFF", None),
     ("pc-12", "does not match", r"PC-\d{6}")],
)
def test_a_bad_serial_refuses_the_unit_with_an_event(serial: str, problem: str,
                                                     pattern: str | None) -> None:
    decoder = InputDecoder(SessionSettings(serial_pattern=pattern) if pattern else None)
    decoder.decode(InputSignals(), 0.0)
    found = decoder.decode(InputSignals(unit_sequence=1, serial=serial,
                                        serial_problem="" if "match" in problem else problem),
                           1.0)
    assert codes(found) == ["serial_refused"]
    event = found[0]
    assert isinstance(event, LinkEvent) and problem in event.detail
    assert not any(isinstance(o, UnitStarted) for o in found)
    assert decoder.unit_ack == 1  # acknowledged: the PLC sees it was read (and refused)


def test_result_data_without_a_new_sequence_is_reported_once() -> None:
    decoder = InputDecoder()
    decoder.decode(InputSignals(result_sequence=4, result_ok=True, torque_nm=5.0), 0.0)
    changed = InputSignals(result_sequence=4, result_ok=False, torque_nm=3.0)
    assert decoder.decode(changed, 1.0) == []  # the sequence may follow in the next write
    assert codes(decoder.decode(changed, 1.1)) == ["result_without_sequence"]
    assert decoder.decode(changed, 1.2) == []
