"""A throwaway PostgreSQL server for the record tests: initdb + pg_ctl in a temporary
folder, on a free port of 127.0.0.1, run by an unprivileged user (the suite runs as root
in CI and PostgreSQL refuses to run as root).  One server per test session; each test
gets its own fresh database.
"""

from __future__ import annotations

import glob
import itertools
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
from pathlib import Path

PG_USER = "reagentplan-pg"


def find_bin() -> Path | None:
    """Folder of initdb/pg_ctl: on PATH, else Debian's /usr/lib/postgresql/N/bin."""
    found = shutil.which("initdb")
    if found:
        return Path(found).parent
    candidates = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"),
                        key=lambda p: int(Path(p).parts[-3]) if Path(p).parts[-3].isdigit() else 0)
    return Path(candidates[-1]).parent if candidates else None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _unprivileged_user() -> tuple[int, int] | None:
    """(uid, gid) to run the server as: ourselves unless root, else a system user made
    for it (created once with useradd)."""
    if os.geteuid() != 0:
        return None
    try:
        pw = pwd.getpwnam(PG_USER)
    except KeyError:
        subprocess.run(["useradd", "--system", "--no-create-home", "--shell", "/usr/sbin/nologin",
                        PG_USER], check=True, capture_output=True)
        pw = pwd.getpwnam(PG_USER)
    return pw.pw_uid, pw.pw_gid


class PgServer:
    """A running throwaway server; `url(name)` of a fresh database on it."""

    def __init__(self) -> None:
        self.bin = find_bin()
        if self.bin is None:
            raise RuntimeError("no PostgreSQL server binaries (initdb) on this machine")
        self.ids = _unprivileged_user()
        self.root = Path(tempfile.mkdtemp(prefix="reagentplan-pg-"))
        self.data = self.root / "data"
        self.port = _free_port()
        self.counter = itertools.count(1)
        if self.ids:
            os.chown(self.root, *self.ids)
        self._run([str(self.bin / "initdb"), "-D", str(self.data), "-U", "postgres", "-A", "trust",
                   "--no-sync", "-E", "UTF8"])
        opts = (f"-p {self.port} -c listen_addresses=127.0.0.1 -k {self.root} -c fsync=off "
                "-c full_page_writes=off -c synchronous_commit=off")
        self._run([str(self.bin / "pg_ctl"), "-D", str(self.data), "-o", opts, "-l",
                   str(self.root / "server.log"), "-w", "-t", "60", "start"])

    def _run(self, cmd: list[str]) -> None:
        def demote():  # runs in the child before exec: drop root for the server
            if self.ids:
                os.setgid(self.ids[1])
                os.setuid(self.ids[0])

        subprocess.run(cmd, check=True, capture_output=True, preexec_fn=demote, cwd=self.root)

    def admin_url(self) -> str:
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/postgres"

    def new_database(self) -> str:
        import psycopg

        name = f"rp_test_{next(self.counter)}"
        with psycopg.connect(f"host=127.0.0.1 port={self.port} user=postgres dbname=postgres",
                             autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/{name}"

    def stop(self) -> None:
        try:
            self._run([str(self.bin / "pg_ctl"), "-D", str(self.data), "-m", "immediate", "-w", "stop"])
        finally:
            shutil.rmtree(self.root, ignore_errors=True)
