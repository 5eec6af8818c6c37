"""The Label tab's API over HTTP: the request guard holds for its writes, paths stay inside
the setup folder, labels are checked, a new config must be saved before labels are stored."""

from __future__ import annotations

import http.client
import shutil
from pathlib import Path

import cv2
import numpy as np

from tests.web.setup.conftest import DEMO_VIDEO, ServerFactory


def _with_clip(workspace: Path) -> str:
    shutil.copy(DEMO_VIDEO, workspace / "configs" / "station.mp4")
    return "station.mp4"


def test_writes_need_the_screens_header_and_json(setup_server: ServerFactory) -> None:
    client = setup_server()
    host, port = client.server.server_address[:2]
    for headers in ({"Content-Type": "application/json"},
                    {"Content-Type": "text/plain", "X-Stationcheck-Request": "1"}):
        conn = http.client.HTTPConnection(str(host), int(port), timeout=10)
        conn.request("POST", "/api/label/save", body=b"{}", headers=headers)
        status = conn.getresponse().status
        conn.close()
        assert status in (403, 415)


def test_frames_guesses_and_refusals(setup_server: ServerFactory, workspace: Path) -> None:
    video = _with_clip(workspace)
    client = setup_server()
    status, info = client.call("GET", f"/api/label/open?video={video}&count=8")
    assert status == 200, info
    assert len(info["proposals"]) == 8 and info["frames"] == 3475
    assert info["folder"] == "configs/labels" and info["stored"] == []
    status, jpeg = client.call("GET", f"/api/label/frame?video={video}&i=800")
    assert status == 200 and jpeg[:2] == b"\xff\xd8"
    image = cv2.imdecode(np.frombuffer(jpeg, np.uint8), cv2.IMREAD_COLOR)
    assert image.shape == (480, 640, 3)
    status, guess = client.call("POST", "/api/label/guess", {"video": video, "i": 800})
    assert status == 200 and guess["model"] == "bundled model"
    # the bundled model on a frame of its own demo station: near the renderer's truth
    assert abs(guess["tip"][0] - 379.9) < 6 and abs(guess["tip"][1] - 180.6) < 6
    status, out = client.call("GET", "/api/label/open?video=../../outside.mp4")
    assert status == 403 and "outside the setup folder" in out["error"]
    status, out = client.call("POST", "/api/label/save", {"video": video, "labels": [
        {"frame_index": 1, "tip": [1, 2], "rear": None, "source": "guessed"}]})
    assert status == 400 and "source must be one of" in out["error"]
    status, out = client.call("POST", "/api/label/save", {"video": video, "labels": [
        {"frame_index": 99999, "tip": None, "rear": None}]})
    assert status == 400 and "past the video's end" in out["error"]
    status, out = client.call("POST", "/api/label/train", {})
    assert status == 409 and "no labels saved yet" in out["error"]
    for marks, words in (
        ([[5, 3]], "ends before it starts"),
        ([[1, 2, 3]], "is [first, last]"),
        ([[-1, 2]], "must be a frame index"),
        ("1-2", "list of [first, last]"),
    ):
        status, out = client.call("POST", "/api/label/propagate", {
            "video": video, "clicked": [], "out_of_view": marks})
        assert status == 400 and words in out["error"], out
    # two "not visible" clicks (the sample's tool is out of view there) and a mark between
    hidden = [{"frame_index": i, "tip": None, "rear": None, "source": "clicked"}
              for i in (2905, 2915)]
    status, out = client.call("POST", "/api/label/propagate", {"video": video, "clicked": hidden})
    assert status == 200 and out["labels"] == [] and out["queued"] == []
    (run,) = out["hidden_runs"]
    assert out["smear"] == {"share": 0.0, "observations": 0}  # no moving click: not measured
    assert (run["first"], run["last"], run["hidden_before"], run["hidden_after"]) == (
        2906, 2914, True, True)
    assert run["strip"] == list(range(2906, 2915))
    status, out = client.call("POST", "/api/label/propagate", {
        "video": video, "clicked": hidden, "out_of_view": [[2906, 2914]]})
    assert status == 200 and out["hidden_runs"] == []
    assert [(l["frame_index"], l["tip"], l["source"]) for l in out["labels"]] == [
        (i, None, "propagated") for i in range(2906, 2915)]


def test_a_new_config_is_saved_before_labels(setup_server: ServerFactory, workspace: Path) -> None:
    shutil.copy(DEMO_VIDEO, workspace / "station.mp4")
    client = setup_server(config=None)
    status, out = client.call("POST", "/api/label/save", {"video": "station.mp4", "labels": [
        {"frame_index": 1, "tip": None, "rear": None}]})
    assert status == 409 and "save the config first" in out["error"]
    assert not (workspace / "labels").exists()
