"""The exception tree. Third-party errors are wrapped at the edge with ``raise ... from exc``.

The CLI turns any :class:`StationcheckError` into one line on stderr and the exit code of its
class; a traceback means a bug, not a user mistake.
"""

from __future__ import annotations


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message (its class name when it has none): what a
    one-line error or a log line shows of a third-party error."""
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def stop_requested(error: BaseException | None) -> bool:
    """True when a run ended because it was asked to (Ctrl-C, or SIGTERM, which the commands
    turn into KeyboardInterrupt) rather than because something failed."""
    return isinstance(error, KeyboardInterrupt)


class StationcheckError(Exception):
    """Root of every error stationcheck raises on purpose."""

    exit_code = 1


class ConfigError(StationcheckError):
    """A station config (or another input file) is malformed or inconsistent."""

    exit_code = 2


class InputFileError(StationcheckError):
    """A video, sidecar, dataset or other input file is missing, unreadable or corrupt."""

    exit_code = 3


class ModelError(StationcheckError):
    """A model file is missing, unreadable, or does not keep the model contract."""

    exit_code = 4


class ModelOutputError(ModelError):
    """A loaded model gave unusable output on one frame (NaN, infinite or all zero): that frame
    inhibits the tool with an alarm and the run goes on."""


class SignalLinkError(StationcheckError):
    """The PLC link is down, frozen or answered wrongly."""

    exit_code = 5


class StoreError(StationcheckError):
    """The step log cannot be written or read (full disk, locked or damaged file)."""

    exit_code = 6


class MissingExtraError(StationcheckError):
    """An optional extra (e.g. ``train``) is needed for this command but not installed."""

    exit_code = 7


class PlantDatabaseError(StoreError):
    """The plant database (PostgreSQL) cannot be reached, refused the login, or answered with
    something stationcheck did not expect."""
