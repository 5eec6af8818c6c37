"""The files a station config refers to, and the findings when one of them is missing.

A station is one folder: the config, its reference frame, the taught references of its check
zones (one folder per zone beside the reference frame: ``<zone>/references.yaml`` and the crops
it lists) and, when the config names one, its model file. ``stationcheck check`` reports every
referenced file that is not there (error), naming the path it tried, and every check zone not
taught yet (warning: its check stays undecided, so no unit passes it).

Rules (E = error, W = warning):

* E ``station.reference_frame`` not a file.
* E ``model.path`` (when not ``bundled``) not a file.
* W ``camera.source`` names a video file (not an index or a URL) that is not there: ``run``
  and ``replay`` then need ``--video``; the video is the station's camera stand-in, not part of
  its folder, so other commands still work.
* E a check zone's ``references.yaml`` unreadable, or an image it lists not a file.
* W a check zone with no ``references.yaml``.
* W a fastener zone reaching into the reference frame's edge band (4 px, the tracker's): a tip
  there counts as out of view, so that position could never be enabled.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from stationcheck.config import yaml_text
from stationcheck.config.error_wording import Location
from stationcheck.config.findings import Finding, error, warning
from stationcheck.config.parts import ConfigParts
from stationcheck.config.schema import BUNDLED_MODEL, resolve_path
from stationcheck.errors import ConfigError

MANIFEST_NAME = "references.yaml"


@dataclass(frozen=True)
class ReferencedFile:
    """One file (or teaching folder) the config names, as written and as resolved."""

    where: Location  # the key that names it
    what: str  # "reference frame", "model file", "video file", "taught references"
    written: str  # the text in the config (for a teaching folder: the zone id)
    path: Path  # absolute


def teaching_folder(reference_frame: Path, zone_id: str) -> Path:
    """Where the taught references of ``zone_id`` live: beside the reference frame."""
    return reference_frame.parent / zone_id


def referenced_files(
    data: dict[str, Any], parts: ConfigParts, base_dir: Path
) -> list[ReferencedFile]:
    """Every file the config names (the teaching folders of its check zones included)."""
    found: list[ReferencedFile] = []
    reference = _text_at(data, "station", "reference_frame")
    if reference is not None:
        found.append(
            ReferencedFile(
                ("station", "reference_frame"),
                "reference frame",
                reference,
                resolve_path(base_dir, reference),
            )
        )
    model = _text_at(data, "model", "path")
    if model is not None and model != BUNDLED_MODEL:
        found.append(
            ReferencedFile(("model", "path"), "model file", model, resolve_path(base_dir, model))
        )
    source = _text_at(data, "camera", "source")
    if source is not None and "://" not in source:
        found.append(
            ReferencedFile(
                ("camera", "source"), "video file", source, resolve_path(base_dir, source)
            )
        )
    if reference is not None:
        frame = resolve_path(base_dir, reference)
        seen: set[str] = set()
        for zone in parts.zones:
            if zone.kind == "check" and zone.id not in seen:
                seen.add(zone.id)
                found.append(
                    ReferencedFile(
                        zone.path, "taught references", zone.id, teaching_folder(frame, zone.id)
                    )
                )
    return found


def taught_image_files(folder: Path) -> list[str] | None:
    """The image files the zone's ``references.yaml`` lists; None when there is none.

    Raises:
        ConfigError: the manifest cannot be read or lists no images in the known form.
    """
    manifest = folder / MANIFEST_NAME
    if not manifest.is_file():
        return None
    try:
        text = manifest.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{manifest}: cannot be read ({exc})") from exc
    data = yaml_text.load_plain(text, str(manifest))
    images = data.get("images") if isinstance(data, dict) else None
    if not isinstance(images, list) or not all(
        isinstance(item, dict) and isinstance(item.get("file"), str) for item in images
    ):
        raise ConfigError(f"{manifest}: 'images' must be a list of entries with a 'file'")
    return [item["file"] for item in images]


def lint_files(data: dict[str, Any], parts: ConfigParts, base_dir: Path) -> list[Finding]:
    findings: list[Finding] = []
    for ref in referenced_files(data, parts, base_dir):
        findings.extend(_file_findings(ref, base_dir))
        if ref.what == "reference frame" and ref.path.is_file():
            findings.extend(_edge_band_findings(parts, ref.path))
    return findings


def _edge_band_findings(parts: ConfigParts, reference: Path) -> Iterator[Finding]:
    import cv2

    from stationcheck.core.tracker import PICTURE_EDGE_BAND_PX, at_picture_edge

    image = cv2.imread(str(reference), cv2.IMREAD_UNCHANGED)
    if image is None:
        return  # an unreadable picture is reported where the picture is used
    size = (int(image.shape[1]), int(image.shape[0]))
    for zone in parts.zones:
        if zone.kind != "fastener" or zone.polygon_px is None:
            continue
        if any(at_picture_edge(x, y, size, PICTURE_EDGE_BAND_PX) for x, y in zone.polygon_px):
            yield warning(
                zone.path,
                f"fastener zone '{zone.id}' reaches within {PICTURE_EDGE_BAND_PX:g} px of the "
                f"picture's edge ({size[0]} x {size[1]}): a tip there counts as out of view "
                "(it cannot be told from one just beyond the edge); move the camera so the "
                "position lies well inside the picture",
            )


def _file_findings(ref: ReferencedFile, base_dir: Path) -> Iterator[Finding]:
    if ref.what != "taught references":
        if not ref.path.is_file():
            hint = "; run and replay need --video" if ref.what == "video file" else ""
            yield (warning if ref.what == "video file" else error)(
                ref.where,
                f"{ref.what} '{ref.written}' not found: tried {ref.path} "
                f"(relative paths start at the config's folder {base_dir}){hint}",
            )
        return
    try:
        files = taught_image_files(ref.path)
    except ConfigError as exc:
        yield error(ref.where, f"check zone '{ref.written}': {exc}")
        return
    if files is None:
        yield warning(
            ref.where,
            f"check zone '{ref.written}' is not taught (no "
            f"{ref.path / MANIFEST_NAME}): its check stays undecided and no unit "
            "passes it; teach it (setup screen's Teach tab or 'stationcheck teach')",
        )
        return
    missing = [name for name in files if not (ref.path / name).is_file()]
    if missing:
        shown = ", ".join(missing[:5]) + (
            f" and {len(missing) - 5} more" if len(missing) > 5 else ""
        )
        yield error(
            ref.where,
            f"check zone '{ref.written}': {len(missing)} taught image(s) "
            f"listed in {ref.path / MANIFEST_NAME} not found: {shown}",
        )


def _text_at(data: dict[str, Any], section: str, key: str) -> str | None:
    part = data.get(section)
    value = part.get(key) if isinstance(part, dict) else None
    return value if isinstance(value, str) and value.strip() else None
