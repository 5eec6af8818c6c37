from __future__ import annotations

import pytest

from stationcheck.core.observations import (
    OperatorAck,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.plc.signals import (
    InputDecoder,
    InputSignals,
    OutputSignals,
    alarm_number,
    decode_ascii,
    encode_ascii,
)


@pytest.mark.parametrize("serial", ["PC-000123", "A", "", "X" * 20, "AB CD-9"])
def test_serial_ascii_round_trip(serial: str) -> None:
    words = encode_ascii(serial, 10)
    assert len(words) == 10
    assert decode_ascii(words) == serial


def test_serial_byte_order_is_high_byte_first() -> None:
    # 'P' = 0x50, 'C' = 0x43 (ASCII, ISO/IEC 646)
    assert encode_ascii("PC", 1) == [0x5043]


def test_serial_too_long_is_refused() -> None:
    with pytest.raises(ValueError, match="longer than 20"):
        encode_ascii("X" * 21, 10)


@pytest.mark.parametrize(
    ("torque_nm", "angle_deg", "torque_word", "angle_word"),
    [
        (12.34, 35.7, 1234, 357),
        (0.0, 0.0, 0, 0),
        (655.35, -12.5, 65535, 0x10000 - 125),  # two's complement of -125
        (700.0, 4000.0, 65535, 0x7FFF),  # clamped to the register range
    ],
)
def test_scaled_integers(torque_nm: float, angle_deg: float, torque_word: int,
                         angle_word: int) -> None:
    words = InputSignals(torque_nm=torque_nm, angle_deg=angle_deg).words()
    assert words["torque"] == [torque_word]
    assert words["angle"] == [angle_word]
    back = InputSignals.from_words(words)
    assert back.torque_nm == round(torque_word * 0.01, 2)
    assert back.angle_deg == round((angle_word - (0x10000 if angle_word & 0x8000 else 0)) * 0.1, 1)


@pytest.mark.parametrize("bad", [{"heartbeat": 70000}, {"alarm_code": -1}, {"tool_enable": 1}])
def test_output_signals_are_validated(bad: dict[str, object]) -> None:
    with pytest.raises((ValueError, TypeError), match="OutputSignals"):
        OutputSignals(**bad)  # type: ignore[arg-type]


def test_alarm_number_is_the_lowest_active() -> None:
    assert alarm_number(()) == 0
    assert alarm_number(("camera_moved", "link_lost")) == 1
    assert alarm_number(("wrong_position",)) == 6


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
                       operator_ack=True, reset=True)
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
