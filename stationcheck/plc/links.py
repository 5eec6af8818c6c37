"""The signal links a station can use, by name: the config's ``plc.mode`` and ``run --link``.

A link factory takes plain :class:`LinkSettings` (no config model: this package does not import
the config) and returns a :class:`~stationcheck.plc.link.SignalLink`; the Modbus links import
pymodbus only when made. Adding a protocol: write its ``SignalLink`` in this package, add its
factory to :data:`LINKS`, and its name to the config schema's ``plc.mode`` (a test checks they
agree); ``docs/recipes.md``, "Adding a link".
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

from stationcheck.errors import ConfigError
from stationcheck.plc.address_map import address_map_from
from stationcheck.plc.link import ConsoleLink, SignalLink


@dataclass(frozen=True)
class LinkSettings:
    host: str = "127.0.0.1"
    port: int = 502
    device_id: int = 1
    timeout_ms: float = 50.0
    retries: int = 0
    address_map: Mapping[str, object] = field(default_factory=dict)  # config plc.address_map


LinkFactory = Callable[[LinkSettings], SignalLink]


def _console(settings: LinkSettings) -> SignalLink:
    return ConsoleLink()


def _modbus_client(settings: LinkSettings) -> SignalLink:
    from stationcheck.plc.modbus_client import ModbusClientLink

    return ModbusClientLink(
        settings.host,
        settings.port,
        device_id=settings.device_id,
        timeout_ms=settings.timeout_ms,
        retries=settings.retries,
        address_map=address_map_from(settings.address_map),
    )


def _modbus_server(settings: LinkSettings) -> SignalLink:
    from stationcheck.plc.modbus_server import ModbusServerLink

    return ModbusServerLink(
        settings.host,
        settings.port,
        device_id=settings.device_id,
        address_map=address_map_from(settings.address_map, server=True),
    )


LINKS: dict[str, LinkFactory] = {
    "console": _console,  # prints the signals; no PLC
    "client": _modbus_client,  # Modbus TCP: the station is the client of the PLC
    "server": _modbus_server,  # Modbus TCP: the station serves, the PLC reads and writes
}


def open_link(name: str, settings: LinkSettings) -> SignalLink:
    factory = LINKS.get(name)
    if factory is None:
        raise ConfigError(f"unknown PLC link {name!r}; known links: {', '.join(LINKS)}")
    return factory(settings)
