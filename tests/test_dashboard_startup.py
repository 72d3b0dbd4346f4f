"""The dashboard answers at once: it listens while its first plan is made, shows what is
being done, and reads a plan already made from the same inputs back from the plan cache
(`reagentplan.plancache`) on the next start.  Served by the production server on
127.0.0.1."""

from __future__ import annotations

import os
import pickle
import time
import urllib.request

import pandas as pd
import pytest

from helpers import minimal_sheets, write_workbook
from reagentplan import plancache

from reagentplan.dashboard.app import create_app
from reagentplan.dashboard.testing import serve_in_thread


def _get(url: str) -> tuple[bytes, float]:
    t0 = time.perf_counter()
    with urllib.request.urlopen(url, timeout=30) as r:
        return r.read(), time.perf_counter() - t0


def _wait_ready(app, limit: float = 300.0) -> None:
    deadline = time.monotonic() + limit
    while not app.reagentplan.ready:
        assert app.reagentplan.progress.snapshot()["error"] is None, app.reagentplan.progress.snapshot()
        assert time.monotonic() < deadline, "the first plan was not ready in time"
        time.sleep(0.1)


@pytest.mark.slow
def test_the_server_answers_while_the_first_plan_is_made(tmp_path):
    """The demo station over 90 days with 100 futures takes seconds to plan; the page
    and its layout are served within a few seconds of the start, showing the steps."""
    t0 = time.perf_counter()
    app = create_app(None, futures=100, time_limit=30, demo_days=90, background=True,
                     plan_cache=tmp_path / "cache", work_dir=tmp_path / "work")
    url, stop = serve_in_thread(app)
    try:
        page, _ = _get(url)
        layout, seconds = _get(url + "_dash-layout")
        answered = time.perf_counter() - t0
        assert answered < 5.0 and seconds < 2.0
        snap = app.reagentplan.progress.snapshot()
        assert not snap["done"], "the plan was ready before the first answer; use a bigger station"
        assert b"startup-steps" in layout and b"Making the first plan of the demo station" in layout
        assert b"plan-id" not in layout and b"reagentplan" in page
        _wait_ready(app)
        texts = [t for t, _ in app.reagentplan.progress.snapshot()["steps"]]
        assert texts[0].startswith("Building the demo station")
        assert any(t.startswith("Sampling 100 futures") for t in texts)
        assert any(t.startswith("Solving the plan") for t in texts)
        layout, _ = _get(url + "_dash-layout")
        assert b"plan-id" in layout and b"startup-steps" not in layout
        assert app.reagentplan.from_cache is False
    finally:
        stop()


@pytest.mark.slow
def test_a_second_start_with_the_same_inputs_reads_the_plan_from_the_cache(tmp_path):
    path = write_workbook(minimal_sheets(days=40), tmp_path / "station.xlsx")
    cache = tmp_path / "cache"
    kw = dict(futures=20, time_limit=20, plan_cache=cache)
    first = create_app(path, work_dir=tmp_path / "w1", **kw)
    second = create_app(path, work_dir=tmp_path / "w2", background=True, **kw)
    _wait_ready(second)
    a, b = first.reagentplan, second.reagentplan
    assert not a.from_cache and b.from_cache
    assert b.plan_meta["made"] == a.plan_meta["made"]
    assert b.plan_meta["seconds"] == a.plan_meta["seconds"]
    run_a = a.store.get("run", a.plan_id).value
    run_b = b.store.get("run", b.plan_id).value
    pd.testing.assert_frame_equal(run_a.plan.movements, run_b.plan.movements)
    assert len(list(cache.glob("*.plan"))) == 1
    # other settings are other inputs: planned again, and kept beside the first
    third = create_app(path, work_dir=tmp_path / "w3", futures=20, time_limit=20, seed=1,
                       plan_cache=cache)
    assert not third.reagentplan.from_cache
    assert len(list(cache.glob("*.plan"))) == 2


def test_the_key_follows_every_input():
    settings = {"futures": 500, "seed": 0, "solver": "highs", "time_limit": 60.0}
    key = plancache.plan_key(b"workbook", settings)
    assert len(key) == 64 and key == plancache.plan_key(b"workbook", dict(settings))
    assert key != plancache.plan_key(b"workbook!", settings)
    assert key != plancache.plan_key(b"workbook", settings | {"seed": 1})
    assert key != plancache.plan_key(b"workbook", settings, as_of="2030-03-01")
    assert key != plancache.plan_key(b"workbook", settings, as_of="2030-03-01", last_import_id=3) \
        != plancache.plan_key(b"workbook", settings, as_of="2030-03-01", last_import_id=4)


def test_a_damaged_entry_is_ignored_and_replaced(tmp_path):
    key = plancache.plan_key(b"x", {})
    path = plancache.write_entry(key, {"plan": 1}, {"made": "then"}, tmp_path)
    assert plancache.read_entry(key, tmp_path) == ({"plan": 1}, {"made": "then"})
    raw = path.read_bytes()
    path.write_bytes(raw[:-7])  # cut short, as by a full disk
    assert plancache.read_entry(key, tmp_path) is None and not path.exists()
    path.write_bytes(raw[:-1] + bytes([raw[-1] ^ 1]))  # one bit flipped
    assert plancache.read_entry(key, tmp_path) is None
    path.write_bytes(pickle.dumps(({"plan": 2}, {})))  # no header: not an entry
    assert plancache.read_entry(key, tmp_path) is None

    made = []
    value, meta = plancache.cached(key, lambda: made.append(1) or {"plan": 3}, directory=tmp_path)
    assert value == {"plan": 3} and made == [1] and meta["from_cache"] is False
    value, meta = plancache.cached(key, lambda: made.append(1) or {"plan": 4}, directory=tmp_path)
    assert value == {"plan": 3} and made == [1] and meta["from_cache"] is True
    assert [p.name for p in tmp_path.iterdir()] == [f"{key}.plan"]  # no temporary file left


def test_only_the_newest_entries_are_kept(tmp_path):
    keys = [plancache.plan_key(str(i), {}) for i in range(5)]
    for i, key in enumerate(keys):
        path = plancache.write_entry(key, i, {}, tmp_path, keep=3)
        os.utime(path, (1_000_000 + i, 1_000_000 + i))
    assert sorted(p.stem for p in tmp_path.glob("*.plan")) == sorted(keys[2:])


def test_the_cache_folder_is_the_environment_variable_else_the_user_cache():
    assert str(plancache.cache_dir({"REAGENTPLAN_CACHE": "/srv/plans"})) == "/srv/plans"
    assert str(plancache.cache_dir({"XDG_CACHE_HOME": "/c", "HOME": "/h"})).replace("\\", "/") \
        == "/c/reagentplan"
