"""Risk replay and the plan workbook."""

from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from helpers import minimal_sheets, workbook_bytes, write_workbook
from reagentplan.cli import main
from reagentplan.pipeline import run_plan
from reagentplan.risk import deterministic_flows, replay
from reagentplan.scenario import load_scenario
from reagentplan.schedule import make_plan
from reagentplan.schedule.evaluate import DailyPlan


@pytest.fixture(scope="module")
def small_run(demo_path):
    """A 60-day plan of the demo station with 300 futures."""
    from reagentplan.demo.build_demo import build_demo_workbook

    path = build_demo_workbook(demo_path.parent / "demo60.xlsx", horizon_days=60)
    return run_plan(load_scenario(path), futures=300, seed=3, time_limit=30)


def test_replay_of_the_deterministic_future_reproduces_inventory(small_run):
    plan = small_run.plan
    rr = replay(plan, deterministic_flows(plan.balance), suggest=False)
    inv = plan.inventory
    for store in plan.scenario.storage:
        np.testing.assert_allclose(rr.levels[store][0], inv.loc[inv["store"] == store, "level_t"], atol=1e-6)


def test_probabilities_are_ordered_and_in_range(small_run):
    f = small_run.risk.frame
    for col in ("p_below_safety", "p_empty", "p_over_capacity", "p_so2_over_limit"):
        v = f[col].dropna()
        assert ((v >= 0) & (v <= 1)).all(), col
    lime = f[f["store"] == "limestone"]
    assert (lime["p_empty"] <= lime["p_below_safety"] + 1e-12).all()
    assert (f["level_p10_t"] <= f["level_p50_t"] + 1e-9).all() and (f["level_p50_t"] <= f["level_p90_t"] + 1e-9).all()
    assert set(["date", "store", "p_below_safety", "p_empty", "p_over_capacity"]) <= set(f.columns)


def _lime_risk(scn, plan_result, flows) -> float:
    return float(replay(plan_result, flows, suggest=False).frame.query("store == 'limestone'")["p_below_safety"].mean())


def test_more_sulfur_spread_raises_limestone_risk_and_an_extra_train_lowers_it():
    """A short horizon where limestone is tight: spreading the sulfur (the futures' use)
    raises the chance of dropping below safety; one more train lowers it."""
    s = minimal_sheets(days=20)
    s["storage"][1] = ["limestone", 3000, 400, 900]
    scn = load_scenario(workbook_bytes(s))
    plan = make_plan(scn, firm_days=20)
    use = plan.balance["limestone_t"].to_numpy()
    rng = np.random.default_rng(0)
    z = rng.standard_normal((4000, 1)) + 0.3 * rng.standard_normal((4000, len(use)))
    narrow = {"limestone": use * (1 + 0.05 * z)}
    wide = {"limestone": use * (1 + 0.20 * z)}
    assert _lime_risk(scn, plan, wide) > _lime_risk(scn, plan, narrow)
    lane = next(l for l in plan.lanes if l.kind == "supply")
    day = int(np.flatnonzero(lane.open)[0])
    more = {k: v.copy() for k, v in plan.plan.quantity.items()}
    more[lane.name][day] += 1
    extra = replay(plan, wide, plan=DailyPlan(more, plan.plan.booked), suggest=False)
    assert (extra.frame.query("store == 'limestone'")["p_below_safety"].mean()
            < _lime_risk(scn, plan, wide))


def _station_at_the_limit(days=14, margin=None):
    """The removal lever's one-day station (`test_removal_lever.one_day_station`): 100 t of
    SO2 a day reach the scrubber, the permit allows 3 t a day on a one-day average, the
    setpoint is 98 %, and at 30 per allowance a point down saves 51.36 − 30 = 21.36, more
    than the setpoint's cost of moving (12.84), so the plan, unguarded and with no
    compliance margin, runs at the permit's 97 %: its rolling average sits exactly on the
    limit."""
    from test_removal_lever import one_day_station, set_kv

    s = one_day_station(days=days, allowance=30.0)
    if margin is not None:
        set_kv(s, "plant", "so2_limit_margin_pct", margin)
    return load_scenario(workbook_bytes(s))


