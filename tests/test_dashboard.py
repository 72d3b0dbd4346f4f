"""The dashboard without a browser: the tables and figures it draws, its callbacks as
plain functions, the server-side store, and who may reach it."""

from __future__ import annotations

import base64
import datetime as dt
import os
import subprocess
import sys
import types
from pathlib import Path

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest

from helpers import START, minimal_sheets, workbook_bytes
from reagentplan import CAUTION
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario
from reagentplan.settings import PlanSettings

from reagentplan.dashboard import callbacks, figures, frames
from reagentplan.dashboard.security import DashboardRefused, is_loopback, password_for
from reagentplan.dashboard.store import PlanStore, valid_id
from reagentplan.dashboard.views import coordinator, plant, sales

DAYS = 40


def small_sheets(days: int = DAYS) -> dict:
    """The tests' station over ``days`` days (March into April 2030), with a truck quarry
    beside the rail one."""
    s = minimal_sheets(days=days)
    s["suppliers"].append(["Pit T", "truck", 25, 20, 1, "Mon-Sat", 22, 150, None, 4000])
    return s


@pytest.fixture(scope="module")
def small_bytes() -> bytes:
    return workbook_bytes(small_sheets())


@pytest.fixture(scope="module")
def small_run(small_bytes):
    return run_plan(load_scenario(small_bytes), futures=30, time_limit=20)


@pytest.fixture
def store(tmp_path):
    s = PlanStore(str(tmp_path / "plans"))
    yield s
    s.close()


def data_url(raw: bytes) -> str:
    return ("data:application/vnd.openxmlformats-officedocument.spreadsheetml.sheet;base64,"
            + base64.b64encode(raw).decode())


# --------------------------------------------------------------------------- frames


def test_orders_this_week_takes_unbooked_arrivals_ordered_within_seven_days():
    start = pd.Timestamp("2030-03-04")
    d = pd.Timestamp
    mv = pd.DataFrame({
        "date": [d("2030-03-08"), d("2030-03-20"), d("2030-03-12"), d("2030-03-05"), d("2030-03-06")],
        "direction": ["in", "in", "in", "in", "out"],
        "lane": ["Q rail", "Q rail", "T truck", "Q rail", "B gypsum truck"],
        "party": ["Q", "Q", "T", "Q", "B"],
        "loads": [1, 1, 4, 1, 3], "tonnes": [1000.0, 1000.0, 100.0, 1000.0, 75.0],
        "cost": [1.0, 1.0, 1.0, 1.0, -1.0],
        "order_by": [d("2030-03-05"), d("2030-03-17"), d("2030-03-10"), d("2030-03-02"), pd.NaT],
        "firm": [True] * 5, "booked": [False, False, False, True, False],
    })
    out = frames.orders_this_week(mv, start)
    # the booked one is already placed; the 17 March order is next week's; 10 March is
    # day 6 of the week (start + 6 days), so it is in
    assert list(out["order_by"]) == [d("2030-03-05"), d("2030-03-10")]
    assert list(out["lane"]) == ["Q rail", "T truck"]
    assert list(frames.next_orders(mv, start)["order_by"]) == [d("2030-03-17")]


def test_contract_progress_matches_the_evaluation(small_run):
    plan = small_run.plan
    prog = frames.contract_progress(plan.scenario, plan.lanes, plan.evaluation.month_totals,
                                    kinds=("supply", "sale"))
    for lane in plan.lanes:
        rows = prog[prog["lane"] == lane.name]
        if lane.kind in ("supply", "sale"):
            assert rows["planned_t"].sum() == pytest.approx(plan.evaluation.month_totals[lane.name].sum())
    # the truck quarry's 4,000 t/month maximum, pro-rated: all of March is planned
    march = prog[(prog["lane"] == "Pit T truck") & (prog["month"] == pd.Timestamp("2030-03-01"))]
    assert march["max_t"].iloc[0] == pytest.approx(4000 * 28 / 31)
    assert set(prog["status"]) <= {"within contract", "below minimum", "above maximum",
                                   "no contract limit"}
    # the fly-ash buyer (Mar-Nov) is in season in March and April
    assert prog.loc[prog["party"] == "Mix Co", "in_season"].all()


