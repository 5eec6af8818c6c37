"""Taught references of check zones, kept next to the station config in open formats.

Layout: the folder of the station's reference frame holds one folder per taught check zone::

    configs/demo_station.yaml              station config (station.reference_frame below)
    configs/demo_station/reference.png
    configs/demo_station/locking_pin/references.yaml
    configs/demo_station/locking_pin/present-001.png ...  absent-001.png ...

Each PNG is a colour crop of a camera frame around the zone (the zone's box plus
``CROP_MARGIN_PX``); ``references.yaml`` names the zone, the zone's box when it was taught, the
crop's box, the method, and the class and source of each image. The same functions serve the
``teach`` command and the setup page.
"""

from __future__ import annotations

import logging
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from stationcheck.config import yaml_text
from stationcheck.config.schema import StationConfig
from stationcheck.config.station_files import MANIFEST_NAME, teaching_folder
from stationcheck.core.plan import ZoneSpec
from stationcheck.errors import ConfigError, InputFileError
from stationcheck.judgements.presence import (
    LABELS,
    F32Array,
    Label,
    TaughtClasses,
    class_template,
    normalised,
)
from stationcheck.judgements.zone_window import U8Array, zone_box_px

logger = logging.getLogger(__name__)

DEMO_SOURCE = "demo data: rendered frame"
FORMAT_VERSION = 1
CROP_MARGIN_PX = 16
ALIGN_PX = 4
METHOD = "class-mean normalised cross-correlation, grey"
TAUGHT_FILE_PATTERN = re.compile(r"(present|absent)-(\d{3,})\.png")
Box = tuple[int, int, int, int]


@dataclass(frozen=True)
class TaughtImage:
    file: str
    label: Label
    source: str


@dataclass(frozen=True)
class Manifest:
    zone: str
    zone_box_px: Box
    crop_box_px: Box
    images: tuple[TaughtImage, ...] = ()

    def count(self, label: Label) -> int:
        return sum(1 for image in self.images if image.label == label)


def check_zone(config: StationConfig, zone_id: str) -> ZoneSpec:
    """The check zone ``zone_id`` of the config.

    Raises:
        ConfigError: no such zone, or it is not a check zone.
    """
    zones = {zone.id: zone for zone in config.zone_specs()}
    checks = [zone.id for zone in zones.values() if zone.kind == "check"]
    zone = zones.get(zone_id)
    listing = ", ".join(checks) if checks else "none"
    if zone is None:
        raise ConfigError(f"no zone named '{zone_id}'; check zones: {listing}")
    if zone.kind != "check":
        raise ConfigError(
            f"'{zone_id}' is a {zone.kind} zone, not a check zone; check zones: {listing}"
        )
    return zone


def teaching_dir(config: StationConfig, zone_id: str) -> Path:
    """Where the references of ``zone_id`` live: beside the station's reference frame."""
    return teaching_folder(config.reference_frame_path, zone_id)


def read_manifest(folder: Path) -> Manifest | None:
    """The manifest in ``folder``, or None when nothing was taught there.

    Raises:
        ConfigError: the manifest is unreadable or malformed.
    """
    path = folder / MANIFEST_NAME
    if not path.exists():
        return None
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot be read as YAML ({exc})") from exc
    data = yaml_text.load_plain(text, str(path))
    try:
        return _manifest_from_data(data)
    except (KeyError, TypeError, ValueError) as exc:
        raise ConfigError(f"{path}: malformed taught references ({exc})") from exc


def _manifest_from_data(data: Any) -> Manifest:
    if not isinstance(data, dict):
        raise TypeError("expected a mapping")
    if data.get("format_version") != FORMAT_VERSION:
        raise ValueError(
            f"format_version must be {FORMAT_VERSION}, got {data.get('format_version')!r}"
        )
    images = []
    for item in data.get("images") or []:
        label = item["class"]
        if label not in LABELS:
            raise ValueError(f"class must be 'present' or 'absent', got {label!r}")
        images.append(TaughtImage(str(item["file"]), label, str(item.get("source", ""))))
    return Manifest(
        str(data["zone"]), _box(data["zone_box_px"]), _box(data["crop_box_px"]), tuple(images)
    )


