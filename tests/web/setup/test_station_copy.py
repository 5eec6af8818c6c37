"""Save-as into another folder carries the station: its reference frame and taught references
are copied beside the new config, the paths to files outside the old folder are rewritten, and
the copy checks clean and loads its taught references as replay does."""

from __future__ import annotations

import filecmp
import shutil
from pathlib import Path

import yaml

from stationcheck.config import check_file, load_config
from stationcheck.judgements import teaching
from tests.web.setup.conftest import REPO, ServerFactory

BUNDLED_MODELS = REPO / "stationcheck" / "models"


def test_save_as_in_another_folder_copies_the_station(setup_server: ServerFactory,
                                                      with_video: Path) -> None:
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    status, out = client.call("POST", "/api/save", {"data": data, "path": "../lines/a/st1.yaml"})
    assert status == 200, out
    assert out["path"] == "lines/a/st1.yaml"
    new = with_video / "lines" / "a"
    old = with_video / "configs" / "demo_station"
    assert filecmp.cmp(old / "reference.png", new / "demo_station" / "reference.png",
                       shallow=False)
    taught = sorted(p.name for p in (old / "locking_pin").iterdir())
    assert sorted(p.name for p in (new / "demo_station" / "locking_pin").iterdir()) == taught
    written = yaml.safe_load((new / "st1.yaml").read_text(encoding="utf-8"))
    assert written["camera"]["source"] == "../../sample_video/demo_station.mp4"
    assert out["data"]["camera"]["source"] == written["camera"]["source"]
    assert any("copied taught references of 'locking_pin' (16 images)" in note
               for note in out["carried"]), out["carried"]
    result = check_file(new / "st1.yaml")
    assert (result.errors, result.warnings) == ([], []), result.lines()
    config = load_config(new / "st1.yaml")
    [(zone, manifest)] = teaching.taught_zones(config)
    assert manifest is not None and manifest.count("present") == 8
    assert teaching.load_taught(teaching.teaching_dir(config, zone.id), zone) is not None
    state = setup_server(config="lines/a/st1.yaml").call("GET", "/api/state")[1]
    assert state["check"]["errors"] == 0 and state["check"]["warnings"] == 0


def test_save_as_refuses_to_overwrite_different_files(setup_server: ServerFactory,
                                                      workspace: Path) -> None:
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    clash = workspace / "other" / "demo_station" / "reference.png"
    clash.parent.mkdir(parents=True)
    clash.write_bytes(b"another station's picture")
    status, out = client.call("POST", "/api/save", {"data": data, "path": "../other/st.yaml"})
    assert status == 409
    assert "already holds different files at other/demo_station/reference.png" in out["error"]
    assert not (workspace / "other" / "st.yaml").exists()
    assert clash.read_bytes() == b"another station's picture"


def test_a_new_config_saved_in_a_folder_takes_its_picture_along(setup_server: ServerFactory,
                                                                 workspace: Path) -> None:
    """A new config keeps its files at the setup folder until it is first saved."""
    (workspace / "station").mkdir()
    (workspace / "station" / "reference.png").write_bytes(
        (workspace / "configs" / "demo_station" / "reference.png").read_bytes())
    client = setup_server(config=None)
    data = client.call("GET", "/api/state")[1]["data"]
    status, out = client.call("POST", "/api/save", {"data": data, "path": "configs/new.yaml"})
    assert status == 200, out
    assert (workspace / "configs" / "station" / "reference.png").is_file()
    assert not [f for f in out["check"]["findings"] if f["where"][:1] == ["station"]]


def test_save_as_carries_a_station_model_and_its_refine_companion(
        setup_server: ServerFactory, workspace: Path) -> None:
    """The bundled coarse model names its refine model in its metadata; both travel."""
    models = workspace / "configs" / "models"
    models.mkdir()
    for name in ("tool_tip.coarse.onnx", "tool_tip.refine.onnx"):
        shutil.copy(BUNDLED_MODELS / name, models / name)
    client = setup_server()
    data = client.call("GET", "/api/state")[1]["data"]
    data["model"] = {"path": "models/tool_tip.coarse.onnx"}
    status, out = client.call("POST", "/api/save", {"data": data, "path": "../b/st.yaml"})
    assert status == 200, out
    for name in ("tool_tip.coarse.onnx", "tool_tip.refine.onnx"):
        assert filecmp.cmp(models / name, workspace / "b" / "models" / name, shallow=False)
    assert not [f for f in check_file(workspace / "b" / "st.yaml").errors]
