"""The folder the setup screen may touch, and the config being edited in it.

Every path the page names (where to save, the reference frame, a video, taught images) is
resolved against the config's folder and must stay inside the workspace root, symlinks
followed; anything else is refused with 403.
"""

from __future__ import annotations

import logging
import os
import threading
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ruamel.yaml.comments import CommentedMap

from stationcheck.errors import InputFileError
from stationcheck.web.server import WebError
from stationcheck.web.setup import yaml_document

log = logging.getLogger(__name__)

CONFIG_SUFFIXES = (".yaml", ".yml")
DEFAULT_NEW_NAME = "station.yaml"
SKIPPED_DIRS = frozenset({"node_modules", "__pycache__", "venv"})
MAX_LISTED_FILES = 200
MAX_VISITED_ENTRIES = 20_000


def default_root(config_path: Path | None, cwd: Path) -> Path:
    """The start folder, or the config's own folder when the config lies outside it."""
    cwd = cwd.resolve()
    if config_path is None:
        return cwd
    folder = config_path.resolve().parent
    return cwd if folder.is_relative_to(cwd) else folder


@dataclass
class Workspace:
    root: Path

    def __post_init__(self) -> None:
        self.root = self.root.resolve()

    def inside(self, path_text: str | Path, base: Path) -> Path:
        """``path_text`` (relative to ``base``) as an absolute path inside the root; 403 if not."""
        text = str(path_text)
        if not text.strip() or "\x00" in text:
            raise WebError(400, "give a file path")
        candidate = Path(text).expanduser()
        if not candidate.is_absolute():
            candidate = base / candidate
        resolved = Path(os.path.normpath(candidate)).resolve()
        if not resolved.is_relative_to(self.root):
            common = os.path.commonpath([self.root, resolved])
            raise WebError(
                403,
                f"refused: '{text}' is {resolved}, outside the setup folder "
                f"{self.root}; paths start at {base}. Name a file inside the "
                f"setup folder, or start setup again with --root {common} "
                "(a folder holding both)",
            )
        return resolved

    def files(self, suffixes: tuple[str, ...], base: Path) -> list[str]:
        """Files under the root with one of ``suffixes``, named as the page names paths (from
        ``base``); hidden folders and virtual environments are skipped, the walk is bounded."""
        found: list[str] = []
        visited = 0
        for folder, dirs, names in os.walk(self.root):
            dirs[:] = sorted(d for d in dirs if not d.startswith(".") and d not in SKIPPED_DIRS)
            visited += len(names) + len(dirs)
            for name in sorted(names):
                if name.lower().endswith(suffixes) and not name.startswith("."):
                    found.append(Path(os.path.relpath(Path(folder) / name, base)).as_posix())
            if len(found) >= MAX_LISTED_FILES or visited > MAX_VISITED_ENTRIES:
                break
        return found[:MAX_LISTED_FILES]

    def shown(self, path: Path) -> str:
        """How the page names a path: relative to the root."""
        try:
            return str(path.relative_to(self.root))
        except ValueError:
            return str(path)


@dataclass
class SetupSession:
    """The config being edited; handlers run on several threads, so changes take the lock."""

    workspace: Workspace
    config_path: Path | None
    document: CommentedMap = field(default_factory=CommentedMap)
    lock: threading.Lock = field(default_factory=threading.Lock)

    @classmethod
    def open(cls, workspace: Workspace, config_path: Path | None) -> SetupSession:
        """The file at ``config_path`` (a new document when None or not there yet)."""
        if config_path is None:
            return cls(workspace, None, yaml_document.new_document("station/reference.png"))
        path = workspace.inside(config_path, Path.cwd())
        if path.exists():
            return cls(workspace, path, yaml_document.load_file(path))
        return cls(workspace, path, yaml_document.new_document(f"{path.stem}/reference.png"))

    @property
    def base_dir(self) -> Path:
        return self.config_path.parent if self.config_path is not None else self.workspace.root

    def data(self) -> dict[str, Any]:
        with self.lock:
            plain = yaml_document.to_plain(self.document)
        return plain if isinstance(plain, dict) else {}

    def resolve(self, path_text: str | Path) -> Path:
        return self.workspace.inside(path_text, self.base_dir)

    def existing_file(self, path_text: str | Path, what: str) -> Path:
        """``resolve`` for a file that must be there; 404 naming the path tried."""
        path = self.resolve(path_text)
        if not path.is_file():
            raise WebError(
                404,
                f"no such {what} '{path_text}': tried {path} (paths start at "
                f"the config's folder {self.base_dir})",
            )
        return path

    def reference_path(self, data: dict[str, Any]) -> Path:
        station = data.get("station")
        name = station.get("reference_frame") if isinstance(station, dict) else None
        if not isinstance(name, str) or not name.strip():
            raise WebError(404, "the config names no reference frame (station.reference_frame)")
        return self.resolve(name)

    def target_of(self, path_text: str | None) -> Path:
        """Where a save goes: ``path_text`` (from the config's folder), else the open file."""
        target = self.config_path
        if path_text:
            target = self.resolve(path_text)
        if target is None:
            target = self.resolve(DEFAULT_NEW_NAME)
        if target.suffix.lower() not in CONFIG_SUFFIXES:
            raise WebError(400, f"a station config is a .yaml file, not {target.name}")
        return target

    def save(self, data: dict[str, Any], path_text: str | None) -> Path:
        """Write ``data`` into the document in place and the document to its file."""
        target = self.target_of(path_text)
        with self.lock:
            yaml_document.merge_into(self.document, data)
            text = yaml_document.dump_text(self.document)
            try:
                target.parent.mkdir(parents=True, exist_ok=True)
                temporary = target.with_name(f".{target.name}.saving")
                temporary.write_text(text, encoding="utf-8")
                temporary.replace(target)
            except OSError as exc:
                raise InputFileError(f"cannot write {target}: {exc}") from exc
            self.config_path = target
        log.info("saved %s", target)
        return target
