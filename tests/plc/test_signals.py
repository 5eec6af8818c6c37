from __future__ import annotations

import pytest

from stationcheck.plc.signals import (
    InputSignals,
    OutputSignals,
    alarm_number,
    decode_ascii,
    encode_ascii,
    serial_problem,
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


@pytest.mark.parametrize(
    ("words", "problem"),
    [
        (encode_ascii("PC-000123", 10), ""),
        ([0xFFFF] * 10, "all serial registers are 0xFFFF"),
        ([0x5043, 0xC3A9] + [0] * 8, "non-ASCII byte 0xC3"),
        ([0x5043, 0x0A41] + [0] * 8, "control character 0x0A"),
        ([0x507F] + [0] * 9, "control character 0x7F"),
    ],
)
def test_serial_problems_are_named(words: list[int], problem: str) -> None:
    assert serial_problem(words) == problem


def test_two_garbage_serials_never_read_the_same() -> None:
    assert decode_ascii([0xC3A9] + [0] * 9) != decode_ascii([0xC3A8] + [0] * 9)


def test_encoder_carries_result_status_event_and_unit_reason() -> None:
    from pathlib import Path

    from stationcheck.config import load_config
    from stationcheck.core.outputs import Guidance, Output
    from stationcheck.plc.signals import OutputEncoder

    plan = load_config(Path(__file__).resolve().parents[2] / "configs" /
                       "demo_station.yaml").to_plan()
    output = Output(t_s=1.0, tool_enabled=False, guidance=Guidance("unit_finished", None, "x"),
                    unit_status="nok", ended_by="check_failed",
                    result_status="rejected_not_credited", last_event="check_failed",
                    event_count=3)
    signals = OutputEncoder(plan).encode(output, heartbeat=1, unit_ack=2, result_ack=3)
    assert (signals.result_status, signals.event_code, signals.event_count,
            signals.unit_reason) == (3, 17, 3, 3)
    ok = Output(t_s=1.0, tool_enabled=False, guidance=Guidance("unit_finished", None, "x"),
                unit_status="ok", ended_by="completed", result_status="accepted")
    signals = OutputEncoder(plan).encode(ok, heartbeat=1, unit_ack=2, result_ack=3)
    assert (signals.result_status, signals.event_code, signals.unit_reason) == (1, 0, 0)
