"""Faults with real processes: an import killed (SIGKILL) in the middle leaves the
database as it was; two imports into one SQLite file at once both land."""

from __future__ import annotations

import datetime as dt
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import sqlalchemy as sa

from reagentplan.cli import main
from reagentplan.record.db import connect


def _generation_csv(path: Path, units: int, days: int, first: dt.date = dt.date(2015, 1, 1)) -> Path:
    lines = ["date,unit,mwh"]
    for i in range(days):
        d = (first + dt.timedelta(days=i)).isoformat()
        lines += [f"{d},G{u},{1000 + (i * 7 + u) % 500}.5" for u in range(units)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _count(url: str) -> int:
    engine = connect(url)
    with engine.connect() as conn:
        n = conn.execute(sa.text("SELECT COUNT(*) FROM generation_history")).scalar()
    engine.dispose()
    return n


def _cmd(*args: str) -> list[str]:
    return [sys.executable, "-m", "reagentplan.cli", *args]


def test_sigkill_in_the_middle_of_an_import_leaves_the_database_as_it_was(tmp_path):
    db = tmp_path / "r.db"
    url = f"sqlite:///{db}"
    assert main(["db", "upgrade", "--db", url]) == 0
    small = tmp_path / "first" / "generation_history.csv"
    small.parent.mkdir()
    assert main(["record", str(_generation_csv(small, 2, 30)), "--db", url]) == 0
    assert _count(url) == 60
    big = _generation_csv(tmp_path / "generation_history.csv", 20, 3650, dt.date(2016, 1, 1))
    wal = Path(str(db) + "-wal")
    start_size = wal.stat().st_size if wal.exists() else 0
    proc = subprocess.Popen(_cmd("record", str(big), "--db", url), stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 120
    killed = False
    while time.monotonic() < deadline and proc.poll() is None:
        # rows are being written inside the open transaction once the log grows
        if wal.exists() and wal.stat().st_size > start_size + 256 * 1024:
            os.kill(proc.pid, signal.SIGKILL)
            killed = True
            break
        time.sleep(0.002)
    proc.wait(timeout=60)
    assert killed and proc.returncode == -signal.SIGKILL, "the import ended before it could be killed"
    assert _count(url) == 60  # the killed transaction left nothing behind
    engine = connect(url)
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA integrity_check").scalar() == "ok"
        assert conn.execute(sa.text("SELECT COUNT(*) FROM imports")).scalar() == 1
    engine.dispose()
    # and the same import, run again to the end, lands whole
    assert main(["record", str(big), "--db", url]) == 0
    assert _count(url) == 60 + 20 * 3650


def test_two_imports_at_once_on_one_sqlite_file_both_land(tmp_path):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    files = []
    for k in range(2):
        folder = tmp_path / f"f{k}"
        folder.mkdir()
        files.append(_generation_csv(folder / "generation_history.csv", 10, 1000,
                                     dt.date(2010 + 5 * k, 1, 1)))
    procs = [subprocess.Popen(_cmd("record", str(f), "--db", url), stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True) for f in files]
    outs = [p.communicate(timeout=180) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    assert _count(url) == 2 * 10 * 1000


def test_sigkill_during_the_copy_into_postgresql_leaves_it_as_it_was(pg_server, tmp_path):
    """The client killed while its COPY runs: the server rolls the transaction back."""
    import psycopg

    url = pg_server.new_database()
    assert main(["db", "upgrade", "--db", url]) == 0
    small = tmp_path / "first" / "generation_history.csv"
    small.parent.mkdir()
    assert main(["record", str(_generation_csv(small, 2, 30)), "--db", url]) == 0
    big = _generation_csv(tmp_path / "generation_history.csv", 20, 3650, dt.date(2016, 1, 1))
    dbname = url.rsplit("/", 1)[1]
    watch = psycopg.connect(f"host=127.0.0.1 port={pg_server.port} user=postgres dbname={dbname}",
                            autocommit=True)
    proc = subprocess.Popen(_cmd("record", str(big), "--db", url), stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    killed = False
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            busy = watch.execute("SELECT count(*) FROM pg_stat_activity WHERE datname = %s AND "
                                 "state = 'active' AND query ILIKE 'COPY%%'", (dbname,)).fetchone()[0]
            if busy:
                os.kill(proc.pid, signal.SIGKILL)
                killed = True
                break
            time.sleep(0.002)
        proc.wait(timeout=60)
        assert killed and proc.returncode == -signal.SIGKILL, "the import ended before it could be killed"
        for _ in range(500):  # the server notices the lost client and ends its backend
            if not watch.execute("SELECT count(*) FROM pg_stat_activity WHERE datname = %s AND pid <> "
                                 "pg_backend_pid()", (dbname,)).fetchone()[0]:
                break
            time.sleep(0.01)
    finally:
        watch.close()
    assert _count(url) == 60
    assert main(["record", str(big), "--db", url]) == 0
    assert _count(url) == 60 + 20 * 3650
