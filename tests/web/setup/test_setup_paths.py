"""Messages about paths in the setup screen name the path tried and the way out, and the file
lists offered to the page stay inside the setup folder."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.web.setup.conftest import ServerFactory


@pytest.mark.parametrize(("method", "path", "body", "status", "parts"), [
    ("POST", "/api/dry-run", {"video": "sample_video/demo_station.mp4"}, 404,
     [("no such video file 'sample_video/demo_station.mp4': tried {ws}/configs/sample_video/"
      "demo_station.mp4 (paths start at the config's folder {ws}/configs)")]),
    ("POST", "/api/reference", {"source": "video", "video": "nowhere.mp4",
                                "reference_frame": "x.png"}, 404,
     ["tried {ws}/configs/nowhere.mp4"]),
    ("GET", "/api/video-info?path=../../elsewhere/run.mp4", None, 403,
     [("'../../elsewhere/run.mp4' is {ws.parent}/elsewhere/run.mp4, outside the setup folder "
      "{ws}"), "--root {ws.parent}"]),
    ("GET", "/api/reference-image?path=demo_station/none.png", None, 404,
     ["no reference frame yet: tried {ws}/configs/demo_station/none.png"]),
])
def test_path_messages_name_the_path_tried_and_the_fix(
        setup_server: ServerFactory, workspace: Path, method: str, path: str,
        body: dict | None, status: int, parts: list[str]) -> None:  # type: ignore[type-arg]
    client = setup_server()
    if body is not None:
        body = {**body, "data": client.call("GET", "/api/state")[1]["data"]}
    got, out = client.call(method, path, body)
    assert got == status, out
    for part in parts:
        assert part.format(ws=workspace) in out["error"]


def test_file_lists_hold_only_files_inside_the_setup_folder(setup_server: ServerFactory,
                                                           with_video: Path) -> None:
    (with_video / ".hidden").mkdir()
    (with_video / ".hidden" / "x.mp4").write_bytes(b"")
    client = setup_server()
    status, out = client.call("GET", "/api/files?kind=video")
    assert status == 200 and out["files"] == ["../sample_video/demo_station.mp4"]
    assert client.call("GET", "/api/files?kind=inputs")[1]["files"] == [
        "../sample_video/demo_station_inputs.jsonl"]
    assert client.call("GET", "/api/files?kind=secrets")[0] == 400
