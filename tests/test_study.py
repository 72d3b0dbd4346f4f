"""Studies: the --vary grid and its validation, common random numbers, the cases on a
real Dask LocalCluster against the same cases run serially, failures and time-outs,
the outputs, and a study's plan against `reagentplan plan` of the same variant.

Scenarios are the invented test station of helpers.py (not demo data)."""

from __future__ import annotations

import dataclasses
import json
import os
import re
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from helpers import minimal_sheets, set_value, write_workbook
from reagentplan.cli import main
from reagentplan.errors import ScenarioError
from reagentplan.forecast import sample_futures
from reagentplan.forecast.futures import futures_from_drivers, sample_drivers
from reagentplan.risk import deterministic_flows
from reagentplan.settings import PlanSettings
from reagentplan.study.cluster import run_cases
from reagentplan.study.grid import build_grid, parse_vary
from reagentplan.study.results import pick_winner
from reagentplan.study.run import (plan_case, replay_byproduct_heel,
                                   replay_costs, replay_limestone_capped)
from reagentplan.workbook import read_raw

DAYS = 20
TIMING = ("solve_seconds", "case_seconds")
SPECS = ["scrubber.removal_pct=96,98", "storage[gypsum].capacity_t=3000,4000"]


def _sheets(days: int = DAYS):
    return minimal_sheets(days=days)


@pytest.fixture(scope="module")
def study_book(tmp_path_factory):
    return write_workbook(_sheets(), tmp_path_factory.mktemp("study") / "station.xlsx")


@pytest.fixture(scope="module")
def raw(study_book):
    return read_raw(study_book)


@pytest.fixture(scope="module")
def grid(raw):
    return build_grid(raw, SPECS)


@pytest.fixture(scope="module")
def shared(grid):
    return sample_drivers(grid.base, 40, seed=5)


@pytest.fixture(scope="module")
def cluster():
    """A real two-process LocalCluster, closed after the module."""
    from distributed import Client, LocalCluster

    local = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                         dashboard_address=None)
    client = Client(local)
    yield client
    client.close()
    local.close()


def _grid_of(sheets, specs, **kw):
    import io

    from helpers import workbook_bytes

    return build_grid(read_raw(io.BytesIO(workbook_bytes(sheets))), specs, **kw)


def _problems(exc: ScenarioError) -> str:
    return "\n".join(str(p) for p in exc.problems)


# --------------------------------------------------------------------------- grid


def test_parse_key_value_and_table_specs():
    s = parse_vary("scrubber.removal_pct=96, 98")
    assert (s.sheet, s.row, s.column, s.values) == ("scrubber", None, "removal_pct", ("96", "98"))
    assert s.target == "scrubber.removal_pct"
    t = parse_vary("suppliers[Quarry Q/rail].max_t_per_month=20000,none")
    assert t.row == ("Quarry Q", "rail") and t.values == ("20000", None)
    assert t.target == "suppliers[Quarry Q/rail].max_t_per_month"
    # a row name may hold dots; weekdays are listed with ';'
    u = parse_vary("buyers[Board Co.].weekdays=Mon;Wed;Fri,Mon-Sat")
    assert u.row == ("Board Co.",) and u.values == ("Mon;Wed;Fri", "Mon-Sat")


def test_full_grid_of_several_specs_with_table_cells(grid):
    assert len(grid.cases) == 4
    assert grid.targets == ["scrubber.removal_pct", "storage[gypsum].capacity_t"]
    got = [(c.case, c.scenario.scrubber.removal_pct, c.scenario.storage["gypsum"].capacity_t)
           for c in grid.cases]
    assert got == [(1, 96.0, 3000.0), (2, 96.0, 4000.0), (3, 98.0, 3000.0), (4, 98.0, 4000.0)]
    # nothing else changed, and the base is the workbook as it is
    assert grid.base.scrubber.removal_pct == 97.0
    assert grid.cases[0].scenario.suppliers == grid.base.suppliers
    assert not any(c.resample for c in grid.cases)


def test_a_key_or_column_the_workbook_leaves_out_is_added():
    s = _sheets()
    g = _grid_of(s, ["plant.shortage_penalty_per_t=500,2000",
                     "suppliers[Quarry Q].caco3_pct=90,none"])
    vals = [(c.scenario.plant.shortage_penalty_per_t, c.scenario.suppliers[0].caco3_pct)
            for c in g.cases]
    assert vals == [(500.0, 90.0), (500.0, None), (2000.0, 90.0), (2000.0, None)]


