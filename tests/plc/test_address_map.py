from __future__ import annotations

import pytest

from stationcheck.errors import ConfigError
from stationcheck.plc.address_map import (
    SIGNAL_NAMES,
    address_map_from,
    default_address_map,
    markdown_table,
)


def test_default_map_has_every_signal_once_without_overlap() -> None:
    amap = address_map_from({})
    assert tuple(amap.signals) == SIGNAL_NAMES
    used = [(s.table, a) for s in amap.signals.values() for a in range(s.address, s.address + s.count)]
    assert len(used) == len(set(used))
    assert amap["tool_enable"].table == "coil" and amap["tool_enable"].address == 0
    assert amap["serial"].count == 10


def test_markdown_table_lists_every_signal() -> None:
    table = markdown_table()
    for name in SIGNAL_NAMES:
        assert f"| {name} |" in table
    assert "| serial | PLC -> station | holding_register | 18-27 | 10 |" in table


@pytest.mark.parametrize(
    ("overrides", "problem"),
    [
        ({"tool_enable": {"table": "coil", "address": 100}}, None),
        ({"tool_running": {"table": "coil", "address": 5}}, None),
        ({"torque": {"table": "input_register", "address": 40}}, None),
        ({"tool_enable": {"table": "holding_register", "address": 100}}, "table: must be"),
        ({"heartbeat": {"table": "input_register", "address": 3}}, "table: must be"),
        ({"serial": {"table": "holding_register", "address": 40, "count": 4}}, "count: must be 10"),
        ({"nonsense": {"table": "coil", "address": 1}}, "unknown signal"),
        ({"heartbeat": {"table": "holding_register", "address": 5}}, "heartbeat.address: holding_register 5 is taken by both rework_mask and heartbeat"),
        ({"alarm_code": {"table": "holding_register", "address": 20}}, "alarm_code.address: holding_register 20 is taken by both serial and alarm_code"),
    ],
)
def test_overrides_are_checked(overrides: dict[str, dict[str, object]],
                               problem: str | None) -> None:
    if problem is None:
        amap = address_map_from(overrides)
        for name, entry in overrides.items():
            assert amap[name].table == entry["table"]
            assert amap[name].address == entry["address"]
        assert amap != default_address_map()
    else:
        with pytest.raises(ConfigError, match=problem):
            address_map_from(overrides)


def test_config_entries_are_accepted() -> None:
    from stationcheck.config.schema import AddressEntry

    amap = address_map_from({"reset": AddressEntry(table="discrete_input", address=9),
                             "serial": AddressEntry(table="holding_register", address=40)})
    assert amap["reset"].address == 9
    assert (amap["serial"].address, amap["serial"].count) == (40, 10)  # count left out
    with pytest.raises(ConfigError, match="count: must be 10"):
        address_map_from({"serial": AddressEntry(table="holding_register", address=40, count=4)})


@pytest.mark.parametrize(
    ("overrides", "problem"),
    [({}, None),
     ({"reset": {"table": "coil", "address": 40}}, None),
     ({"reset": {"table": "discrete_input", "address": 2}}, "table: must be"),
     ({"torque": {"table": "input_register", "address": 30}}, "table: must be")],
)
def test_server_mode_inputs_must_be_writable_by_the_plc(
        overrides: dict[str, dict[str, object]], problem: str | None) -> None:
    if problem is None:
        amap = address_map_from(overrides, server=True)
        assert {amap[n].table for n in ("tool_running", "operator_ack", "reset")} == {"coil"}
    else:
        with pytest.raises(ConfigError, match=problem):
            address_map_from(overrides, server=True)
