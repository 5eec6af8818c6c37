"""Offering re-mapped zones after a camera move: as YAML to read, or as a new config file.

The new file is the old one's text with only two things changed: the ``zones:`` block (every
zone written out as a polygon carried through the estimated transform) and
``station.reference_frame`` (the frame the estimate was made on, saved as the new reference).
Everything else, comments included, stays as the engineer wrote it; the result is checked
before it is written.
"""

from __future__ import annotations

import os
import re
from collections.abc import Sequence
from pathlib import Path

from stationcheck.config import check_data, yaml_text
from stationcheck.core.plan import ZoneSpec
from stationcheck.errors import ConfigError

_ZONES_START = re.compile(r"^zones:\s*(#.*)?$")
_TOP_LEVEL = re.compile(r"^[^\s#]")
_REFERENCE = re.compile(r"^(?P<lead>\s+reference_frame:\s*)(?P<value>[^#\n]*?)(?P<tail>\s*#.*)?$")


def _number(value: float) -> str:
    return f"{round(value, 1):g}"


def _scalar(text: str) -> str:
    return yaml_text.scalar_text(text)


def zones_yaml(zones: Sequence[ZoneSpec], note: str = "") -> str:
    """A ``zones:`` block in the config's style, one polygon per zone."""
    lines = ["zones:"]
    if note:
        lines += [f"  # {line}" for line in note.splitlines()]
    for zone in zones:
        lines += [f"  - id: {zone.id}", f"    kind: {zone.kind}"]
        if zone.label:
            lines.append(f"    label: {_scalar(zone.label)}")
        points = ", ".join(f"[{_number(x)}, {_number(y)}]" for x, y in zone.polygon_px)
        lines.append(f"    polygon: [{points}]")
    return "\n".join(lines) + "\n"


def rewrite_config_text(text: str, zones_block: str, reference_frame: str) -> str:
    """The config text with its ``zones:`` block and ``reference_frame`` replaced.

    Raises:
        ConfigError: the text has no top-level ``zones:`` or no ``reference_frame:`` line.
    """
    lines = text.splitlines(keepends=True)
    start = next((i for i, line in enumerate(lines) if _ZONES_START.match(line)), None)
    if start is None:
        raise ConfigError("the config has no top-level 'zones:' line to replace")
    end = next((i for i in range(start + 1, len(lines)) if _TOP_LEVEL.match(lines[i])), len(lines))
    while end - 1 > start and (lines[end - 1].startswith("#") or not lines[end - 1].strip()):
        end -= 1  # comments and blank lines just before the next section belong to it
    block = zones_block if zones_block.endswith("\n") else zones_block + "\n"
    lines[start:end] = [block]
    for i, line in enumerate(lines):
        match = _REFERENCE.match(line.rstrip("\n"))
        if match:
            tail = match.group("tail") or ""
            lines[i] = f"{match.group('lead')}{reference_frame}{tail}\n"
            break
    else:
        raise ConfigError("the config has no 'reference_frame:' line to replace")
    return "".join(lines)


def write_remapped_config(
    source: Path, target: Path, zones: Sequence[ZoneSpec], reference_image: Path, note: str
) -> None:
    """Write ``target``: ``source`` with re-mapped zones and ``reference_image`` as reference.

    Raises:
        ConfigError: the source cannot be read, or the new config does not check out.
    """
    try:
        text = source.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{source}: cannot be read ({exc})") from exc
    relative = Path(os.path.relpath(reference_image.resolve(), target.resolve().parent)).as_posix()
    new_text = rewrite_config_text(text, zones_yaml(zones, note), relative)
    result = check_data(
        yaml_text.load_plain(new_text, str(target)),
        base_dir=target.resolve().parent,
        source=str(target),
    )
    if not result.ok:
        first = result.errors[0].format(result.source)
        raise ConfigError(f"the re-mapped config would not be valid: {first}")
    try:
        target.write_text(new_text, encoding="utf-8")
    except OSError as exc:
        raise ConfigError(f"{target}: cannot be written ({exc})") from exc
