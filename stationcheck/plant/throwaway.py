"""A throwaway PostgreSQL cluster from Debian's server binaries, for the tests and the bench:
initdb in a temporary folder as an unprivileged user (``postgres`` when running as root: initdb
refuses root), pg_ctl on a free loopback port, password (SCRAM) logins over TCP, stopped and
deleted at the end. Not for production: fsync is off."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

PG_BIN = Path("/usr/lib/postgresql/15/bin")
ADMIN = "plant_admin"
ADMIN_PASSWORD = "throwaway-admin-secret"
DATABASE = "plant"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class Cluster:
    folder: Path
    port: int
    user: str | None  # run the server as this user (None: as ourselves)

    def run(self, *args: str) -> subprocess.CompletedProcess[str]:
        command = [str(PG_BIN / args[0]), *args[1:]]
        if self.user is not None:
            command = ["runuser", "-u", self.user, "--", *command]
        return subprocess.run(command, capture_output=True, text=True, timeout=60, check=True)

    @property
    def data(self) -> Path:
        return self.folder / "data"

    admin: str = ADMIN
    password: str = ADMIN_PASSWORD

    def connect_admin(self) -> Any:
        from stationcheck.plant.connect import connect

        os.environ.setdefault("STATIONCHECK_PG_PASSWORD", self.password)
        return connect(self.url())

    def url(self, user: str = ADMIN, database: str = DATABASE) -> str:
        return f"postgresql://{user}@127.0.0.1:{self.port}/{database}?sslmode=disable"

    def start(self) -> None:
        self.run(
            "pg_ctl",
            "-D",
            str(self.data),
            "-l",
            str(self.folder / "server.log"),
            "-w",
            "-t",
            "30",
            "-o",
            f"-p {self.port} -k {self.folder} -c listen_addresses=127.0.0.1 -c fsync=off",
            "start",
        )

    def stop(self, mode: str = "fast") -> None:
        self.run("pg_ctl", "-D", str(self.data), "-m", mode, "-w", "stop")


@contextmanager
def throwaway_cluster(parent: Path | None = None) -> Iterator[Cluster]:
    if not (PG_BIN / "initdb").exists():
        from stationcheck.errors import PlantDatabaseError

        raise PlantDatabaseError(
            f"PostgreSQL server binaries not found in {PG_BIN}; install "
            "them with: apt-get install postgresql"
        )
    as_root = os.geteuid() == 0
    folder = Path(tempfile.mkdtemp(prefix="stationcheck-pg-", dir=parent))
    user = "postgres" if as_root else None
    if as_root:
        shutil.chown(folder, user="postgres")
    cluster = Cluster(folder, free_port(), user)
    pwfile = folder / "pw"
    pwfile.write_text(ADMIN_PASSWORD)
    if as_root:
        shutil.chown(pwfile, user="postgres")
    cluster.run(
        "initdb",
        "-D",
        str(cluster.data),
        "-U",
        ADMIN,
        f"--pwfile={pwfile}",
        "--auth-local=trust",
        "--auth-host=scram-sha-256",
        "-E",
        "UTF8",
        "--locale=C",
        "--no-sync",
    )
    cluster.start()
    try:
        cluster.run("createdb", "-h", str(folder), "-p", str(cluster.port), "-U", ADMIN, DATABASE)
        yield cluster
    finally:
        try:
            cluster.stop("immediate")
        except subprocess.CalledProcessError:
            pass  # already stopped
        shutil.rmtree(folder, ignore_errors=True)
