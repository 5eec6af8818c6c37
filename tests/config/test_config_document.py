"""Reading the file: line numbers of findings, YAML syntax errors, unreadable files."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from stationcheck.config import check_file, load_config
from stationcheck.errors import ConfigError

STATION = """\
format_version: 1
station:
  name: Line test (demo data)
  reference_frame: ref.png
camera:
  source: 0
  width_px: 640
  height_px: 480
  fps: thirty
zones:
  - id: screw_a
    kind: fastener
    polygon: [[100, 100], [130, 100], [130, 130], [100, 130]]
  - id: bin_a
    kind: bin
    colour: blue
    polygon: [[400, 300], [500, 300], [500, 400], [400, 400]]
steps:
  - id: pick
    kind: pick
    zone: bin_b
  - id: fasten
    kind: fasten
    zones: [screw_a, screw_x]
  - id: confirm
    kind: confirm
"""


def test_findings_carry_the_line_of_their_key(write_yaml: Callable[..., Path]) -> None:
    result = check_file(write_yaml(STATION, "lines.yaml"))
    assert [(f.line, f.severity, f.path_text) for f in result.findings] == [
        (9, "error", "camera.fps"),
        (14, "warning", "zones[1]"),  # bin_a: the pick step names bin_b
        (16, "error", "zones[1].colour"),
        (21, "error", "steps[0].zone"),
        (24, "error", "steps[1].zones[1]"),
        (25, "error", "steps[2].prompt"),  # missing key: the line of its step
    ]
    assert result.findings[3].format(result.source).endswith(
        "lines.yaml:21: error: steps[0].zone: no zone named 'bin_b' (did you mean 'bin_a'?); "
        "bin zones are: bin_a"
    )


def test_duplicate_keys_are_reported_at_the_second_one(write_yaml: Callable[..., Path]) -> None:
    text = STATION.replace("  fps: thirty\n", "  fps: 30\n  width_px: 320\n")
    result = check_file(write_yaml(text))
    duplicate = [f for f in result.findings if f.path_text == "camera.width_px"]
    assert len(duplicate) == 1
    assert duplicate[0].line == 10
    assert "'width_px' is given twice in the same mapping (first on line 7)" in duplicate[0].message


def test_yaml_merge_keys_are_not_duplicates(write_yaml: Callable[..., Path]) -> None:
    text = STATION.replace("  fps: thirty\n", "  fps: 30\n").replace(
        "  - id: bin_a\n    kind: bin\n    colour: blue\n",
        "  - &bin\n    id: bin_a\n    kind: bin\n",
    ).replace("zone: bin_b", "zone: bin_a").replace(", screw_x]", "]").replace(
        "    kind: confirm\n", "    kind: confirm\n    prompt: Done?\n")
    result = check_file(write_yaml(text))
    assert result.findings == (), result.lines()


@pytest.mark.parametrize(
    ("content", "fragment"),
    [
        pytest.param(b"", "the file is empty; a station config starts with 'format_version: 1'",
                     id="empty"),
        pytest.param(b"# nothing yet\n\n", "the file holds only comments", id="only comments"),
        pytest.param(b"- a\n- b\n", ":1: the top level must be a mapping of keys "
                     "(format_version, station, camera, ...), but the file holds a list of 2 "
                     "items", id="list at the top"),
        pytest.param(b"station\n", "but the file holds the text 'station'", id="scalar"),
        pytest.param(b"a: 1\nb: [1, 2\nc: 3\n", ":3:2: not valid YAML: expected ',' or ']', but "
                     "got ':' (while parsing a flow sequence that starts on line 2)",
                     id="unclosed list"),
        pytest.param(b"a:\n\tb: 1\n", ":2:1: not valid YAML: found character '\\t' that cannot "
                     "start any token; indent with spaces, YAML does not allow tabs", id="tab"),
        pytest.param(b"a: 1\n---\nb: 2\n", "expected a single document in the stream but found "
                     "another document; a station config is one document", id="two documents"),
        pytest.param(b"\xff\xfe\x00a", "is not a text file (byte 0 is not UTF-8)", id="binary"),
    ],
)
def test_unreadable_files_raise_one_line(tmp_path: Path, content: bytes, fragment: str) -> None:
    path = tmp_path / "station.yaml"
    path.write_bytes(content)
    with pytest.raises(ConfigError) as info:
        check_file(path)
    message = str(info.value)
    assert message.startswith(str(path))
    assert fragment in message
    assert "\n" not in message
    assert info.value.exit_code == 2


@pytest.mark.parametrize(
    ("make", "fragment"),
    [
        pytest.param(lambda p: p / "missing.yaml", "missing.yaml: no such file", id="missing"),
        pytest.param(lambda p: p, ": is a folder; give the station config file", id="folder"),
    ],
)
def test_missing_file_and_folder(
    tmp_path: Path, make: Callable[[Path], Path], fragment: str
) -> None:
    with pytest.raises(ConfigError, match=fragment):
        check_file(make(tmp_path))


def test_load_config_raises_with_the_first_error_and_a_count(
    write_yaml: Callable[..., Path],
) -> None:
    path = write_yaml(STATION)
    with pytest.raises(ConfigError) as info:
        load_config(path)
    assert str(info.value) == (
        f"{path}:9: camera.fps: expected a number, got the text 'thirty' (and 4 more errors); "
        f"run 'stationcheck check {path}' to see every finding"
    )


def test_load_config_logs_warnings_and_resolves_paths(
    write_yaml: Callable[..., Path],
    base_config: Callable[[], dict[str, Any]],
    caplog: pytest.LogCaptureFixture,
) -> None:
    data = base_config()
    data["zones"].append({"id": "spare", "kind": "bin",
                          "polygon": [[550, 50], [600, 50], [600, 100]]})
    data["camera"]["source"] = "../videos/run.mp4"
    data["model"] = {"path": "models/tool.onnx"}
    data["log"] = {"path": "/var/tmp/log.sqlite"}
    path = write_yaml(data)
    folder = path.parent
    (folder / "models").mkdir()
    (folder / "models" / "tool.onnx").write_bytes(b"checked for being there, not read")
    with caplog.at_level("WARNING"):
        config = load_config(path)
    assert "zone 'spare' is not used by any step" in caplog.text
    assert f"video file '../videos/run.mp4' not found: tried {folder.parent}/videos/run.mp4" \
        in caplog.text
    assert config.reference_frame_path == folder / "ref.png"
    assert config.camera_source == folder.parent / "videos" / "run.mp4"
    assert config.model_path == folder / "models" / "tool.onnx"
    assert config.log_path == Path("/var/tmp/log.sqlite")


@pytest.mark.parametrize(
    ("source", "expected"),
    [(0, 0), (2, 2), ("rtsp://10.0.0.5:554/s1", "rtsp://10.0.0.5:554/s1"),
     ("http://cam.local/video", "http://cam.local/video")],
)
def test_camera_indexes_and_urls_are_not_paths(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    source: int | str, expected: int | str,
) -> None:
    data = base_config()
    data["camera"]["source"] = source
    assert load_config(write_yaml(data)).camera_source == expected
    assert load_config(write_yaml(data)).model_path is None  # bundled
