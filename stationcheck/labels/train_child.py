"""Fine-tuning as a child process the setup screen can watch and cancel.

The child prints one JSON object per line on stdout: while training
``{"phase": str, "step": int, "max_steps": int, "elapsed_s": float, "left_s": float}``, and last
``{"done": true, "model": "<path>", "fitness": {...}}`` or ``{"error": "<one line>"}``. Other
lines are kept as the last words of the child (for an error message), never parsed as progress.
"""

from __future__ import annotations

import json
import logging
import subprocess
import sys
import threading
from collections import deque
from pathlib import Path
from typing import Any

log = logging.getLogger(__name__)

TAIL_LINES = 20


def train_command(config_path: Path) -> list[str]:
    """The product's fine-tune: ``stationcheck train --station CONFIG --progress-json``."""
    return [
        sys.executable, "-m", "stationcheck", "train",
        "--station", str(config_path), "--progress-json",
    ]  # fmt: skip


class TrainingChild:
    """One running (or finished) fine-tune; ``state()`` is what the screen shows."""

    def __init__(self, command: list[str], cwd: Path) -> None:
        self.command = command
        self._lock = threading.Lock()
        self._progress: dict[str, Any] = {}
        self._result: dict[str, Any] | None = None
        self._cancelled = False
        self._tail: deque[str] = deque(maxlen=TAIL_LINES)
        self._process: subprocess.Popen[str] | None = None
        try:
            self._process = subprocess.Popen(
                command, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                bufsize=1,
            )  # fmt: skip
        except OSError as exc:
            self._result = {"error": f"cannot start the training: {exc}"}
            return
        self._errors = threading.Thread(
            target=self._read_errors, name="training-errors", daemon=True
        )
        self._errors.start()
        threading.Thread(target=self._read, name="training-output", daemon=True).start()

    def _read(self) -> None:
        assert self._process is not None and self._process.stdout is not None
        for line in self._process.stdout:
            message = _parse(line)
            with self._lock:
                if message is None:
                    self._tail.append(line.rstrip())
                elif "done" in message or "error" in message:
                    self._result = message
                else:
                    self._progress = message
        self._process.stdout.close()
        code = self._process.wait()
        self._errors.join(timeout=5)  # its last words explain a failure
        with self._lock:
            if self._cancelled:
                self._result = {"error": "cancelled"}
            elif self._result is None:
                last = self._tail[-1] if self._tail else "no result line"
                self._result = {"error": f"the training stopped (exit code {code}): {last}"}
        log.info("training child ended with exit code %s", code)

    def _read_errors(self) -> None:
        assert self._process is not None and self._process.stderr is not None
        for line in self._process.stderr:
            if line.strip():
                with self._lock:
                    self._tail.append(line.rstrip())
        self._process.stderr.close()

    @property
    def running(self) -> bool:
        return self._process is not None and self._process.poll() is None

    def cancel(self) -> None:
        """Ends the child (terminate, then kill if it does not go within 5 s)."""
        if self._process is None or self._process.poll() is not None:
            return
        with self._lock:
            self._cancelled = True
        self._process.terminate()
        try:
            self._process.wait(timeout=5)
        except subprocess.TimeoutExpired:
            self._process.kill()
            self._process.wait(timeout=5)

    def state(self) -> dict[str, Any]:
        with self._lock:
            result = None if self.running else self._result
            return {"running": self.running, "progress": dict(self._progress), "result": result}


def _parse(line: str) -> dict[str, Any] | None:
    text = line.strip()
    if not text.startswith("{"):
        return None
    try:
        value = json.loads(text)
    except ValueError:
        return None
    return value if isinstance(value, dict) else None
