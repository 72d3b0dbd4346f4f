"""Load and soak on 127.0.0.1 with bounded loops (the invariants only; the figures and
their targets are in bench/serve.py): 20 simultaneous sessions load the page and every
view while one of them re-plans, with no error and every view complete; a run of
re-plans in a row keeps the cache folder under its bound and the memory flat."""

from __future__ import annotations

import threading
from pathlib import Path

import psutil
import pytest

from helpers import minimal_sheets, workbook_bytes
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario

from reagentplan.dashboard.app import create_app
from reagentplan.dashboard.testing import DashSession, serve_in_thread

pytestmark = pytest.mark.slow

SESSIONS = 20
CACHE_BYTES = 512 * 2**10  # about six of this test's plans (80 kB each)
WAL_BYTES = 5 * 2**20  # SQLite checkpoints its write-ahead log at 1000 pages of 4 kB


def folder_bytes(path: Path) -> int:
    return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    sheets = minimal_sheets(days=30)
    run = run_plan(load_scenario(workbook_bytes(sheets)), futures=20, time_limit=20)
    work = tmp_path_factory.mktemp("load")
    app = create_app(run=run, futures=20, time_limit=20, work_dir=work, cache_bytes=CACHE_BYTES)
    url, stop = serve_in_thread(app)
    yield app, url, work
    stop()


def test_twenty_sessions_load_every_view_while_one_replans(served):
    app, url, _ = served
    sessions = [DashSession(url) for _ in range(SESSIONS)]
    start = threading.Barrier(SESSIONS)
    results: dict[int, str | None] = {}

    def user(k: int) -> None:
        s = sessions[k]
        start.wait(timeout=60)
        s.load_page()
        if k == 0:
            results[k] = s.replan(removal=96.5)[0]
        for _ in range(2):
            s.load_every_view()

    threads = [threading.Thread(target=user, args=(k,)) for k in range(SESSIONS)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(300)
    assert not any(t.is_alive() for t in threads)
    errors = [e for s in sessions for e in s.errors]
    assert errors == []
    views = [w for s in sessions for w, _ in s.timings if w.startswith("view ")]
    assert len(views) == SESSIONS * 2 * 3
    assert results[0] and results[0] != app.reagentplan.plan_id
    # the new plan is there for everyone: another session draws it
    other = sessions[1]
    drawn = other.load_view(__import__("dashboard.views.plant", fromlist=["x"]), results[0])
    assert drawn and not other.errors


def test_replans_in_a_row_keep_the_cache_and_memory_bounded(served):
    app, url, work = served
    s = DashSession(url)
    s.load_page()
    me = psutil.Process()
    ids = []
    for k in range(3):  # warm up: imports, first forks, the memory cache filling
        ids.append(s.replan(removal=95.0 + 0.1 * k)[0])
    rss0 = me.memory_info().rss
    for k in range(12):
        ids.append(s.replan(removal=96.0 + 0.1 * k)[0])
        s.load_view(__import__("dashboard.views.coordinator", fromlist=["x"]))
        # the plans' cache stays within its bound (culled on every write, oldest first);
        # the folder adds SQLite's write-ahead log, checkpointed at 1000 pages (4 MB)
        assert app.reagentplan.store._disk.volume() <= CACHE_BYTES
        assert folder_bytes(work / "plans") <= CACHE_BYTES + WAL_BYTES
    assert s.errors == []
    assert len(set(ids)) == len(ids) and all(ids)
    growth = me.memory_info().rss - rss0
    assert growth < 150 * 2**20, f"memory grew {growth / 2**20:.0f} MB over 12 re-plans"
    assert folder_bytes(work / "jobs") <= 64 * 2**20 + WAL_BYTES
    # the oldest re-plans were dropped to keep the bound, the newest are there
    store = app.reagentplan.store
    assert store.get("run", ids[-1]) is not None
    assert store.get("run", ids[0]) is None
    assert store.get("run", app.reagentplan.plan_id) is not None  # the startup plan is pinned
