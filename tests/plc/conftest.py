from __future__ import annotations

import socket
import time
from collections.abc import Callable, Iterator

import pytest

from stationcheck.plc.server_host import ServerHost


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def wait_until(condition: Callable[[], object], timeout_s: float = 5.0,
               what: str = "condition") -> None:
    """Polls ``condition`` until it holds; fails the test after ``timeout_s``."""
    deadline = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out after {timeout_s} s waiting for {what}")
        time.sleep(0.002)


class PacketLog:
    """Raw Modbus TCP frames as the server received them (MBAP header + PDU)."""

    def __init__(self) -> None:
        self.received: list[bytes] = []

    def __call__(self, sending: bool, packet: bytes) -> None:
        if not sending:
            self.received.append(bytes(packet))

    def pdus(self) -> list[bytes]:
        return [packet[7:] for packet in self.received]


@pytest.fixture
def packets() -> PacketLog:
    return PacketLog()


@pytest.fixture
def server(packets: PacketLog) -> Iterator[ServerHost]:
    host = ServerHost("127.0.0.1", free_port(), on_packet=packets).start()
    try:
        yield host
    finally:
        host.stop()