def test_airspace_left_is_airspace_less_landfilled_and_years_at_that_rate(small_run):
    plan = small_run.plan
    mv = plan.movements
    table = frames.airspace(plan.scenario, mv)
    assert len(table) == 3
    for r in table.itertuples():
        used = mv.loc[(mv["kind"] == "landfill") & (mv["material"] == r.material), "tonnes"].sum()
        assert r.landfilled_t == pytest.approx(used)
        assert r.left_t == pytest.approx(1e6 - used)
        if used > 0:
            assert r.years_left == pytest.approx((1e6 - used) / (used / DAYS * 365.25))
        else:
            assert np.isinf(r.years_left)


def test_quality_margins_against_each_buyers_limit(small_run):
    plan = small_run.plan
    m = frames.quality_margins(plan.balance, plan.scenario.buyers)
    purity = m[(m["buyer"] == "Board Co") & (m["property"] == "purity")]
    assert np.allclose(purity["margin"], plan.balance["gypsum_purity_pct"] - 94)
    loi = m[(m["buyer"] == "Mix Co") & (m["property"] == "LOI")]
    assert np.allclose(loi["margin"], 6 - plan.balance["fly_ash_loi_pct"])
    summary = frames.quality_summary(m)
    assert set(summary["property"]) == {"purity", "moisture", "chloride", "LOI", "SO3"}


def test_store_headlines_follow_the_ranked_risks(small_run):
    plan = small_run.plan
    fake = types.SimpleNamespace(top=[{"store": "gypsum", "first_date": "2030-03-20", "chance": 0.31,
                                       "what": "over capacity", "remedy": "one more load",
                                       "chance_after": 0.02}])
    heads = frames.store_headlines(plan.scenario, fake, [])
    by = {h["store"]: h for h in heads}
    assert by["gypsum"]["status"] == "at risk" and by["gypsum"]["first_date"] == "2030-03-20"
    assert by["limestone"]["status"] == "clear"
    assert [h["store"] for h in heads] == list(plan.scenario.storage)


# --------------------------------------------------------------------------- figures


def test_store_figure_has_band_plan_safety_and_capacity(small_run):
    plan = small_run.plan
    bands = frames.store_bands(plan.inventory, small_run.risk.frame)
    fig = figures.store_figure(bands, "limestone", None, small_run.risk.n_futures)
    names = [t.name for t in fig.data]
    assert "planned level" in names and any(n and n.startswith("P10–P90") for n in names)
    band = next(t for t in fig.data if t.name and t.name.startswith("P10–P90"))
    assert band.fill == "tonexty"
    lines = {round(s.y0) for s in fig.layout.shapes}
    assert {500, 5000} <= lines  # safety stock and capacity of the test station
    lime = plan.inventory[plan.inventory["store"] == "limestone"]
    planned = next(t for t in fig.data if t.name == "planned level")
    assert np.allclose(planned.y, lime["level_t"])


def test_contract_figure_draws_one_panel_per_lane(small_run):
    plan = small_run.plan
    prog = frames.contract_progress(plan.scenario, plan.lanes, plan.evaluation.month_totals)
    fig = figures.contract_figure(prog, "title", "none")
    assert len(fig.layout.annotations) == prog["lane"].nunique()
    # the unit rides on the ticks, not as a rotated one-letter axis title (an odd glyph)
    axes = [a for k, a in fig.layout.to_plotly_json().items() if k.startswith("yaxis")]
    assert axes and all(not (a.get("title") or {}).get("text") and a.get("ticksuffix") == " t"
                        for a in axes)
    assert isinstance(figures.contract_figure(prog.iloc[0:0], "t", "nothing here"), go.Figure)


def legend_colours_missing(fig: go.Figure) -> set[str]:
    """Colours a bar of ``fig`` is drawn in (where it has a value) that no legend entry
    shows: an entry's swatch is its marker's colour, the first one where the marker
    has a colour per bar (as plotly draws it)."""
    named = set()
    for t in fig.data:
        if t.showlegend is not False and t.name and t.type == "bar":
            c = t.marker.color
            named.add(c if isinstance(c, str) else list(c)[0])
    used = set()
    for t in fig.data:
        if t.type != "bar":
            continue
        y = np.asarray(t.y, dtype=float)
        colour = t.marker.color
        colours = [colour] * len(y) if isinstance(colour, str) else list(colour)
        used |= {c for c, v in zip(colours, y) if np.isfinite(v)}
    return used - named