@pytest.fixture(scope="module")
def at_the_limit():
    """The plan made without futures (so the permit is not guarded and the plan sits on
    the limit), then replayed against 100 sampled futures as `plan` replays it."""
    from types import SimpleNamespace

    from reagentplan.forecast import sample_futures
    from reagentplan.pipeline import FUTURE_FLOWS, SO2_FLOWS, STORE_FLOWS

    scn = _station_at_the_limit(margin=0)
    fut = sample_futures(scn, 100, seed=1, keep=FUTURE_FLOWS)
    plan = make_plan(scn, firm_days=14)
    flows = {st: fut.flows[q] for st, q in STORE_FLOWS.items() if st in scn.storage and q in fut.flows}
    risk = replay(plan, flows, so2={k: fut.flows[k] for k in SO2_FLOWS})
    return SimpleNamespace(plan=plan, futures=fut, risk=risk)


def test_permit_risk_is_computed_at_the_chosen_removal(at_the_limit):
    """A plan that holds the rolling average on the limit is over it in about half the
    futures (those whose coal brings more SO2 than the median), not in none: the chance
    is computed at the removal the plan chose, not at the setpoint.  Recomputed here
    independently: SO2 emitted = SO2 to the scrubber × (1 − removal) (the balance's
    scrubber, no sorbent injection), so a future's emitted SO2 at the setpoint s moves to
    × (100 − r) / (100 − s) at the chosen r; over a one-day average the rolling average
    is the day's emitted SO2 over its heat input."""
    run = at_the_limit
    scn, removal = run.plan.scenario, run.plan.plan.removal
    assert removal is not None and removal == pytest.approx(np.full(14, 97.0), abs=1e-3)
    setpoint = 98.0
    emitted = run.futures.flows["so2_emitted_t"] * ((100 - removal) / (100 - setpoint))[None, :]
    rate = 1000 * emitted / run.futures.flows["heat_input_gj"]
    limit = scn.plant.so2_limit_kg_per_gj
    lime = run.risk.frame[run.risk.frame["store"] == "limestone"]
    p = lime["p_so2_over_limit"].to_numpy()
    assert (p > 0.2).all() and (p < 0.8).all(), p
    np.testing.assert_allclose(p, (rate > limit * (1 + 1e-6)).mean(axis=0))
    margin = getattr(scn.plant, "so2_limit_margin_pct", 0.0) or 0.0
    q = lime["p_so2_over_margin"].to_numpy()
    np.testing.assert_allclose(q, (rate > limit * (1 - margin / 100) * (1 + 1e-6)).mean(axis=0))
    assert (q >= p).all()


def test_compliance_limit_is_the_limit_less_the_margin():
    """limit × (1 − margin / 100); no margin key: the limit; no limit: None (common
    practice, no source)."""
    from types import SimpleNamespace

    from reagentplan.risk import compliance_limit

    assert compliance_limit(SimpleNamespace(so2_limit_kg_per_gj=0.06, so2_limit_margin_pct=5.0)) == pytest.approx(0.057)
    assert compliance_limit(SimpleNamespace(so2_limit_kg_per_gj=0.06)) == pytest.approx(0.06)
    assert compliance_limit(SimpleNamespace(so2_limit_kg_per_gj=None, so2_limit_margin_pct=5.0)) is None


def test_outlook_risk_is_kept_apart_from_the_firm_window():
    """A gypsum store that overflows in every future, but only from day 10 of 20 with a
    7-day firm window: risk.csv marks each day's window, the ranked "stores at risk"
    (`top`) hold the firm window only, and the overflow is listed apart as the outlook's
    indication, from its first day."""
    s = minimal_sheets(days=20)
    scn = load_scenario(workbook_bytes(s))
    plan = make_plan(scn, firm_days=7)
    flows = deterministic_flows(plan.balance)
    gyp = np.repeat(flows["gypsum"], 50, axis=0)
    gyp[:, 10:] *= 20.0  # far more cake than any haul-out takes
    rr = replay(plan, {"limestone": np.repeat(flows["limestone"], 50, axis=0), "gypsum": gyp})
    f = rr.frame
    days = (f["date"] - f["date"].min()).dt.days
    assert (f.loc[days < 7, "window"] == "firm").all() and (f.loc[days >= 7, "window"] == "outlook").all()
    g = f[f["store"] == "gypsum"].reset_index(drop=True)
    assert g["p_over_capacity"].iloc[:7].max() <= 0.05 and g["p_over_capacity"].iloc[-1] == 1.0
    assert "gypsum" not in {t["store"] for t in rr.top}
    assert all(t["window"] == "firm" for t in rr.top)
    out = [t for t in rr.outlook if t["store"] == "gypsum"]
    first_over = g.loc[g["p_over_capacity"] > 0.05, "date"].min()
    assert out and out[0]["window"] == "outlook" and out[0]["first_date"] == f"{first_over:%Y-%m-%d}"
    assert pd.Timestamp(out[0]["first_date"]) >= scn.dates[7]


