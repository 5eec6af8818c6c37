"""Checks of how the entries of a config refer to each other.

Rules (E = error, W = warning):

* E a zone id or step id used twice.
* E a step naming a zone that does not exist, a zone of the wrong kind (fasten needs fastener
  zones, pick a bin zone, check a check zone), or a fasten step listing a zone twice.
* W a zone that no step uses.
* E ``stale_frame_ms`` no longer than one frame period (every frame would be stale, so the
  tool would never be enabled); W ``dwell_ms`` or ``lost_track_grace_ms`` shorter than one
  frame period (they act as a single frame).
* E two PLC signals sharing an address of the same table.

Taught references for check zones are not looked for here: their storage is owned by the
teaching code.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

from stationcheck.config.error_wording import Location, format_path
from stationcheck.config.findings import Finding, error, warning
from stationcheck.config.parts import ConfigParts, LocatedZone
from stationcheck.config.schema import STEP_ZONE_KIND


def lint_references(parts: ConfigParts) -> list[Finding]:
    findings = _duplicate_ids(((zone.id, zone.id_path) for zone in parts.zones), "zone")
    findings += _duplicate_ids(
        ((step.id, step.path + ("id",)) for step in parts.steps if step.id is not None), "step"
    )
    findings += _step_zone_findings(parts)
    findings += _unused_zone_findings(parts)
    findings += _timing_findings(parts)
    findings += _address_findings(parts)
    return findings


def _duplicate_ids(ids: Iterable[tuple[str, Location]], noun: str) -> list[Finding]:
    first: dict[str, Location] = {}
    findings = []
    for ident, path in ids:
        if ident in first:
            findings.append(
                error(
                    path,
                    f"{noun} id '{ident}' is already used by "
                    f"{format_path(first[ident])}; ids must be unique",
                )
            )
        else:
            first[ident] = path
    return findings


def _step_zone_findings(parts: ConfigParts) -> list[Finding]:
    zones: dict[str, LocatedZone] = {}
    for zone in parts.zones:
        zones.setdefault(zone.id, zone)
    findings: list[Finding] = []
    for step in parts.steps:
        wanted = STEP_ZONE_KIND.get(step.kind)
        if wanted is None:
            continue
        seen: dict[str, Location] = {}
        for path, name in step.zone_refs:
            if not name.strip():
                continue  # an empty name is the schema's error, once
            if name in seen:
                findings.append(
                    error(
                        path,
                        f"'{name}' is already listed in this step at "
                        f"{format_path(seen[name])}; each position is fastened once "
                        "per step (add a second step for a second pass)",
                    )
                )
                continue
            seen[name] = path
            finding = _zone_ref_finding(path, name, wanted, step.kind, zones)
            if finding is not None:
                findings.append(finding)
    return findings


def _zone_ref_finding(
    path: Location,
    name: str,
    wanted: str,
    step_kind: str,
    zones: dict[str, LocatedZone],
) -> Finding | None:
    zone = zones.get(name)
    if zone is None:
        close = difflib.get_close_matches(name, list(zones), n=1, cutoff=0.6)
        hint = f" (did you mean '{close[0]}'?)" if close else ""
        return error(path, f"no zone named '{name}'{hint}; {_listing(zones, wanted)}")
    if zone.kind is None:
        return None  # the zone's kind has its own error
    if zone.kind != wanted:
        article = "an" if step_kind[0] in "aeiou" else "a"
        return error(
            path,
            f"'{name}' is a {zone.kind} zone, but {article} {step_kind} step "
            f"needs a {wanted} zone; {_listing(zones, wanted)}",
        )
    return None


def _listing(zones: dict[str, LocatedZone], wanted: str) -> str:
    """The zones of the wanted kind, written only for a finding (a list per reference would
    make a large station's check quadratic)."""
    of_kind = [zid for zid, zone in zones.items() if zone.kind == wanted]
    if not of_kind:
        return f"there are no {wanted} zones"
    more = f" and {len(of_kind) - 20} more" if len(of_kind) > 20 else ""
    return f"{wanted} zones are: {', '.join(of_kind[:20])}{more}"


def _unused_zone_findings(parts: ConfigParts) -> list[Finding]:
    used = parts.referenced_zone_ids
    unused: dict[Location, list[str]] = {}
    for zone in parts.zones:
        if zone.id not in used:
            unused.setdefault(zone.path, []).append(zone.id)
    findings = []
    for path, ids in unused.items():
        if len(ids) == 1:
            text = f"zone '{ids[0]}' is not used by any step"
        else:
            text = f"zones {', '.join(ids)} are not used by any step"
        findings.append(warning(path, text))
    return findings


def _timing_findings(parts: ConfigParts) -> list[Finding]:
    if parts.camera is None or parts.thresholds is None:
        return []
    frame_ms = 1000.0 / parts.camera.fps
    at_fps = f"one frame at {parts.camera.fps:g} fps is {frame_ms:.1f} ms"
    limits = parts.thresholds
    findings = []
    if limits.stale_frame_ms <= frame_ms:
        findings.append(
            error(
                ("thresholds", "stale_frame_ms"),
                (
                    f"{limits.stale_frame_ms:g} ms is not longer than one frame ({at_fps}); every frame "
                    "would count as stale and the tool would never be enabled"
                ),
            )
        )
    for name in ("dwell_ms", "lost_track_grace_ms"):
        value = getattr(limits, name)
        if 0 < value < frame_ms:
            findings.append(
                warning(
                    ("thresholds", name),
                    (f"{value:g} ms is shorter than one frame ({at_fps}), so it acts as one frame"),
                )
            )
    return findings


def _address_findings(parts: ConfigParts) -> list[Finding]:
    """The same check ``run`` makes when it builds the map: unknown signals, wrong tables or
    counts, addresses past the end, overlaps with any signal (moved or at its default)."""
    from stationcheck.plc.address_map import address_map_findings

    overrides = {signal.name: signal.entry for signal in parts.signals}
    _, problems = address_map_findings(overrides, server=parts.plc_server)
    return [error(path, message) for path, message in problems]
