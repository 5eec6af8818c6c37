"""The link registry: every link a config may name can be made, and only those."""

from __future__ import annotations

import typing

import pytest

from stationcheck.cli import build_parser
from stationcheck.config.schema import PlcSection
from stationcheck.errors import ConfigError
from stationcheck.plc.link import ConsoleLink, SignalLink
from stationcheck.plc.links import LINKS, LinkSettings, open_link
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.modbus_server import ModbusServerLink


def test_the_config_and_run_name_exactly_the_registered_links() -> None:
    modes = typing.get_args(PlcSection.model_fields["mode"].annotation)
    assert set(modes) == set(LINKS)
    run = build_parser()._subparsers._group_actions[0].choices["run"]  # type: ignore[union-attr]
    link = next(action for action in run._actions if action.dest == "link")
    assert tuple(link.choices) == tuple(LINKS)


@pytest.mark.parametrize(("name", "kind"), [("console", ConsoleLink),
                                             ("client", ModbusClientLink),
                                             ("server", ModbusServerLink)])
def test_each_link_is_made_by_name(name: str, kind: type[SignalLink]) -> None:
    link = open_link(name, LinkSettings(port=1502, timeout_ms=20.0))
    assert isinstance(link, kind)
    assert link.name


def test_an_unknown_link_is_a_config_error_naming_the_known_ones() -> None:
    with pytest.raises(ConfigError, match="unknown PLC link 'profinet'; known links: console, "
                                          "client, server"):
        open_link("profinet", LinkSettings())


def test_address_map_entries_reach_the_link() -> None:
    settings = LinkSettings(address_map={"tool_enable": {"table": "coil", "address": 40}})
    link = open_link("client", settings)
    assert isinstance(link, ModbusClientLink)
    assert link.address_map["tool_enable"].address == 40