def test_contract_figure_names_every_colour_it_draws(small_run):
    """Each bar's colour is in the legend: every party's colour, the months below the
    contract minimum (one is forced here) and the contract band."""
    plan = small_run.plan
    prog = frames.contract_progress(plan.scenario, plan.lanes, plan.evaluation.month_totals)
    prog = prog.copy()
    prog.loc[prog.index[0], "status"] = "below minimum"
    prog.loc[prog.index[-1], "status"] = "above maximum"
    from reagentplan.dashboard.style import party_colours

    fig = figures.contract_figure(prog, "title", "none", party_colours(plan.scenario))
    assert prog["lane"].nunique() >= 2
    assert legend_colours_missing(fig) == set()
    names = {t.name for t in fig.data if t.showlegend is not False}
    assert {"planned, below the monthly minimum", "planned, above the monthly maximum"} <= names
    # the same figure as it was drawn before (the status colour under a "planned" entry of
    # one party's colour) fails the property: the test can tell
    bad = go.Figure([go.Bar(x=[1, 2], y=[1, 1], marker=dict(color=["#111111", "#ee7700"]), name="planned")])
    assert legend_colours_missing(bad) == {"#ee7700"}


def test_store_figure_and_headlines_keep_the_outlook_apart(small_run):
    """The store chart shades the outlook beyond the firm window; an outlook breach makes
    no headline, a firm one does."""
    plan = small_run.plan
    frame = small_run.risk.frame.copy()
    frame["window"] = np.where((frame["date"] - frame["date"].min()).dt.days < 14, "firm", "outlook")
    bands = frames.store_bands(plan.inventory, frame)
    fig = figures.store_figure(bands, "gypsum", None, small_run.risk.n_futures)
    rects = [s for s in fig.layout.shapes if s.type == "rect"]
    assert len(rects) == 1 and pd.Timestamp(rects[0].x0) > frame["date"].min() + pd.Timedelta(days=13)
    assert any("outlook" in (a.text or "") for a in fig.layout.annotations)
    no_risk = types.SimpleNamespace(top=[])
    late = {"store": "gypsum", "kind": "above capacity", "first_date": "2030-04-01", "window": "outlook"}
    heads = {h["store"]: h for h in frames.store_headlines(plan.scenario, no_risk, [late])}
    assert heads["gypsum"]["status"] == "clear"
    heads = {h["store"]: h for h in frames.store_headlines(plan.scenario, no_risk, [{**late, "window": "firm"}])}
    assert heads["gypsum"]["status"] == "plan breach"


def test_calendar_tells_firm_outlook_and_order_by_apart(small_run):
    plan = small_run.plan
    cal = frames.inbound_calendar(plan.movements, plan.lanes)
    fig = figures.inbound_calendar_figure(cal, [l.name for l in plan.lanes if l.kind == "supply"],
                                          START, plan.scenario.plant.end_date, plan.firm_days)
    markers = [t for t in fig.data if t.mode == "markers"]
    assert markers, "no arrivals drawn"
    assert all("order by" in h for t in markers for h in t.hovertext)
    # the lead-time lines run from each order-by date to the arrival
    lead = next(t for t in fig.data if t.name == "order-by date to arrival")
    assert sum(x is not None for x in lead.x) == 2 * cal["order_by"].notna().sum()


def test_each_view_fills_all_its_outputs(small_run):
    for view in (coordinator, plant, sales):
        out = callbacks.view_outputs(view, small_run)
        assert len(out) == len(view.OUTPUTS)
        for key, value in zip(view.OUTPUTS, out):
            if key in view.FIGURE_OUTPUTS:
                assert isinstance(value, go.Figure) and len(value.data) > 0, key
    stores = plant.content(small_run)[plant.STORES]
    assert len(stores) == len(small_run.plan.scenario.storage)


def test_views_draw_a_plan_without_futures(small_bytes):
    run = run_plan(load_scenario(small_bytes), futures=0, time_limit=20)
    assert run.risk is None
    for view in (coordinator, plant, sales):
        assert len(callbacks.view_outputs(view, run)) == len(view.OUTPUTS)
    heads = plant.content(run)[plant.HEADLINES]
    assert "No risk replay" in str(heads)
    assert "none" in str(callbacks.header_content(run, {})[2])


