"""Forwarding beside a live run: ``stationcheck forward`` in a child process, so its database
work never takes the frame loop's interpreter lock; its status comes back as JSON lines."""

from __future__ import annotations

import json
import logging
import subprocess
import sys
import threading
from pathlib import Path
from typing import IO

from stationcheck.plant.forwarder import ForwardStatus

logger = logging.getLogger(__name__)

STOP_TIMEOUT_S = 10.0
LAG_WARNING_S = 60.0


class ForwardChild:
    """The forwarder process of a running station; :meth:`stop` ends it."""

    def __init__(
        self, config: Path, url: str, log: Path | None = None, password_file: Path | None = None
    ) -> None:
        command = [
            sys.executable,
            "-m",
            "stationcheck",
            "forward",
            "--config",
            str(config),
            "--to",
            url,
            "--status-json",
        ]
        if log is not None:
            command += ["--log", str(log)]
        if password_file is not None:
            command += ["--password-file", str(password_file)]
        self._process = subprocess.Popen(command, stdout=subprocess.PIPE, text=True)
        self._status: ForwardStatus | None = None
        self._lock = threading.Lock()
        self._warned = False
        assert self._process.stdout is not None
        self._reader = threading.Thread(
            target=self._read, args=(self._process.stdout,), daemon=True, name="forward-status"
        )
        self._reader.start()

    @property
    def pid(self) -> int:
        return self._process.pid

    @property
    def status(self) -> ForwardStatus | None:
        with self._lock:
            return self._status

    def _read(self, stream: IO[str]) -> None:
        for line in stream:
            try:
                status = ForwardStatus(**json.loads(line))
            except (ValueError, TypeError):
                logger.warning("forwarder said: %s", line.strip())
                continue
            with self._lock:
                self._status = status
            if status.lag_s > LAG_WARNING_S and not self._warned:
                logger.warning("%s", status.line())
            self._warned = status.lag_s > LAG_WARNING_S

    def stop(self) -> int | None:
        """End the child (SIGTERM, then SIGKILL after a grace time); its exit code."""
        if self._process.poll() is None:
            self._process.terminate()
            try:
                self._process.wait(STOP_TIMEOUT_S)
            except subprocess.TimeoutExpired:
                self._process.kill()
                self._process.wait()
        self._reader.join(1.0)
        if self._process.stdout is not None:
            self._process.stdout.close()
        return self._process.returncode

    def line(self) -> str:
        status = self.status
        code = self._process.poll()
        ended = f" (forwarder ended with exit code {code})" if code not in (None, 0, -15) else ""
        return (status.line() if status is not None else "forwarding: no status yet") + ended
