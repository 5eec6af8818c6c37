"""``stationcheck teach``: teach check zones from frames, list or clear them, and measure how far
the camera has moved from its reference view (with re-mapped zones on offer)."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

EPILOG = """examples:
  stationcheck teach station.yaml --zone locking_pin --present --video run.mp4 --at 12.5
  stationcheck teach station.yaml --zone locking_pin --absent --image a.png b.png
  stationcheck teach station.yaml --zone locking_pin --present --camera 0
  stationcheck teach station.yaml --list
  stationcheck teach station.yaml --zone locking_pin --clear [--present | --absent]
  stationcheck teach station.yaml --camera-shift --video run.mp4 --at 112 [--write moved.yaml]

privacy: the taught crops are images of the check zones and are kept in the station folder
until cleared (--clear); frames from the camera or a video may show the people who work there.
Tell staff and follow local workplace and data-protection rules.
"""


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "teach",
        help="teach check zones from reference frames; check and correct a camera move",
        description=(
            "Teaches a check zone what 'present' and 'absent' look like from frames of a video, "
            "image files or the camera, and stores the crops and a references.yaml beside the "
            "station's reference frame. With --camera-shift it compares a frame with the "
            "reference frame and prints the zones re-mapped into the camera's current view "
            "(--write saves them as a new config with that frame as its reference)."
        ),
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("config", type=Path, help="station config (YAML)")
    p.add_argument("--zone", help="check zone id")
    label = p.add_mutually_exclusive_group()
    label.add_argument(
        "--present",
        dest="label",
        action="store_const",
        const="present",
        help="the frames show the part present / the fixture engaged",
    )
    label.add_argument(
        "--absent",
        dest="label",
        action="store_const",
        const="absent",
        help="the frames show it absent / not engaged",
    )
    mode = p.add_mutually_exclusive_group()
    mode.add_argument("--list", action="store_true", help="list what each check zone was taught")
    mode.add_argument(
        "--clear",
        action="store_true",
        help="forget the zone's taught images (of one class with --present/--absent)",
    )
    mode.add_argument(
        "--camera-shift",
        action="store_true",
        help="measure the camera's move against the reference frame",
    )
    source = p.add_mutually_exclusive_group()
    source.add_argument("--video", type=Path, help="take frames from this video file")
    source.add_argument("--image", type=Path, nargs="+", help="take these image files")
    source.add_argument("--camera", type=int, metavar="INDEX", help="take a frame from a camera")
    p.add_argument(
        "--at", type=float, metavar="SECONDS", help="time in the video of the first frame"
    )
    p.add_argument("--count", type=int, default=1, help="frames to take from the video (default 1)")
    p.add_argument(
        "--every",
        type=float,
        default=1.0,
        metavar="SECONDS",
        help="seconds between video frames (default 1)",
    )
    p.add_argument(
        "--write",
        type=Path,
        metavar="NEW_CONFIG",
        help="with --camera-shift: write a config with the re-mapped zones here",
    )
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.config import load_config
    from stationcheck.errors import InputFileError

    config = load_config(args.config)
    if args.list:
        return _list(config, args.zone)
    if args.camera_shift:
        return _camera_shift(args, config)
    if not args.zone:
        raise InputFileError("say which check zone: --zone ZONE (or use --list)")
    if args.clear:
        return _clear(config, args.zone, args.label)
    if args.label is None:
        raise InputFileError("say what the frames show: --present or --absent")
    return _teach(args, config)


def _frames(args: argparse.Namespace, config: Any) -> list[tuple[Any, str]]:
    from stationcheck.errors import InputFileError
    from stationcheck.judgements import frame_grab

    if args.video is not None:
        if args.at is None:
            raise InputFileError("--video needs --at SECONDS")
        return frame_grab.frames_from_video(args.video, args.at, args.count, args.every)
    if args.image:
        return frame_grab.frames_from_images(args.image)
    if args.camera is not None:
        return [
            frame_grab.frame_from_camera(
                args.camera, config.camera.width_px, config.camera.height_px
            )
        ]
    raise InputFileError(
        "say where the frames come from: --video FILE --at S, --image PNG or --camera INDEX"
    )


def _teach(args: argparse.Namespace, config: Any) -> int:
    from stationcheck.judgements import teaching

    zone = teaching.check_zone(config, args.zone)
    folder = teaching.teaching_dir(config, zone.id)
    size = (config.camera.width_px, config.camera.height_px)
    frames = _frames(args, config)
    print(
        "Privacy: the taught crops are kept in the station folder until cleared; frames of "
        "the station may show the people who work there (follow local workplace and "
        "data-protection rules).",
        file=sys.stderr,
    )
    manifest = teaching.teach(folder, zone, args.label, frames, size)
    print(f"taught {teaching.describe(manifest)} (in {folder})")
    _print_separation(folder, zone)
    return 0


def _print_separation(folder: Path, zone: Any) -> None:
    from stationcheck.judgements import teaching

    taught = teaching.load_taught(folder, zone)
    found = teaching.separation(taught) if taught is not None else None
    if found is None:
        print("  teach at least two images of each class to see how well they separate")
        return
    print(
        f"  agreement within a class >= {found.own_min:.2f}; with the other class "
        f"<= {found.other_max:.2f} (gap {found.gap:.2f})"
    )
    manifest = teaching.read_manifest(folder)
    poor = teaching.poor_teaching(manifest, found) if manifest is not None else None
    if poor is not None:
        print(f"  warning: {poor}")


def _list(config: Any, zone_id: str | None) -> int:
    from stationcheck.judgements import teaching

    zones = teaching.taught_zones(config)
    if zone_id is not None:
        teaching.check_zone(config, zone_id)
        zones = [(zone, manifest) for zone, manifest in zones if zone.id == zone_id]
    if not zones:
        print("this station has no check zones")
    for zone, manifest in zones:
        folder = teaching.teaching_dir(config, zone.id)
        if manifest is None:
            print(f"{zone.id}: not taught (its check stays undecided)")
            continue
        print(f"{teaching.describe(manifest)} (in {folder})")
        for image in manifest.images:
            print(f"  {image.file:<16} {image.label:<8} {image.source}")
        _print_separation(folder, zone)
    return 0


def _clear(config: Any, zone_id: str, label: str | None) -> int:
    from stationcheck.judgements import teaching

    zone = teaching.check_zone(config, zone_id)
    gone = teaching.clear(teaching.teaching_dir(config, zone.id), label)  # type: ignore[arg-type]
    print(f"{zone.id}: forgot {gone} {label or 'taught'} image(s)")
    return 0


def _camera_shift(args: argparse.Namespace, config: Any) -> int:
    import cv2

    from stationcheck.errors import InputFileError
    from stationcheck.judgements.camera_shift import FULL_SCALE, ReferenceView, remap_zones
    from stationcheck.judgements.station import read_reference_frame
    from stationcheck.judgements.zone_remap import write_remapped_config, zones_yaml

    grabbed = _frames(args, config)
    if len(grabbed) != 1:
        raise InputFileError("--camera-shift compares one frame; give one image or --count 1")
    image, source = grabbed[0]
    zones = config.zone_specs()
    reference = read_reference_frame(config.reference_frame_path)
    estimate = ReferenceView(reference, zones, FULL_SCALE).estimate(image)
    if estimate is None:
        raise InputFileError(
            f"{source}: too few features agree with the reference frame to "
            "estimate a camera move (is the view blocked or a different scene?)"
        )
    tolerance = config.judgements.camera_shift.tolerance_px
    dx, dy = estimate.shift_at(((image.shape[1] - 1) / 2.0, (image.shape[0] - 1) / 2.0))
    verdict = "MOVED" if estimate.shift_px > tolerance else "in place"
    print(
        f"{source}: {verdict}: zones shift up to {estimate.shift_px:.1f} px (tolerance "
        f"{tolerance:g} px); image centre moved {dx:+.1f}, {dy:+.1f} px, rotation "
        f"{estimate.rotation_deg:+.2f} deg; {estimate.inliers} of {estimate.matches} "
        "matches agree"
    )
    remapped = remap_zones(zones, estimate.matrix)
    note = (
        f"re-mapped for a camera move measured on {source}: centre moved {dx:+.1f}, "
        f"{dy:+.1f} px, rotation {estimate.rotation_deg:+.2f} deg"
    )
    if args.write is None:
        print(zones_yaml(remapped, note), end="")
        return 0
    target: Path = args.write
    picture = config.reference_frame_path.parent / f"{target.stem}-reference.png"
    if not cv2.imwrite(str(picture), image):
        raise InputFileError(f"cannot write {picture}")
    write_remapped_config(args.config, target, remapped, picture, note)
    print(
        f"wrote {target} (reference frame {picture}); check it with "
        f"'stationcheck check {target}' before use"
    )
    return 0