def test_header_names_station_costs_and_futures(small_run):
    title, sub, kpis, label = callbacks.header_content(small_run, {"source": "w.xlsx"})
    assert title == "Test Station"
    assert f"{DAYS} days" in sub and "w.xlsx" in sub
    text = str(kpis)
    assert "Plan cost" in text and "30" in text


# --------------------------------------------------------------------------- callbacks


def test_bad_upload_shows_the_loaders_own_message(small_bytes):
    sheets = small_sheets()
    del sheets["storage"]
    scenario, message, ok = callbacks.parse_upload({"filename": "broken.xlsx",
                                                    "contents": data_url(workbook_bytes(sheets))})
    assert not ok and scenario is None
    assert message.startswith("broken.xlsx: The workbook has 1 problem")
    assert "sheet 'storage'" in message and "the sheet is missing" in message
    _, message, ok = callbacks.parse_upload({"filename": "notes.xlsx", "contents": data_url(b"hello")})
    assert not ok and "The workbook has" in message


def test_upload_over_ten_megabytes_is_refused_before_reading():
    _, message, ok = callbacks.parse_upload({"filename": "big.xlsx", "too_big": 12 * 2**20})
    assert not ok and "12.0 MB" in message and "10 MB" in message
    raw = b"x" * (10 * 2**20 + 10)
    _, message, ok = callbacks.parse_upload({"filename": "big.xlsx", "contents": data_url(raw)})
    assert not ok and "10 MB" in message


def test_upload_name_is_only_a_label(small_bytes, store):
    sid, message, cls = callbacks.accept_upload(
        store, {"filename": "C:\\Users\\me\\..\\station.xlsx", "contents": data_url(small_bytes)})
    assert valid_id(sid) and cls == "rp-msg good" and "sound" in message
    scn = store.get("scenario", sid).value
    assert scn.source_name == "station.xlsx"


def test_whatif_kwargs_from_the_sliders(small_run):
    scn = small_run.plan.scenario
    kw = callbacks.whatif_kwargs(scn, 100, 100, 97.0, [], [3, 9])
    assert kw == {"load_factor": 1.0, "sulfur_scale": 1.0, "removal_pct": None, "rail_outage": None}
    kw = callbacks.whatif_kwargs(scn, 110, 150, 95.5, ["on"], [3, 9])
    assert kw["load_factor"] == pytest.approx(1.1) and kw["sulfur_scale"] == pytest.approx(1.5)
    assert kw["removal_pct"] == 95.5
    assert kw["rail_outage"] == (START + dt.timedelta(days=3), START + dt.timedelta(days=9))


def test_replan_stores_a_new_run_with_the_whatif(small_run, store):
    sid = store.put("scenario", small_run.plan.scenario, {"source": "w.xlsx"})
    said = []
    pid, message, cls = callbacks.replan(store, PlanSettings(futures=10, time_limit=20), sid,
                                         100, 120, 95.0, ["on"], [5, 12], set_progress=said.append)
    assert valid_id(pid) and cls == "rp-msg good"
    assert "coal sulfur x1.20" in message and "rail closed" in message
    run = store.get("run", pid).value
    assert run.plan.scenario.scrubber.removal_pct == 95.0
    assert run.risk.n_futures == 10
    assert said and said[0].startswith("Applying")
    # no rail arrival inside the outage
    mv = run.plan.movements
    window = (mv["date"] >= pd.Timestamp(START + dt.timedelta(days=5))) & \
             (mv["date"] <= pd.Timestamp(START + dt.timedelta(days=12)))
    assert not ((mv["lane"] == "Quarry Q rail") & window).any()


def test_replan_of_an_unknown_scenario_says_so(store):
    pid, message, cls = callbacks.replan(store, PlanSettings(futures=0), "0" * 32, 100, 100, 97,
                                         [], [0, 1])
    assert cls == "rp-msg bad" and "upload it again" in message


