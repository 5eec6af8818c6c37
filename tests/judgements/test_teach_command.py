"""``stationcheck teach``: teaching, listing and clearing check zones; the camera-shift check."""

from __future__ import annotations

import re
from pathlib import Path

import cv2
import pytest
import yaml

from stationcheck.cli import main
from stationcheck.config import check_file, load_config
from stationcheck.demo_station.camera import CameraTransform
from tests.judgements.conftest import Render


def write_png(path: Path, image: object) -> Path:
    assert cv2.imwrite(str(path), image)
    return path


def write_video(path: Path, render: Render, fps: float = 5.0) -> Path:
    """Ten frames: the pin engaged for the first five, pulled for the rest."""
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"mp4v"), fps, (640, 480))
    for k in range(10):
        writer.write(render(k < 5, seed=300 + k))
    writer.release()
    return path


def test_teach_list_and_clear(station_copy: Path, render: Render, tmp_path: Path,
                              capsys: pytest.CaptureFixture[str]) -> None:
    images = [write_png(tmp_path / f"in-{k}.png", render(True, seed=10 + k)) for k in range(2)]
    config = str(station_copy)
    assert main(["teach", config, "--zone", "locking_pin", "--present", "--image",
                 *map(str, images)]) == 0
    out = capsys.readouterr().out
    assert "taught locking_pin: 2 present, 0 absent" in out
    assert "teach at least two images of each class" in out
    video = write_video(tmp_path / "run.mp4", render)
    assert main(["teach", config, "--zone", "locking_pin", "--absent", "--video", str(video),
                 "--at", "1.2", "--count", "3", "--every", "0.2"]) == 0
    out = capsys.readouterr().out
    assert "taught locking_pin: 2 present, 3 absent" in out
    assert "agreement within a class" in out and "warning" not in out
    folder = station_copy.parent / "demo_station" / "locking_pin"
    assert (folder / "absent-003.png").is_file()
    assert main(["teach", config, "--list"]) == 0
    listing = capsys.readouterr().out
    assert "run.mp4 frame 6 (1.20 s)" in listing and "run.mp4 frame 8 (1.60 s)" in listing
    assert f"image {images[0].name}" in listing
    assert main(["teach", config, "--zone", "locking_pin", "--clear", "--absent"]) == 0
    assert "forgot 3 absent image(s)" in capsys.readouterr().out
    assert main(["teach", config, "--zone", "locking_pin", "--list"]) == 0
    assert "2 present, 0 absent" in capsys.readouterr().out


def test_list_says_when_a_zone_is_not_taught(station_copy: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["teach", str(station_copy), "--list"]) == 0
    assert "locking_pin: not taught (its check stays undecided)" in capsys.readouterr().out


@pytest.mark.parametrize(("args", "code", "message"), [
    (["--zone", "nowhere", "--present", "--image", "x.png"], 2, "no zone named 'nowhere'"),
    (["--zone", "bin_cover", "--present", "--image", "x.png"], 2, "not a check zone"),
    (["--present", "--image", "x.png"], 3, "--zone ZONE"),
    (["--zone", "locking_pin", "--image", "x.png"], 3, "--present or --absent"),
    (["--zone", "locking_pin", "--present"], 3, "say where the frames come from"),
    (["--zone", "locking_pin", "--present", "--video", "x.mp4"], 3, "--video needs --at"),
    (["--zone", "locking_pin", "--present", "--image", "missing.png"], 3, "missing or not an"),
    (["--zone", "locking_pin", "--present", "--video", "missing.mp4", "--at", "1"], 3,
     "cannot open the video"),
    (["--camera-shift"], 3, "say where the frames come from"),
    (["--zone", "locking_pin", "--present", "--camera", "97"], 3, "camera 97: cannot be opened"),
])
def test_mistakes_give_one_line_and_an_exit_code(
    station_copy: Path, args: list[str], code: int, message: str,
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["teach", str(station_copy), *args]) == code
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1


def test_teaching_past_the_end_of_a_video_is_refused(
    station_copy: Path, render: Render, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    video = write_video(tmp_path / "short.mp4", render)
    assert main(["teach", str(station_copy), "--zone", "locking_pin", "--present", "--video",
                 str(video), "--at", "30"]) == 3
    assert "no frame at 30.00 s" in capsys.readouterr().err


def test_camera_shift_prints_remapped_zones(station_copy: Path, render: Render,
                                            tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    image = write_png(tmp_path / "bumped.png",
                      render(transform=CameraTransform(10.0, -7.0, 1.1), seed=5, stage="empty"))
    assert main(["teach", str(station_copy), "--camera-shift", "--image", str(image)]) == 0
    out = capsys.readouterr().out
    first, rest = out.split("\n", 1)
    numbers = re.search(r"centre moved ([-+.\d]+), ([-+.\d]+) px, rotation ([-+.\d]+) deg", first)
    assert "MOVED" in first and numbers is not None
    dx, dy, rot = (float(v) for v in numbers.groups())
    assert (dx, dy, rot) == (pytest.approx(10.0, abs=0.3), pytest.approx(-7.0, abs=0.3),
                             pytest.approx(1.1, abs=0.05))
    zones = yaml.safe_load(rest)["zones"]
    original = load_config(station_copy).zone_specs()
    assert [z["id"] for z in zones] == [z.id for z in original]
    pin = next(z for z in zones if z["id"] == "locking_pin")
    expected = CameraTransform(10.0, -7.0, 1.1).apply((418.0, 318.0), 640, 480)
    assert abs(pin["polygon"][0][0] - expected[0]) < 0.5
    assert abs(pin["polygon"][0][1] - expected[1]) < 0.5


def test_camera_shift_in_place_and_written_as_a_new_config(
    station_copy: Path, render: Render, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    still = write_png(tmp_path / "still.png", render(seed=6))
    assert main(["teach", str(station_copy), "--camera-shift", "--image", str(still)]) == 0
    assert ": in place: zones shift up to 0." in capsys.readouterr().out
    bumped = write_png(tmp_path / "bumped.png",
                       render(transform=CameraTransform(-6.0, 4.0, 0.5), seed=7))
    target = tmp_path / "station-moved.yaml"
    assert main(["teach", str(station_copy), "--camera-shift", "--image", str(bumped),
                 "--write", str(target)]) == 0
    assert "wrote" in capsys.readouterr().out
    assert check_file(target).ok
    moved = load_config(target)
    assert moved.reference_frame_path.is_file()
    original = load_config(station_copy)
    assert moved.reference_frame_path.parent == original.reference_frame_path.parent
    assert moved.zone_specs()[0].polygon_px != load_config(station_copy).zone_specs()[0].polygon_px


def test_camera_shift_on_an_unrelated_picture_is_refused(
    station_copy: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import numpy as np

    flat = write_png(tmp_path / "flat.png", np.full((480, 640, 3), 128, np.uint8))
    assert main(["teach", str(station_copy), "--camera-shift", "--image", str(flat)]) == 3
    assert "too few features agree" in capsys.readouterr().err