def test_a_driver_input_is_resampled_not_shared():
    g = _grid_of(_sheets(), ["coal_sources[Coal A].sulfur_pct=1.5,2.5"])
    assert all(c.resample for c in g.cases)
    assert [c.scenario.coal_sources[0].sulfur_pct for c in g.cases] == [1.5, 2.5]


def test_a_resampled_case_plans_as_the_plan_command_does(shared):
    """A coal variant samples its own futures with the shared seed: its plan is
    `run_plan` of that variant with the same seed and number of futures."""
    from reagentplan.pipeline import run_plan
    from reagentplan.study.run import run_case

    g = _grid_of(_sheets(), ["coal_sources[Coal A].sulfur_pct=2.5"])
    row = run_case(g.cases[0], shared, PlanSettings(time_limit=30))
    assert row["futures"] == "resampled" and row["status"] == "optimal"
    ref = run_plan(g.cases[0].scenario, futures=shared.n_futures, seed=shared.seed, time_limit=30)
    assert row["total_cost"] == round(ref.plan.evaluation.total_cost, 2)
    risk = ref.risk.frame
    assert row["p_limestone_below_safety"] == pytest.approx(
        risk.loc[risk["store"] == "limestone", "p_below_safety"].max(), abs=1 / shared.n_futures)


def test_rows_of_several_lanes_are_refused_with_the_choices_named():
    s = _sheets()
    s["suppliers"].append(["Quarry Q", "truck", 25, 20, 1, "Mon-Fri", 20, 100, None, 5000])
    with pytest.raises(ScenarioError) as e:
        _grid_of(s, ["suppliers[Quarry Q].max_t_per_month=1000,2000"])
    text = _problems(e.value)
    assert "matches 2 rows of 'suppliers' (rows 2, 3) that are different lanes" in text
    assert "suppliers[Quarry Q/rail].max_t_per_month" in text
    assert "suppliers[Quarry Q/truck].max_t_per_month" in text
    g = _grid_of(s, ["suppliers[Quarry Q/truck].max_t_per_month=1000,2000"])
    assert [[x.max_t_per_month for x in c.scenario.suppliers] for c in g.cases] == [
        [30000.0, 1000.0], [30000.0, 2000.0]]


def test_seasonal_rows_of_one_lane_change_together_or_by_their_months():
    s = _sheets()
    header = s["suppliers"][0] + ["months"]
    rows = [r + [m] for r, m in zip(s["suppliers"][1:], ["Mar-Nov"])]
    rows.append(["Quarry Q", "rail", 1000, 1, 3, "Mon-Fri", 15, 2600, None, 30000, "Dec-Feb"])
    s["suppliers"] = [header] + rows
    g = _grid_of(s, ["suppliers[Quarry Q].max_t_per_month=20000"])
    assert [x.max_t_per_month for x in g.cases[0].scenario.suppliers] == [20000.0, 20000.0]
    g = _grid_of(s, ["suppliers[Quarry Q/rail/Dec-Feb].freight_per_load=3000"])
    assert [x.freight_per_load for x in g.cases[0].scenario.suppliers] == [2000.0, 3000.0]


@pytest.mark.parametrize("spec, expected", [
    ("scrubbers.removal_pct=96", "names the sheet 'scrubbers', which the workbook has no place "
                                 "for (did you mean 'scrubber'?)"),
    ("scrubber.removal_pc=96", "'removal_pc' is not a key of 'scrubber' (did you mean 'removal_pct'?)"),
    ("suppliers[Quary Q].max_t_per_month=1", "no row of 'suppliers' is named [Quary Q] (did you "
                                             "mean 'Quarry Q'?)"),
    ("storage[gypsum].capacity=1", "'capacity' is not a column of 'storage' (did you mean 'capacity_t'?)"),
    ("storage.capacity_t=1", "names no row of the table 'storage'"),
    ("scrubber removal_pct 96", "is not a --vary spec"),
    ("scrubber.removal_pct=96,,98", "has an empty value"),
    ("scrubber.removal_pct=96,96", "gives the value 96 twice"),
    ("firm_orders[2030-03-05].loads=1", "the workbook has no sheet 'firm_orders'"),
])
def test_a_spec_that_names_nothing_is_refused_with_its_reason(spec, expected):
    with pytest.raises(ScenarioError) as e:
        _grid_of(_sheets(), [spec])
    assert expected in _problems(e.value)


