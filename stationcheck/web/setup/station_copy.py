"""Saving a station config into another folder without leaving its files behind.

Relative paths in a config start at the config's folder, so a config saved elsewhere would
name files that are not there. Before such a save, every file the config refers to that lies
inside the old config's folder (reference frame, taught references of each check zone, model
file and the refine model it names) is copied to the same relative place beside the new config; a file outside that folder
(and the camera's video, never copied: it stands in for the camera) stays where it is and the
config's path to it is rewritten so it still reaches it from the new folder.
"""

from __future__ import annotations

import copy
import filecmp
import logging
import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from stationcheck.config.parts import parts_of_data
from stationcheck.config.schema import resolve_path
from stationcheck.config.station_files import (
    MANIFEST_NAME,
    ReferencedFile,
    referenced_files,
    taught_image_files,
    teaching_folder,
)
from stationcheck.errors import ConfigError, InputFileError, StationcheckError
from stationcheck.web.server import WebError
from stationcheck.web.setup.workspace import Workspace

log = logging.getLogger(__name__)


@dataclass
class CarryPlan:
    """What a save into ``new_base`` copies (source -> target) and which paths it rewrites."""

    data: dict[str, Any]
    copies: list[tuple[Path, Path]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def plan_carry(
    data: dict[str, Any], old_base: Path, new_base: Path, workspace: Workspace
) -> CarryPlan:
    """The copies and path changes that keep ``data`` whole when saved in ``new_base``.

    Raises:
        WebError: 409 when a copy would overwrite a different file already there.
    """
    plan = CarryPlan(copy.deepcopy(data))
    if old_base.resolve() == new_base.resolve():
        return plan
    refs = referenced_files(data, parts_of_data(data), old_base)
    new_reference: Path | None = None
    for ref in refs:
        if ref.what == "taught references":
            continue
        target = _carry_one(plan, ref, old_base, new_base, workspace)
        if ref.what == "reference frame":
            new_reference = target
    for ref in refs:
        if ref.what == "taught references" and new_reference is not None:
            _carry_teaching(plan, ref, teaching_folder(new_reference, ref.written), workspace)
    clashes = [
        target
        for source, target in plan.copies
        if target.exists() and not filecmp.cmp(source, target, shallow=False)
    ]
    if clashes:
        shown = ", ".join(workspace.shown(path) for path in clashes[:3])
        raise WebError(
            409,
            f"not saved: the new folder already holds different files at "
            f"{shown}; save into an empty folder or remove them first",
        )
    return plan


def carry(plan: CarryPlan) -> None:
    """Make the copies of ``plan`` (before the config itself is written)."""
    for source, target in plan.copies:
        if target.exists():
            continue
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(source, target)
        except OSError as exc:
            raise InputFileError(f"cannot copy {source} to {target}: {exc}") from exc
        log.info("copied %s to %s", source, target)


def _carry_one(
    plan: CarryPlan, ref: ReferencedFile, old_base: Path, new_base: Path, workspace: Workspace
) -> Path:
    """Copy or re-point one file; returns where it is for the new config."""
    written = Path(ref.written).expanduser()
    inside_old = ref.path.is_relative_to(old_base.resolve()) and not written.is_absolute()
    if inside_old and ref.what != "video file":
        target = resolve_path(new_base, ref.written)
        workspace.inside(target, new_base)
        if ref.path.is_file():
            plan.copies.append((ref.path, target))
            plan.notes.append(f"copied {ref.what} to {workspace.shown(target)}")
            if ref.what == "model file":
                for companion in _model_companions(ref.path):
                    plan.copies.append((companion, workspace.inside(companion.name, target.parent)))
        return target
    if written.is_absolute():
        return ref.path
    rewritten = Path(os.path.relpath(ref.path, new_base)).as_posix()
    section, key = str(ref.where[0]), str(ref.where[1])
    plan.data[section][key] = rewritten
    plan.notes.append(
        f"{ref.what} stays at {workspace.shown(ref.path)} ({section}.{key} is now '{rewritten}')"
    )
    return ref.path


def _model_companions(model: Path) -> list[Path]:
    """The refine model a coarse model names in its metadata (it must sit beside it)."""
    from stationcheck.vision.onnx_model import KeypointModel

    try:
        name = KeypointModel(model).info.refine_model
    except StationcheckError:
        return []  # an unusable model is the check's finding, not a reason to refuse a save
    companion = model.parent / name if name else None
    return [companion] if companion is not None and companion.is_file() else []


def _carry_teaching(
    plan: CarryPlan, ref: ReferencedFile, target: Path, workspace: Workspace
) -> None:
    if target == ref.path:
        return
    try:
        files = taught_image_files(ref.path)
    except ConfigError as exc:
        raise WebError(409, f"not saved: cannot carry the taught references: {exc}") from exc
    if files is None:
        return
    workspace.inside(target, target)
    for name in [MANIFEST_NAME, *files]:
        if Path(name).name == name and (ref.path / name).is_file():
            plan.copies.append((ref.path / name, target / name))
    plan.notes.append(
        f"copied taught references of '{ref.written}' ({len(files)} images) to "
        f"{workspace.shown(target)}"
    )
