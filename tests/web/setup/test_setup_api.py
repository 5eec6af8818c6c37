"""The setup screen's JSON API on a real server: load and save without loss, live checking,
the bolt-circle helper, paths kept inside the setup folder, the access token, teaching and
the dry run."""

from __future__ import annotations

import json
import urllib.parse
from pathlib import Path

import pytest
import yaml

from tests.web.setup.conftest import DEMO_INPUTS, ServerFactory

CONFIG = "configs/demo_station.yaml"


def test_load_then_save_unchanged_keeps_the_file_byte_for_byte(
        setup_server: ServerFactory, workspace: Path) -> None:
    before = (workspace / CONFIG).read_text(encoding="utf-8")
    client = setup_server()
    status, state = client.call("GET", "/api/state")
    assert status == 200 and state["config_path"] == CONFIG
    status, saved = client.call("POST", "/api/save", {"data": state["data"]})
    assert status == 200 and saved["path"] == CONFIG
    assert (workspace / CONFIG).read_text(encoding="utf-8") == before


def test_check_places_each_finding_on_its_step_and_zone(setup_server: ServerFactory) -> None:
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    data["steps"][0]["zone"] = "bin_gaskit"
    data["zones"][7]["polygon"] = [[490, 150], [618, 150]]
    status, check = client.call("POST", "/api/check", {"data": data})
    assert status == 200 and not check["ok"]
    where = {tuple(f["where"][:2]): f for f in check["findings"]}
    assert "did you mean 'bin_gasket'" in where[("steps", 0)]["message"]
    assert where[("zones", 7)]["severity"] == "error"
    # zones are still drawn, numbered in tightening order (screw_4 is tightened second)
    numbers = {z["id"]: (z["number"], z["of"]) for z in check["zones"]}
    assert numbers["screw_4"] == (2, 6) and numbers["bin_cover"] == (None, None)


@pytest.mark.parametrize(("count", "expected"), [
    # ASME PCC-1 legacy cross pattern for 8 bolts (from memory): 1-5-3-7-2-6-4-8
    (8, ["b1", "b5", "b3", "b7", "b2", "b6", "b4", "b8"]),
    # 6 bolts go round in opposite pairs, as the config's own documentation says: 1-4-2-5-3-6
    (6, ["b1", "b4", "b2", "b5", "b3", "b6"]),
])
def test_bolt_circle_from_centre_and_one_bolt(setup_server: ServerFactory, count: int,
                                              expected: list[str]) -> None:
    client = setup_server()
    status, out = client.call("POST", "/api/bolt-circle", {
        "centre_px": [320, 215], "first_px": [320, 147], "count": count, "zone_size_px": 34,
        "id_prefix": "b"})
    assert status == 200
    assert out["cross_order"] == expected
    assert out["radius_px"] == 68 and out["start_angle_deg"] == -90
    first = out["zones"][0]["polygon"]
    assert sum(p[0] for p in first) / 8 == pytest.approx(320, abs=0.1)
    assert sum(p[1] for p in first) / 8 == pytest.approx(147, abs=0.1)


@pytest.mark.parametrize("body", [
    {"centre_px": [320, 215], "first_px": [320, 215], "count": 6},
    {"centre_px": [320, 215], "first_px": [320, 147], "count": 1},
    {"centre_px": "middle", "first_px": [320, 147], "count": 6},
])
def test_bolt_circle_refuses_bad_input(setup_server: ServerFactory, body: dict) -> None:  # type: ignore[type-arg]
    status, out = setup_server().call("POST", "/api/bolt-circle", body)
    assert status == 400 and out["error"]


def _q(**kwargs: str) -> str:
    return urllib.parse.urlencode(kwargs)