def test_values_are_checked_by_the_loader_with_sheet_row_and_column():
    with pytest.raises(ScenarioError) as e:
        _grid_of(_sheets(), ["scrubber.removal_pct=96,101", "storage[gypsum].capacity_t=abc,4000"])
    text = _problems(e.value)
    assert ("sheet 'scrubber', row 2, column 'value (removal_pct)': found 101 (with --vary "
            "scrubber.removal_pct=101); expected a number from 0 to 100") in text
    assert ("sheet 'storage', row 3, column 'capacity_t': found 'abc' (with --vary "
            "storage[gypsum].capacity_t=abc)") in text


def test_values_that_clash_only_together_name_the_case():
    with pytest.raises(ScenarioError) as e:
        _grid_of(_sheets(), ["suppliers[Quarry Q].min_t_per_month=0,25000",
                             "suppliers[Quarry Q].max_t_per_month=20000,30000"])
    text = _problems(e.value)
    assert "the monthly minimum 25000 t is above the maximum 20000 t" in text
    assert "case 3: suppliers[Quarry Q].min_t_per_month=25000, suppliers[Quarry Q].max_t_per_month=20000" in text


def test_a_grid_too_big_is_refused_before_anything_loads():
    specs = ["scrubber.removal_pct=" + ",".join(str(90 + i / 10) for i in range(30)),
             "scrubber.ca_s_ratio=" + ",".join(str(1.01 + i / 100) for i in range(20))]
    with pytest.raises(ScenarioError) as e:
        _grid_of(_sheets(), specs)
    assert "the grid has 600 cases (30 x 20 values); expected at most 500 cases" in _problems(e.value)


def test_cli_bad_vary_exits_2_and_writes_nothing(study_book, tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["study", str(study_book), "--out", str(out), "--cluster", "serial",
                 "--vary", "scrubber.removal_pct=96,120"])
    err = capsys.readouterr().err
    assert code == 2 and "found 120" in err and "Traceback" not in err
    assert not out.exists() and not any(p.name.startswith(".out") for p in tmp_path.iterdir())
    assert main(["study", str(study_book), "--out", str(out), "--cluster", "nowhere",
                 "--vary", "scrubber.removal_pct=96"]) == 2
    assert "expected local, serial, or a scheduler address" in capsys.readouterr().err


# --------------------------------------------------------------------------- futures


def test_shared_drivers_give_exactly_the_futures_of_sample_futures(grid):
    # two blocks of random streams (2048 + 52 futures)
    drivers = sample_drivers(grid.base, 2100, seed=11)
    a = futures_from_drivers(drivers, grid.base)
    b = sample_futures(grid.base, 2100, seed=11)
    for k in b.flows:
        assert np.array_equal(a.flows[k], b.flows[k], equal_nan=True), k


def test_a_removal_variant_changes_limestone_on_the_same_coal(grid, shared):
    """Common random numbers: every case burns the same coal in future k; only its own
    balance differs.  With no chlorine and no sorbent injection, limestone is
    proportional to the SO2 removed (Srivastava & Jozewicz 2001: CaCO3 fed = Ca/S x SO2
    removed), so 98 % against 96 % removal is 98/96 the limestone in every future."""
    lo = futures_from_drivers(shared, grid.cases[0].scenario)   # 96 %
    hi = futures_from_drivers(shared, grid.cases[2].scenario)   # 98 %
    assert np.array_equal(lo.flows["sulfur_pct"], hi.flows["sulfur_pct"])
    assert np.ptp(lo.flows["sulfur_pct"]) > 0  # the futures do differ from each other
    ratio = hi.flows["limestone_t"].astype(float) / lo.flows["limestone_t"].astype(float)
    np.testing.assert_allclose(ratio, 98 / 96, rtol=1e-5)


# --------------------------------------------------------------------------- costs


def test_replaying_the_deterministic_future_prices_the_plan_as_the_plan_does(grid, shared):
    run = plan_case(grid.cases[0], shared, PlanSettings(time_limit=30))
    fig = replay_costs(run.plan, deterministic_flows(run.plan.balance))
    assert fig.costs.shape == (1,)
    assert fig.costs[0] == pytest.approx(run.plan.evaluation.total_cost, rel=1e-9, abs=1e-6)


def test_haul_outs_do_not_take_the_heel():
    """A worked example: 100 t in the store, safety 50 t, 10 t made and 80 t planned out
    each day: day 1 ships 60 t (leaves 50), day 2 ships 10 t; 80 t not shipped."""
    level, unshipped = replay_byproduct_heel(100.0, np.array([[10.0, 10.0]]),
                                             np.array([80.0, 20.0]), 50.0)
    np.testing.assert_allclose(level, [[50.0, 50.0]])
    np.testing.assert_allclose(unshipped, [30.0])
    level0, _ = replay_byproduct_heel(100.0, np.array([[10.0, 10.0]]), np.array([80.0, 20.0]), 0.0)
    np.testing.assert_allclose(level0, [[30.0, 20.0]])