def _box(value: Any) -> Box:
    x0, y0, x1, y1 = (int(v) for v in value)
    if x1 <= x0 or y1 <= y0:
        raise ValueError(f"a box is [x0, y0, x1, y1] with x1 > x0 and y1 > y0, got {value!r}")
    return (x0, y0, x1, y1)


def write_manifest(folder: Path, manifest: Manifest) -> None:
    head = {
        "format_version": FORMAT_VERSION,
        "zone": manifest.zone,
        "zone_box_px": yaml_text.flow_list(manifest.zone_box_px),
        "crop_box_px": yaml_text.flow_list(manifest.crop_box_px),
        "method": METHOD,
    }
    images = {
        "images": [
            {"file": image.file, "class": image.label, "source": image.source}
            for image in manifest.images
        ]
    }
    header = (
        f"# Taught references of check zone '{manifest.zone}' (stationcheck teach).\n"
        "# Boxes are [x0, y0, x1, y1] in camera pixels; each image is a crop at "
        "crop_box_px.\n"
    )
    if manifest.images and all(i.source.startswith(DEMO_SOURCE) for i in manifest.images):
        header = (
            "# DEMO DATA: taught from rendered frames of the invented demo station, not "
            "from a real camera.\n" + header
        )
    try:
        folder.mkdir(parents=True, exist_ok=True)
        (folder / MANIFEST_NAME).write_text(
            header + yaml_text.dump_text(head) + yaml_text.dump_text(images, width=100),
            encoding="utf-8",
        )
    except OSError as exc:
        raise InputFileError(f"cannot write {folder / MANIFEST_NAME}: {exc}") from exc


def teach(
    folder: Path,
    zone: ZoneSpec,
    label: Label,
    frames: Iterable[tuple[U8Array, str]],
    frame_size_px: tuple[int, int] | None = None,
) -> Manifest:
    """Add one crop per frame (BGR camera frames with a source description) to the zone's
    references and return the updated manifest.

    Raises:
        ConfigError: the zone changed since earlier teaching.
        InputFileError: a frame is not ``frame_size_px`` (width, height), or writing failed.
    """
    manifest = read_manifest(folder)
    zone_box = zone_box_px(zone.polygon_px)
    added: list[TaughtImage] = []
    for image, source in frames:
        size = (int(image.shape[1]), int(image.shape[0]))
        if frame_size_px is not None and size != tuple(frame_size_px):
            raise InputFileError(
                f"{source}: the frame is {size[0]}x{size[1]} px; the station's "
                f"camera gives {frame_size_px[0]}x{frame_size_px[1]}"
            )
        if manifest is None:
            crop_box = _crop_box(zone_box, image.shape[1], image.shape[0])
            manifest = Manifest(zone.id, zone_box, crop_box)
        _require_same_geometry(manifest, zone, zone_box)
        crop = _crop(image, manifest.crop_box_px, source)
        name = _next_file(folder, manifest, label)
        try:
            folder.mkdir(parents=True, exist_ok=True)
            written = cv2.imwrite(str(folder / name), crop, [cv2.IMWRITE_PNG_COMPRESSION, 9])
        except (OSError, cv2.error) as exc:
            raise InputFileError(f"cannot write {folder / name}: {exc}") from exc
        if not written:
            raise InputFileError(f"cannot write {folder / name}")
        added.append(TaughtImage(name, label, source))
    if manifest is None:
        raise InputFileError("no frames to teach from")
    manifest = replace(manifest, images=manifest.images + tuple(added))
    write_manifest(folder, manifest)
    logger.info("zone %s: %d %s image(s) taught", zone.id, len(added), label)
    return manifest