@pytest.mark.parametrize(("method", "path", "body", "status"), [
    ("GET", "/api/reference-image?" + _q(path="demo_station/reference.png"), None, 200),
    ("GET", "/api/reference-image?" + _q(path="../../../../etc/passwd"), None, 403),
    ("GET", "/api/reference-image?" + _q(path="/etc/hostname"), None, 403),
    ("GET", "/api/reference-image?" + _q(path="demo_station.yaml"), None, 403),
    ("GET", "/api/teach-image?" + _q(reference="demo_station/reference.png", zone="locking_pin",
                                     file="present-001.png"), None, 200),
    ("GET", "/api/teach-image?" + _q(reference="demo_station/reference.png", zone="locking_pin",
                                     file="../../demo_station.yaml"), None, 403),
    ("GET", "/api/teach-image?" + _q(reference="demo_station/reference.png", zone="..",
                                     file="present-001.png"), None, 403),
    ("GET", "/api/teach-image?" + _q(reference="../../../../tmp/x.png", zone="locking_pin",
                                     file="present-001.png"), None, 403),
    ("GET", "/api/video-info?" + _q(path="../../../../etc/passwd"), None, 403),
    ("GET", "/%2e%2e/%2e%2e/etc/passwd", None, 403),
    ("POST", "/api/save", {"path": "../../outside.yaml"}, 403),
    ("POST", "/api/save", {"path": "/tmp/elsewhere.yaml"}, 403),
    ("POST", "/api/save", {"path": "notes.txt"}, 400),
    ("POST", "/api/reference", {"source": "video", "video": "../../../../etc/passwd",
                                "reference_frame": "demo_station/reference.png"}, 403),
    ("POST", "/api/reference", {"source": "video", "video": "x.mp4",
                                "reference_frame": "../../../../tmp/ref.png"}, 403),
    ("POST", "/api/dry-run", {"video": "/etc/passwd"}, 403),
])
def test_paths_outside_the_setup_folder_are_refused(
        setup_server: ServerFactory, method: str, path: str, body: dict | None,  # type: ignore[type-arg]
        status: int) -> None:
    client = setup_server()
    if body is not None and method == "POST":
        body = {**body, "data": client.call("GET", "/api/state")[1]["data"]}
    got, out = client.call(method, path, body)
    assert got == status, out


@pytest.mark.parametrize(("send_token", "status"), [(False, 401), (True, 200)])
def test_token_is_required_when_set(setup_server: ServerFactory, send_token: bool,
                                    status: int) -> None:
    client = setup_server(token="a-long-enough-token", send_token=send_token)
    for path in ("/api/state", "/", "/common/caution.html"):
        assert client.call("GET", path)[0] == status


def test_new_config_saves_where_asked_and_reads_back(setup_server: ServerFactory,
                                                    workspace: Path) -> None:
    client = setup_server(config=None)
    state = client.call("GET", "/api/state")[1]
    assert state["config_path"] is None and state["data"]["zones"] == []
    data = state["data"]
    data["zones"] = [{"id": "bin_a", "kind": "bin",
                      "polygon": [[10, 10], [90, 10], [90, 90], [10, 90]]}]
    data["steps"] = [{"id": "take_a", "kind": "pick", "zone": "bin_a"}]
    status, out = client.call("POST", "/api/save", {"data": data, "path": "lines/st1.yaml"})
    assert status == 200 and out["path"] == "lines/st1.yaml"
    written = yaml.safe_load((workspace / "lines" / "st1.yaml").read_text())
    assert written["zones"][0]["polygon"][2] == [90, 90]
    assert written["station"]["reference_frame"] == "station/reference.png"


