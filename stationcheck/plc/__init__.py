"""PLC signals: the address map, the signal link edge (Modbus TCP client, console, in-memory
fake), the link worker thread that keeps PLC I/O off the frame loop, and a station simulator.

Enable/inhibit is an error-proofing aid for quality, not a safety function.
"""

from __future__ import annotations

from stationcheck.plc.address_map import AddressMap, address_map_from, default_address_map
from stationcheck.plc.link import ConsoleLink, MemoryLink, SignalLink
from stationcheck.plc.signals import InputSignals, OutputSignals

__all__ = [
    "AddressMap",
    "ConsoleLink",
    "InputSignals",
    "MemoryLink",
    "OutputSignals",
    "SignalLink",
    "address_map_from",
    "default_address_map",
]
