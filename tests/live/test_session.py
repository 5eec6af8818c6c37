from __future__ import annotations

import re
from pathlib import Path

import pytest

from stationcheck.cli import main
from stationcheck.config import load_config
from stationcheck.live.session import LiveSettings, link_limits, make_link
from stationcheck.plc.link import ConsoleLink
from stationcheck.plc.modbus_client import ModbusClientLink
from stationcheck.plc.modbus_server import ModbusServerLink
from stationcheck.sources.kinds import parse_source

REPO = Path(__file__).resolve().parents[2]
CONFIG = REPO / "configs" / "demo_station.yaml"
VIDEO = REPO / "sample_video" / "demo_station.mp4"


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("0", 0),
        ("12", 12),
        ("rtsp://cam.local/stream", "rtsp://cam.local/stream"),
        ("http://10.0.0.5/video", "http://10.0.0.5/video"),
        ("clip.mp4", Path("clip.mp4")),
        ("-1", Path("-1")),
    ],
)
def test_parse_source(text: str, expected: object) -> None:
    assert parse_source(text) == expected


def test_make_link_by_mode() -> None:
    config = load_config(CONFIG)
    assert isinstance(make_link(config, LiveSettings(CONFIG, link="console")), ConsoleLink)
    client = make_link(config, LiveSettings(CONFIG, link="client", port=1502, timeout_ms=20))
    assert isinstance(client, ModbusClientLink)
    assert (client.host, client.port, client.timeout_ms) == ("127.0.0.1", 1502, 20)
    server = make_link(config, LiveSettings(CONFIG, link="server", port=1503))
    assert isinstance(server, ModbusServerLink)
    assert server.address_map["tool_running"].table == "coil"  # the PLC writes input bits
    assert server.host.unit_ids == frozenset({0, 1, 255})  # the usual Modbus TCP unit ids too


def test_link_timeout_covers_a_blocked_request() -> None:
    config = load_config(CONFIG)  # timeout_ms 50, retries 0
    limits = link_limits(config)
    assert limits.link_timeout_s == pytest.approx(0.2)  # + one 50 ms link cycle
    assert limits.frame_timeout_s <= 0.08
    assert link_limits(config, timeout_ms=100).link_timeout_s == pytest.approx(0.35)


@pytest.mark.skipif(not VIDEO.is_file(), reason="no sample video")
def test_run_command_dry_run_with_console_link(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(
        [
            "run",
            "--config",
            str(CONFIG),
            "--source",
            str(VIDEO),
            "--link",
            "console",
            "--log",
            str(tmp_path / "log.sqlite"),
            "--frames",
            "20",
            "--no-pace",
        ]
    )
    out = capsys.readouterr().out
    assert code == 0
    assert out.startswith("Safety: ")
    found = re.search(r"run ended: (\d+) frames", out)
    assert found is not None and 1 <= int(found.group(1)) <= 20  # unpaced: the grabber may drop
    assert "tool enable written off" in out
    assert out.splitlines()[1].startswith("Privacy: The camera films the people")
    assert out.splitlines()[-1] == f"no unit ended; step log: {tmp_path / 'log.sqlite'}"
    assert (tmp_path / "log.sqlite").is_file()


def test_run_counts_the_units_it_ended_in_shown_words() -> None:
    from stationcheck.commands.run import UnitCount
    from stationcheck.core.observations import Tick
    from stationcheck.pipeline.decision_core import DecisionStep
    from tests.event_examples import unit_ended

    count = UnitCount()
    assert count.words() == "no unit ended"
    for result in ("OK", "NotOK", "OK", "NotDecidable"):  # as the step log keeps them
        event = unit_ended(1.0, "U-1", result=result)
        count.on_step(DecisionStep(Tick(t_s=1.0), None, (event,)))  # type: ignore[arg-type]
    assert count.words() == "4 units ended (2 OK, 1 NOK, 1 aborted)"


def test_run_command_bad_config_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(["run", "--config", str(tmp_path / "missing.yaml"), "--link", "console"])
    err = capsys.readouterr().err
    assert code != 0
    assert err.count("\n") == 1 and "Traceback" not in err
    assert "missing.yaml" in err


def test_check_and_run_refuse_the_same_overlapping_address(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from stationcheck.errors import ConfigError

    text = CONFIG.read_text(encoding="utf-8")
    assert "\nplc:\n" in text
    (tmp_path / "demo_station").symlink_to(CONFIG.parent / "demo_station")  # its reference
    bad = tmp_path / "station.yaml"
    bad.write_text(
        text.replace(
            "\nplc:\n",
            "\nplc:\n  address_map:\n    step_number: {table: holding_register, address: 0}\n",
            1,
        ),
        encoding="utf-8",
    )
    assert main(["check", str(bad)]) == 1
    printed = capsys.readouterr()
    assert (
        "plc.address_map.step_number.address: holding_register 0 is taken by both "
        "step_number and heartbeat" in printed.out + printed.err
    )
    with pytest.raises(ConfigError, match="taken by both step_number and heartbeat"):
        make_link(load_config(bad), LiveSettings(bad, link="client"))


def test_worker_settings_watch_the_plc_liveness_and_check_serials() -> None:
    from stationcheck.live.session import worker_settings

    settings = worker_settings(load_config(CONFIG))
    assert settings.liveness_timeout_s == pytest.approx(0.5)  # the default plc.liveness_timeout_ms
    assert settings.session.serial_pattern == r"[\x20-\x7e]+"


@pytest.mark.parametrize("source", ["missing.mp4", "not_a_video.mp4"])
def test_run_on_a_source_that_cannot_be_opened_exits_3_with_one_line(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    source: str,
) -> None:
    (tmp_path / "not_a_video.mp4").write_text("this is not a video\n")
    code = main(
        [
            "run",
            "--config",
            str(CONFIG),
            "--source",
            str(tmp_path / source),
            "--link",
            "console",
            "--log",
            str(tmp_path / "log.sqlite"),
        ]
    )
    err = capsys.readouterr().err
    assert code == 3
    assert err.count("\n") == 1 and "Traceback" not in err
    assert "cannot open the frame source" in err and source in err


@pytest.mark.parametrize(
    ("host", "said"),
    [
        ("127.0.0.1", "seen on this PC only"),
        ("0.0.0.0", "listens on 0.0.0.0: anyone on that network"),
    ],
)
def test_run_says_who_sees_the_operator_screens_picture(host: str, said: str) -> None:
    import argparse

    from stationcheck.web.operator.options import audience_words

    assert said in audience_words(argparse.Namespace(screen_host=host))