def test_a_delivery_that_would_not_fit_is_called_off():
    """A worked example: 40 t in a 100 t store, 80 t arrive on day 1 and 10 t are used
    each day: 20 t do not fit (called off), day 1 ends at 90 t, day 2 at 80 t."""
    level, unmet, refused = replay_limestone_capped(40.0, np.array([80.0, 0.0]),
                                                    np.array([[10.0, 10.0]]), 100.0)
    np.testing.assert_allclose(level, [[90.0, 80.0]])
    np.testing.assert_allclose(refused, [20.0])
    assert not unmet.any()
    level, unmet, refused = replay_limestone_capped(15.0, np.array([0.0, 0.0]),
                                                    np.array([[10.0, 10.0]]), 100.0)
    np.testing.assert_allclose(level, [[5.0, 0.0]])
    np.testing.assert_allclose(unmet, [[0.0, 5.0]])


def test_the_winner_is_the_cheapest_within_the_risk_level():
    frame = pd.DataFrame({
        "case": [1, 2, 3, 4], "status": ["optimal", "optimal", "failed", "feasible"],
        "expected_cost": [100.0, 90.0, None, 95.0],
        "p_limestone_below_safety": [0.0, 0.08, None, 0.01],
        "p_any_over_capacity": [0.02, 0.0, None, 0.04],
    })
    w = pick_winner(frame, 0.05, "USD")
    assert w.case == 4
    assert "case 2 would cost less (90 USD) but its risk is 8.0 %" in w.reason
    assert pick_winner(frame, 0.005).case is None


# --------------------------------------------------------------------------- cluster


def _strip(rows):
    return [{k: v for k, v in r.items() if k not in TIMING} for r in rows]


def test_a_local_cluster_of_two_gives_what_a_serial_run_gives(grid, shared, cluster):
    settings = PlanSettings(time_limit=30)
    serial = run_cases(tuple(reversed(grid.cases)), shared, settings, None, progress=False)
    dist = run_cases(grid.cases, shared, settings, cluster, progress=False)
    assert dist.workers == 2 and not dist.interrupted and dist.scatter_seconds > 0
    assert dist.dashboard is None  # this cluster serves no dashboard, so none is named
    assert [r["case"] for r in dist.rows] == [1, 2, 3, 4]
    by_case = {r["case"]: r for r in _strip(serial.rows)}
    assert _strip(dist.rows) == [by_case[k] for k in (1, 2, 3, 4)]
    assert all(r["status"] == "optimal" for r in dist.rows)
    # the cases differ by their variants: more removal, more limestone bought
    assert dist.rows[2]["total_cost"] > dist.rows[0]["total_cost"]


def test_a_case_that_raises_in_a_worker_is_reported_and_the_others_finish(grid, shared, cluster):
    broken = dataclasses.replace(grid.cases[1], scenario=dataclasses.replace(
        grid.cases[1].scenario, storage={k: v for k, v in grid.cases[1].scenario.storage.items()
                                         if k != "limestone"}))
    cases = (grid.cases[0], broken, grid.cases[2])
    res = run_cases(cases, shared, PlanSettings(time_limit=30), cluster, progress=False)
    status = {r["case"]: r["status"] for r in res.rows}
    assert status == {1: "optimal", 2: "failed", 3: "optimal"}
    assert res.rows[1]["message"].startswith("KeyError: 'limestone'")
    assert res.rows[1]["total_cost"] is None


def test_a_case_past_its_timeout_is_reported_as_timed_out(grid, shared):
    res = run_cases(grid.cases[:1], shared, PlanSettings(time_limit=30), None,
                    case_timeout=0.001, progress=False)
    assert res.rows[0]["status"] == "timeout"
    assert "no result after 0.001 s" in res.rows[0]["message"]


# --------------------------------------------------------------------------- end to end