def clear(folder: Path, label: Label | None = None) -> int:
    """Forget the taught images of one class (or of both, with the manifest); returns how many
    image files were removed. Only files this module writes are touched."""
    manifest = read_manifest(folder)
    names = {path.name for path in folder.glob("*.png")} if folder.is_dir() else set()
    gone = sorted(
        name
        for name in names
        if (m := TAUGHT_FILE_PATTERN.fullmatch(name)) and (label is None or m.group(1) == label)
    )
    try:
        for name in gone:
            (folder / name).unlink(missing_ok=True)
        if label is None:
            (folder / MANIFEST_NAME).unlink(missing_ok=True)
            if folder.is_dir() and not any(folder.iterdir()):
                folder.rmdir()
    except OSError as exc:
        raise InputFileError(f"cannot remove taught images in {folder}: {exc}") from exc
    if label is not None and manifest is not None:
        kept = tuple(image for image in manifest.images if image.label != label)
        write_manifest(folder, replace(manifest, images=kept))
    return len(gone)


def load_taught(folder: Path, zone: ZoneSpec) -> TaughtClasses | None:
    """Grey templates of the zone box per class, or None when nothing was taught.

    Raises:
        ConfigError: the manifest is malformed, names another zone, or an image is missing.
    """
    manifest = read_manifest(folder)
    if manifest is None:
        return None
    if manifest.zone != zone.id:
        raise ConfigError(
            f"{folder / MANIFEST_NAME}: taught for zone '{manifest.zone}', not '{zone.id}'"
        )
    crops: dict[Label, list[F32Array]] = {label: [] for label in LABELS}
    cx0, cy0, _, _ = manifest.crop_box_px
    x0, y0, x1, y1 = manifest.zone_box_px
    box = (x0 - cx0, y0 - cy0, x1 - cx0, y1 - cy0)
    for image in manifest.images:
        path = folder / image.file
        grey = cv2.imread(str(path), cv2.IMREAD_GRAYSCALE)
        if grey is None:
            raise ConfigError(f"{path}: taught image is missing or unreadable")
        if grey.shape[0] < box[3] or grey.shape[1] < box[2]:
            raise ConfigError(f"{path}: image is smaller than the crop box in {MANIFEST_NAME}")
        crops[image.label].append(grey.astype(np.float32))
    return TaughtClasses(
        zone.id,
        manifest.zone_box_px,
        {label: aligned_templates(items, box) for label, items in crops.items()},
    )


def aligned_templates(crops: Sequence[F32Array], box: Box) -> tuple[F32Array, ...]:
    """The zone box of each crop, each moved by up to ``ALIGN_PX`` to line up with the first
    crop's, so camera jitter between taught frames does not blur the class mean."""
    if not crops:
        return ()
    x0, y0, x1, y1 = box
    anchor = crops[0][y0:y1, x0:x1]
    out = [anchor]
    for crop in crops[1:]:
        ax0, ay0 = max(0, x0 - ALIGN_PX), max(0, y0 - ALIGN_PX)
        ay1, ax1 = min(crop.shape[0], y1 + ALIGN_PX), min(crop.shape[1], x1 + ALIGN_PX)
        region = crop[ay0:ay1, ax0:ax1]
        _, _, _, (dx, dy) = cv2.minMaxLoc(cv2.matchTemplate(region, anchor, cv2.TM_CCOEFF_NORMED))
        out.append(np.ascontiguousarray(region[dy : dy + y1 - y0, dx : dx + x1 - x0]))
    return tuple(out)


@dataclass(frozen=True)
class Separation:
    """How well the taught classes stand apart (zero shift NCC, each image left out of its
    own class mean): ``own_min`` should be high, ``other_max`` well below it."""

    counts: dict[str, int]
    own_min: float
    other_max: float
    misfits: tuple[int, ...]  # indices (per class order in ``images``) closer to the other class

    @property
    def gap(self) -> float:
        return self.own_min - self.other_max