def test_download_gives_the_plan_workbook(small_run, store):
    pid = store.put("run", small_run, {})
    data, message, cls = callbacks.download(store, pid)
    assert data["filename"] == "plan.xlsx" and data["base64"]
    assert base64.b64decode(data["content"])[:2] == b"PK"
    assert cls == "rp-msg good"


# --------------------------------------------------------------------------- store


@pytest.mark.parametrize("bad", ["../../etc/passwd", "/tmp/x.xlsx", "ABCDEF" * 6, None, 42, "", "0" * 31])
def test_store_refuses_anything_but_its_own_ids(store, bad):
    assert store.get("run", bad) is None
    assert store.get("scenario", bad) is None


def test_store_round_trip_and_pinning(store):
    a = store.put("scenario", {"x": 1}, {"source": "s"})
    b = store.put("run", [1, 2], pin=True)
    assert store.get("scenario", a).value == {"x": 1} and store.get("scenario", a).meta["source"] == "s"
    assert store.get("run", b).value == [1, 2]
    assert store.get("run", a) is None  # kinds do not mix


# --------------------------------------------------------------------------- security


@pytest.mark.parametrize("host, loop", [("127.0.0.1", True), ("127.8.9.1", True), ("localhost", True),
                                        ("::1", True), ("[::1]", True), ("0.0.0.0", False),
                                        ("192.168.1.20", False), ("plant-pc", False), ("::", False)])
def test_loopback_hosts(host, loop):
    assert is_loopback(host) is loop


def test_non_loopback_host_needs_a_password():
    with pytest.raises(DashboardRefused, match="REAGENTPLAN_DASHBOARD_PASSWORD"):
        password_for("0.0.0.0", {})
    assert password_for("0.0.0.0", {"REAGENTPLAN_DASHBOARD_PASSWORD": "pw"}) == "pw"
    assert password_for("127.0.0.1", {}) is None


def test_cli_refuses_a_non_loopback_host_without_password():
    env = {k: v for k, v in os.environ.items() if k != "REAGENTPLAN_DASHBOARD_PASSWORD"}
    done = subprocess.run([sys.executable, "-m", "reagentplan.cli", "dashboard", "--host", "0.0.0.0",
                           "--port", "0"], capture_output=True, text=True, env=env, timeout=120,
                          cwd=Path(__file__).resolve().parents[1])
    assert done.returncode == 2
    assert "Refusing to serve the dashboard on 0.0.0.0" in done.stderr
    assert "REAGENTPLAN_DASHBOARD_PASSWORD" in done.stderr
    assert "Traceback" not in done.stderr


def test_cli_refuses_a_bad_workbook_with_exit_code_2(tmp_path, capsys):
    from reagentplan.cli import main

    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"not a workbook")
    assert main(["dashboard", str(bad)]) == 2
    assert "The workbook has" in capsys.readouterr().err


@pytest.fixture(scope="module")
def guarded_app(small_run, tmp_path_factory):
    from reagentplan.dashboard.app import create_app

    return create_app(run=small_run, password="s3cret pass", work_dir=tmp_path_factory.mktemp("guarded"))


def _basic(user: str, password: str) -> dict:
    token = base64.b64encode(f"{user}:{password}".encode()).decode()
    return {"Authorization": f"Basic {token}"}


@pytest.mark.parametrize("path", ["/", "/_dash-layout", "/_dash-dependencies",
                                  "/_dash-component-suites/plotly/package_data/plotly.min.js"])
def test_password_guards_every_request(guarded_app, path):
    client = guarded_app.server.test_client()
    r = client.get(path)
    assert r.status_code == 401
    assert r.headers["WWW-Authenticate"].startswith("Basic ")
    assert client.get(path, headers=_basic("reagentplan", "wrong")).status_code == 401
    assert client.get(path, headers=_basic("anyone", "s3cret pass")).status_code == 200


def test_unguarded_page_serves_everything_locally_with_the_caution(small_run, tmp_path):
    from reagentplan.dashboard.app import create_app

    app = create_app(run=small_run, work_dir=tmp_path / "app")
    assert app.config.serve_locally
    client = app.server.test_client()
    page = client.get("/").get_data(as_text=True)
    assert "cdn." not in page and "https://" not in page
    layout = client.get("/_dash-layout").get_data(as_text=True)
    assert CAUTION in layout
    assert client.get("/").headers["X-Frame-Options"] == "DENY"