def test_study_on_a_running_scheduler_and_its_winner_is_the_plan_command(study_book, tmp_path,
                                                                        cluster, capsys):
    """The study's winner folder is what `reagentplan plan` writes for the same variant
    (the same futures: same seed, same count)."""
    out = tmp_path / "study"
    code = main(["study", str(study_book), "--out", str(out), "--cluster",
                 cluster.scheduler.address, "--futures", "30", "--seed", "4",
                 "--time-limit", "30", *sum((["--vary", s] for s in SPECS), [])])
    printed = capsys.readouterr().out
    assert code == 0, printed
    assert "Winner: case" in printed
    frame = pd.read_csv(out / "study.csv")
    assert list(frame.columns[:16]) == [
        "case", "scrubber.removal_pct", "storage[gypsum].capacity_t", "status", "total_cost",
        "cost_p10", "cost_p50", "cost_p90", "p_limestone_below_safety", "p_any_over_capacity",
        "trains", "trucks", "sold_t", "landfilled_t", "solve_seconds", "expected_cost"]
    assert len(frame) == 4 and (frame["futures"] == "shared").all()
    meta = json.loads((out / "study.json").read_text())
    win = frame.loc[frame["case"] == meta["winner"]].iloc[0]
    assert win["expected_cost"] == frame["expected_cost"].min()  # all within 5 % here

    s = _sheets()
    set_value(s, "scrubber", "removal_pct", None, float(win["scrubber.removal_pct"]))
    set_value(s, "storage", 1, "capacity_t", float(win["storage[gypsum].capacity_t"]))
    variant = write_workbook(s, tmp_path / "variant.xlsx")
    plan_out = tmp_path / "plan"
    assert main(["plan", str(variant), "--out", str(plan_out), "--futures", "30", "--seed", "4",
                 "--time-limit", "30"]) in (0, 1)
    for name in ("movements.csv", "inventory.csv", "risk.csv", "forecast.csv", "balance.csv"):
        assert (out / "winner" / name).read_bytes() == (plan_out / name).read_bytes(), name
    summary = json.loads((plan_out / "summary.json").read_text())
    assert summary["total_cost"] == pytest.approx(win["total_cost"], abs=0.01)

    wb = load_workbook(out / "study.xlsx")
    assert wb.sheetnames == ["study", "chart", "notes"]
    charts = wb["chart"]._charts
    assert len(charts) == 1 and len(charts[0].series) == 4
    assert [c.value for c in wb["study"][1]][:3] == ["case", "scrubber.removal_pct",
                                                     "storage[gypsum].capacity_t"]


def _default_interrupt() -> None:
    """In the child before it runs: Ctrl-C at its default and not blocked, as a terminal
    starts a command, whatever the test process inherited."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)
    signal.pthread_sigmask(signal.SIG_UNBLOCK, [signal.SIGINT])


def test_ctrl_c_stops_the_study_and_keeps_the_finished_cases(tmp_path):
    """A real Ctrl-C (SIGINT to the whole process group, as a terminal sends it) to
    `reagentplan study` on its own LocalCluster of 2: exit 130, no traceback from the
    workers, study.csv with the finished cases and the rest 'not run'."""
    book = write_workbook(_sheets(40), tmp_path / "station.xlsx")
    out = tmp_path / "out"
    values = ",".join(f"{x:g}" for x in np.linspace(90, 99, 40))
    proc = subprocess.Popen([sys.executable, "-m", "reagentplan.cli", "study", str(book), "--out",
                             str(out), "--cluster", "local", "--workers", "2", "--futures", "20",
                             "--vary", f"scrubber.removal_pct={values}"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True, env={**os.environ, "PYTHONUNBUFFERED": "1"},
                            preexec_fn=_default_interrupt)
    seen: list[str] = []
    reader = threading.Thread(target=lambda: seen.extend(iter(lambda: proc.stderr.read(1), "")),
                              daemon=True)
    reader.start()
    deadline = time.time() + 120
    while time.time() < deadline and proc.poll() is None:
        # any count from 4 to 39 cases done: a busy machine may draw several bar lines
        # between two looks, so "4/40" alone can be missed and the study run to its end
        if re.search(r"\b([4-9]|[1-3][0-9])/40\b", "".join(seen[-2000:])):
            os.killpg(proc.pid, signal.SIGINT)
            break
        time.sleep(0.05)
    stdout = proc.stdout.read()
    proc.wait(timeout=120)
    reader.join(timeout=10)
    err = "".join(seen)
    assert proc.returncode == 130, (stdout, err)
    assert "Traceback" not in err and "KeyboardInterrupt" not in err
    assert "Running on tcp://127.0.0.1:" in stdout and "Dask dashboard: http://" in stdout
    frame = pd.read_csv(out / "study.csv")
    assert len(frame) == 40
    # a case's plan ends "optimal" or, where its solves reach their node limit, "feasible"
    done = frame[frame["status"].isin(["optimal", "feasible"])]
    assert 4 <= len(done) < 40
    assert set(frame["status"]) - {"optimal", "feasible"} == {"not run"}
    assert json.loads((out / "study.json").read_text())["interrupted"] is True