def separation(taught: TaughtClasses) -> Separation | None:
    """None until both classes have at least two images."""
    crops = taught.crops
    if any(len(crops.get(label, ())) < 2 for label in LABELS):
        return None
    own_scores: list[float] = []
    other_scores: list[float] = []
    misfits: list[int] = []
    index = 0
    for label in LABELS:
        other = class_template(crops[_other(label)])
        for k, crop in enumerate(crops[label]):
            rest = [c for j, c in enumerate(crops[label]) if j != k]
            z = normalised(crop)
            own = float(np.mean(z * class_template(rest)))
            against = float(np.mean(z * other))
            own_scores.append(own)
            other_scores.append(against)
            if against >= own:
                misfits.append(index)
            index += 1
    return Separation(
        {label: len(crops[label]) for label in LABELS},
        min(own_scores),
        max(other_scores),
        tuple(misfits),
    )


def misfit_files(manifest: Manifest, found: Separation) -> list[str]:
    """The image files ``found.misfits`` points at (indices run class by class)."""
    ordered = [image.file for label in LABELS for image in manifest.images if image.label == label]
    return [ordered[k] for k in found.misfits if k < len(ordered)]


def poor_teaching(manifest: Manifest, found: Separation) -> str | None:
    """What is wrong with a teaching whose classes do not stand apart; None when they do."""
    if found.gap >= 0 and not found.misfits:
        return None
    names = misfit_files(manifest, found)
    which = (
        f"; {len(names)} image(s) look more like the other class: {', '.join(names)}"
        if names
        else ""
    )
    return (
        f"the taught classes do not stand apart (gap {found.gap:.2f}, should be above 0)"
        f"{which}; check their labels, or forget that class and teach it again with the "
        "part clearly present or absent"
    )


def _other(label: Label) -> Label:
    return "absent" if label == "present" else "present"


def _crop_box(zone_box: Box, width_px: int, height_px: int) -> Box:
    x0, y0, x1, y1 = zone_box
    return (
        max(0, x0 - CROP_MARGIN_PX),
        max(0, y0 - CROP_MARGIN_PX),
        min(width_px, x1 + CROP_MARGIN_PX),
        min(height_px, y1 + CROP_MARGIN_PX),
    )


def _require_same_geometry(manifest: Manifest, zone: ZoneSpec, zone_box: Box) -> None:
    if manifest.zone != zone.id or manifest.zone_box_px != zone_box:
        raise ConfigError(
            f"zone '{zone.id}' was taught with box {list(manifest.zone_box_px)} and is "
            f"{list(zone_box)} now; clear its references first (--clear)"
        )


def _crop(image: U8Array, box: Box, source: str) -> U8Array:
    x0, y0, x1, y1 = box
    if image.ndim != 3 or image.shape[0] < y1 or image.shape[1] < x1:
        raise InputFileError(
            f"{source}: a {image.shape[1]}x{image.shape[0]} image does not hold "
            f"the zone's crop box {list(box)}"
        )
    return np.ascontiguousarray(image[y0:y1, x0:x1])


def _next_file(folder: Path, manifest: Manifest, label: Label) -> str:
    """The next free number of the class, counting files on disk as well as listed ones."""
    numbers = [
        int(m.group(2))
        for image in manifest.images
        if (m := TAUGHT_FILE_PATTERN.fullmatch(image.file)) and m.group(1) == label
    ]
    existing = (
        [
            int(m.group(2))
            for path in folder.glob(f"{label}-*.png")
            if (m := TAUGHT_FILE_PATTERN.fullmatch(path.name))
        ]
        if folder.exists()
        else []
    )
    return f"{label}-{max(numbers + existing, default=0) + 1:03d}.png"


def describe(manifest: Manifest) -> str:
    return (
        f"{manifest.zone}: {manifest.count('present')} present, {manifest.count('absent')} absent"
    )


def taught_zones(config: StationConfig) -> Sequence[tuple[ZoneSpec, Manifest | None]]:
    """Every check zone with its manifest (None when not taught)."""
    return [
        (zone, read_manifest(teaching_dir(config, zone.id)))
        for zone in config.zone_specs()
        if zone.kind == "check"
    ]
