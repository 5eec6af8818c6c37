"""Teaching check zones from the setup screen, through the same functions as
``stationcheck teach``; the zone is taken from the document as edited (saved or not)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from stationcheck.config.error_wording import format_path
from stationcheck.config.parts import parts_of_data
from stationcheck.config.schema import ID_PATTERN
from stationcheck.config.station_files import MANIFEST_NAME, teaching_folder
from stationcheck.core.plan import ZoneSpec
from stationcheck.errors import StationcheckError
from stationcheck.judgements import teaching
from stationcheck.judgements.presence import LABELS
from stationcheck.web.server import WebError
from stationcheck.web.setup.frames import FrameRequest, grab
from stationcheck.web.setup.workspace import SetupSession


def check_zone_of(data: dict[str, Any], zone_id: str) -> ZoneSpec:
    if not ID_PATTERN.fullmatch(zone_id):
        raise WebError(400, f"'{zone_id}' is not a zone id")
    for zone in parts_of_data(data).zones:
        if zone.id == zone_id:
            if zone.kind != "check":
                raise WebError(400, f"'{zone_id}' is a {zone.kind} zone, not a check zone")
            if zone.polygon_px is None:
                raise WebError(400, f"zone '{zone_id}' has no usable outline yet")
            return ZoneSpec(id=zone.id, kind="check", polygon_px=zone.polygon_px)
    raise WebError(404, f"no zone named '{zone_id}'")


def folder_of(session: SetupSession, data: dict[str, Any], zone_id: str) -> Path:
    """``<reference frame folder>/<zone>``, inside the workspace."""
    reference = session.reference_path(data)
    return session.workspace.inside(zone_id, reference.parent)


def listing(session: SetupSession, data: dict[str, Any], zone_id: str) -> dict[str, Any]:
    zone = check_zone_of(data, zone_id)
    return _listing(zone, folder_of(session, data, zone.id))


def _listing(zone: ZoneSpec, folder: Path) -> dict[str, Any]:
    manifest = teaching.read_manifest(folder)
    if manifest is None:
        return {
            "zone": zone.id,
            "taught": False,
            "images": [],
            "present": 0,
            "absent": 0,
            "folder": str(folder),
            "poor": None,
            "note": "not taught: its check stays undecided",
        }
    images = [
        {"file": image.file, "label": image.label, "source": image.source}
        for image in manifest.images
    ]
    note = "teach at least two images of each class to see how well they separate"
    found = separation_of(folder, zone)
    poor = teaching.poor_teaching(manifest, found) if found is not None else None
    misfits = set(teaching.misfit_files(manifest, found)) if found is not None else set()
    if found is not None:
        note = (
            f"agreement within a class >= {found.own_min:.2f}; with the other class "
            f"<= {found.other_max:.2f} (gap {found.gap:.2f})"
        )
    return {
        "zone": zone.id,
        "taught": True,
        "images": [{**image, "misfit": image["file"] in misfits} for image in images],
        "present": manifest.count("present"),
        "absent": manifest.count("absent"),
        "folder": str(folder),
        "poor": poor,
        "note": note,
    }


_SEPARATIONS: dict[tuple[str, int, str], teaching.Separation | None] = {}


def separation_of(folder: Path, zone: ZoneSpec) -> teaching.Separation | None:
    """How well the zone's taught classes separate; kept until its manifest changes (the page
    asks on every edit)."""
    try:
        stamp = (folder / MANIFEST_NAME).stat().st_mtime_ns
    except OSError:
        return None
    key = (str(folder), stamp, repr(zone.polygon_px))
    if key not in _SEPARATIONS:
        taught = teaching.load_taught(folder, zone)
        if len(_SEPARATIONS) > 64:
            _SEPARATIONS.clear()
        _SEPARATIONS[key] = teaching.separation(taught) if taught is not None else None
    return _SEPARATIONS[key]


_POOR: dict[tuple[str, int, str], str | None] = {}


def poor_teaching_of(folder: Path, zone: ZoneSpec) -> str | None:
    """Why the zone's teaching is poor (None when it is fine or absent); kept until its manifest
    changes, like :func:`separation_of`, so an edit on the page reads no teaching file again."""
    try:
        stamp = (folder / MANIFEST_NAME).stat().st_mtime_ns
    except OSError:
        return None
    key = (str(folder), stamp, repr(zone.polygon_px))
    if key not in _POOR:
        manifest = teaching.read_manifest(folder)
        quality = separation_of(folder, zone)
        if len(_POOR) > 64:
            _POOR.clear()
        _POOR[key] = (
            teaching.poor_teaching(manifest, quality)
            if manifest is not None and quality is not None
            else None
        )
    return _POOR[key]


def teaching_findings(session: SetupSession, data: dict[str, Any]) -> list[dict[str, Any]]:
    """A warning for each check zone whose taught classes do not stand apart, naming the
    images that look more like the other class (the page shows it beside the zone)."""
    try:
        reference = session.reference_path(data)
    except WebError:
        return []
    found: list[dict[str, Any]] = []
    for located in parts_of_data(data).zones:
        if located.kind != "check" or located.polygon_px is None:
            continue
        try:
            poor = poor_teaching_of(
                teaching_folder(reference, located.id),
                ZoneSpec(id=located.id, kind="check", polygon_px=located.polygon_px),
            )
        except StationcheckError:
            continue  # a broken teaching folder is the file check's error
        if poor is not None:
            where = list(located.path)
            found.append(
                {
                    "severity": "warning",
                    "path": format_path(located.path),
                    "line": None,
                    "where": where,
                    "message": f"check zone '{located.id}': {poor}",
                }
            )
    return found


def teach_from_source(
    session: SetupSession, data: dict[str, Any], body: dict[str, Any]
) -> dict[str, Any]:
    zone = check_zone_of(data, str(body.get("zone") or ""))
    label = body.get("label")
    if label not in LABELS:
        raise WebError(400, "label must be 'present' or 'absent'")
    size = _camera_size(data)
    frames = grab(FrameRequest.from_json(body, session), size)
    folder = folder_of(session, data, zone.id)
    teaching.teach(folder, zone, label, frames, size)
    return _listing(zone, folder)


def clear(session: SetupSession, data: dict[str, Any], body: dict[str, Any]) -> dict[str, Any]:
    zone = check_zone_of(data, str(body.get("zone") or ""))
    label = body.get("label")
    if label is not None and label not in LABELS:
        raise WebError(400, "label must be 'present', 'absent' or left out")
    folder = folder_of(session, data, zone.id)
    teaching.clear(folder, label)
    return _listing(zone, folder)


def image_path(session: SetupSession, reference_frame: str, zone_id: str, file: str) -> Path:
    """A taught image of a zone; only names the teaching writes are served."""
    if not ID_PATTERN.fullmatch(zone_id) or not teaching.TAUGHT_FILE_PATTERN.fullmatch(file):
        raise WebError(403, "refused: not a taught image of a zone")
    folder = session.workspace.inside(zone_id, session.resolve(reference_frame).parent)
    path = session.workspace.inside(file, folder)
    if not path.is_file():
        raise WebError(404, f"no taught image {file}")
    return path


def _camera_size(data: dict[str, Any]) -> tuple[int, int]:
    camera = data.get("camera")
    if isinstance(camera, dict):
        width, height = camera.get("width_px"), camera.get("height_px")
        if isinstance(width, int) and isinstance(height, int) and width > 0 and height > 0:
            return width, height
    raise WebError(400, "set the camera's width_px and height_px first")
