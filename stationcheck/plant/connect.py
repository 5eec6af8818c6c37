"""Connections to the plant database: the URL names server, database, user and TLS options
(``sslmode``, ``sslrootcert`` ... go straight to libpq); the password comes from an environment
variable or a file, never from the station config or the command line."""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING, Any
from urllib.parse import urlsplit

from stationcheck.errors import MissingExtraError, PlantDatabaseError, first_line

if TYPE_CHECKING:
    import psycopg

PASSWORD_ENV = "STATIONCHECK_PG_PASSWORD"
PASSWORD_FILE_ENV = "STATIONCHECK_PG_PASSWORD_FILE"
CONNECT_TIMEOUT_S = 5
INSTALL_HINT = "the plant database needs the 'plant' extra: pip install 'stationcheck[plant]'"


def is_plant_url(text: str) -> bool:
    return text.startswith(("postgresql://", "postgres://"))


def driver() -> Any:
    """The psycopg module, or a clear error naming the extra to install."""
    try:
        import psycopg
    except ImportError as exc:
        raise MissingExtraError(INSTALL_HINT) from exc
    return psycopg


def check_url(url: str) -> str:
    if not is_plant_url(url):
        raise PlantDatabaseError(
            f"expected a postgresql://USER@HOST[:PORT]/DATABASE URL, got {url!r}"
        )
    if urlsplit(url).password is not None:
        raise PlantDatabaseError(
            f"the URL holds a password; put it in {PASSWORD_ENV} or a file named by "
            f"{PASSWORD_FILE_ENV} or --password-file instead (a URL shows in the process list)"
        )
    return url


def password(password_file: Path | None = None) -> str | None:
    """The password from ``password_file``, the file named by the environment, or the
    environment variable; None lets libpq use ~/.pgpass or a client certificate."""
    file = password_file or (
        Path(os.environ[PASSWORD_FILE_ENV]) if os.environ.get(PASSWORD_FILE_ENV) else None
    )
    if file is not None:
        try:
            return file.read_text(encoding="utf-8").strip()
        except OSError as exc:
            raise PlantDatabaseError(f"cannot read the password file {file}: {exc}") from exc
    return os.environ.get(PASSWORD_ENV) or None


def redacted(url: str) -> str:
    """The URL without its query (TLS file paths), for log lines."""
    return url.split("?", 1)[0]


def connect(
    url: str,
    password_file: Path | None = None,
    *,
    autocommit: bool = True,
    application: str = "stationcheck",
    **options: Any,
) -> psycopg.Connection[Any]:
    """An open connection; a refused or unreachable server is a :class:`PlantDatabaseError`."""
    psycopg_module = driver()
    extra: dict[str, Any] = {
        "connect_timeout": CONNECT_TIMEOUT_S,
        "application_name": application,
        **options,
    }
    secret = password(password_file)
    if secret is not None:
        extra["password"] = secret
    try:
        conn: psycopg.Connection[Any] = psycopg_module.connect(
            check_url(url), autocommit=autocommit, **extra
        )
    except psycopg_module.Error as exc:
        raise PlantDatabaseError(f"plant database {redacted(url)}: {first_line(exc)}") from exc
    return conn