def test_top_risks_name_a_remedy_that_helps(small_run):
    for item in small_run.risk.top:
        assert item["remedy"]
        if "chance_after" in item:
            assert item["chance_after"] <= item["chance"]


@pytest.fixture(scope="module")
def plan_out(tmp_path_factory, small_run):
    from reagentplan.output import write_run

    out = tmp_path_factory.mktemp("out")
    write_run(small_run, out)
    return out


def test_workbook_sheets_match_the_csvs(plan_out):
    wb = load_workbook(plan_out / "plan.xlsx")
    for name in ("Coordinator", "Plant manager", "Sales", "Contracts", "Daily balance", "Costs",
                 "Assumptions", "Store charts"):
        assert name in wb.sheetnames
    mv = pd.read_csv(plan_out / "movements.csv")
    inbound = mv[mv["direction"] == "in"]
    ws = wb["Coordinator"]
    header = [c.value for c in ws[4]]
    rows = [r for r in ws.iter_rows(min_row=5, values_only=True) if r[0]]
    assert len(rows) == len(inbound)
    assert sum(r[header.index("tonnes [t]")] for r in rows) == pytest.approx(inbound["tonnes"].sum())
    inv = pd.read_csv(plan_out / "inventory.csv")
    ws = wb["Plant manager"]
    header = [c.value for c in ws[1]]
    col = header.index("limestone level [t]")
    levels = [r[col] for r in ws.iter_rows(min_row=2, values_only=True)]
    np.testing.assert_allclose(levels, inv.loc[inv["store"] == "limestone", "level_t"], atol=1e-3)
    assert wb["Plant manager"].freeze_panes == "A2"
    assert wb["Store charts"]._charts and wb["Contracts"]._charts


@pytest.mark.skipif(shutil.which("libreoffice") is None, reason="LibreOffice (libreoffice-calc-nogui) not installed")
def test_libreoffice_opens_the_workbook(plan_out, tmp_path):
    """A real spreadsheet program opens plan.xlsx: LibreOffice converts it to PDF and its
    first sheet to CSV, whose cells read back as written."""
    for fmt in ("pdf", "csv"):
        r = subprocess.run(["libreoffice", "--headless", f"-env:UserInstallation=file://{tmp_path}/lo",
                            "--convert-to", fmt, "--outdir", str(tmp_path), str(plan_out / "plan.xlsx")],
                           capture_output=True, text=True, timeout=240)
        assert r.returncode == 0, r.stderr
        assert (tmp_path / f"plan.{fmt}").stat().st_size > 200
    text = (tmp_path / "plan.csv").read_text(errors="replace")
    wb = load_workbook(plan_out / "plan.xlsx")
    assert wb["Coordinator"]["A1"].value in text
    assert "order by" in text and "tonnes [t]" in text


def test_interrupted_run_keeps_the_previous_output(tmp_path, monkeypatch):
    s = minimal_sheets(days=8)
    path = write_workbook(s, tmp_path / "w.xlsx")
    out = tmp_path / "out"
    assert main(["plan", str(path), "--out", str(out), "--futures", "0"]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    import reagentplan.output.run as pw

    def boom(*a, **k):
        raise RuntimeError("simulated crash while writing")

    monkeypatch.setattr(pw, "write_plan_workbook", boom)
    with pytest.raises(RuntimeError):
        main(["plan", str(path), "--out", str(out), "--futures", "0"])
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out")] == []