@pytest.mark.slow
def test_teach_and_dry_run_from_the_sample_video(setup_server: ServerFactory,
                                                 with_video: Path) -> None:
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    status, listed = client.call("POST", "/api/teach", {
        "data": data, "zone": "locking_pin", "label": "absent", "source": "video",
        "video": "../sample_video/demo_station.mp4", "at_s": 1.0, "count": 2, "every_s": 0.5})
    assert status == 200, listed
    assert listed["absent"] == 10 and listed["present"] == 8
    assert (with_video / "configs/demo_station/locking_pin/absent-010.png").is_file()

    status, run = client.call("POST", "/api/dry-run", {
        "data": data, "video": "../sample_video/demo_station.mp4", "start_s": 0, "seconds": 2})
    assert status == 200, run
    assert run["frames"] == 30 and run["inputs"] == "sample_video/demo_station_inputs.jsonl"
    assert run["run_frames"] == 60 and 0 <= run["enabled_frames"] <= 60  # 2 s at 30 f/s
    assert not [e for e in run["timeline"] if e["text"].endswith(" )") or " ," in e["text"]]
    first_input = json.loads(DEMO_INPUTS.read_text().splitlines()[0])
    started = [e for e in run["timeline"] if e["kind"] == "unit_started"]
    assert started and started[0]["t_s"] == pytest.approx(first_input["t_s"], abs=1 / 30)
    assert first_input["serial"] in started[0]["text"]
    status, jpeg = client.call("GET", f"/api/dry-run/frame?run={run['run']}&i=29")
    assert status == 200 and jpeg[:2] == b"\xff\xd8"
    assert client.call("GET", f"/api/dry-run/frame?run={run['run']}&i=30")[0] == 404


def test_dry_run_refuses_a_config_with_errors(setup_server: ServerFactory) -> None:
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    data["steps"][0]["zone"] = "nowhere"
    status, out = client.call("POST", "/api/dry-run", {"data": data, "video": "x.mp4"})
    assert status == 400 and "steps[0].zone" in out["error"]


def test_a_check_reads_the_zones_and_steps_once(monkeypatch: pytest.MonkeyPatch) -> None:
    """The page's check and its drawing share one reading of the document's parts."""
    from stationcheck.config import config_check, parts
    from stationcheck.demo_station.files import DEMO_CONFIG
    from stationcheck.web.setup import checking

    calls: list[int] = []
    real = parts.parts_of_data

    def counted(data: dict[str, object]) -> parts.ConfigParts:
        calls.append(1)
        return real(data)

    monkeypatch.setattr(config_check, "parts_of_data", counted)
    monkeypatch.setattr(checking, "parts_of_data", counted)
    data = yaml.safe_load(DEMO_CONFIG.read_text(encoding="utf-8"))
    page = checking.check_for_page(data, DEMO_CONFIG.parent, "demo")
    assert page["ok"] and len(page["zones"]) == len(data["zones"])
    assert len(calls) == 1


def test_words_yaml_1_1_read_as_true_or_false_round_trip_as_text(
        setup_server: ServerFactory, workspace: Path,
        capsys: pytest.CaptureFixture[str]) -> None:
    """YAML 1.2 (https://yaml.org/spec/1.2.2/, the core schema) reads ``on`` and ``no`` as
    text; what the setup screen saves, ``check`` reads back the same."""
    from stationcheck.cli import main
    from stationcheck.config import load_config

    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    data["station"]["name"] = "on"
    data["zones"][0]["label"] = "no"
    status, saved = client.call("POST", "/api/save", {"data": data})
    assert status == 200 and saved["check"]["ok"], saved
    text = (workspace / CONFIG).read_text(encoding="utf-8")
    assert "name: on\n" in text and "label: no\n" in text  # written plain, as 1.2 allows
    assert main(["check", str(workspace / CONFIG)]) == 0
    assert "OK" in capsys.readouterr().out
    config = load_config(workspace / CONFIG)
    assert config.station.name == "on"
    assert config.zones[0].label == "no"  # type: ignore[union-attr]
    # a 1.1 reader would have taken them for true and false
    assert yaml.safe_load(text)["station"]["name"] is True


def test_a_file_url_stream_stays_inside_the_setup_folder(setup_server: ServerFactory) -> None:
    client = setup_server()
    for url, status in (("file:///etc/passwd", 403), ("file://../../x.mp4", 403),
                        ("concat:/etc/passwd|x", 400), ("ftp://camera/stream", 400)):
        got, body = client.call("POST", "/api/reference", {
            "source": "stream", "url": url, "reference_frame": "demo_station/new.png"})
        assert got == status, (url, body)
