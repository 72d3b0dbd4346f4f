"""A fleet's study runs its cases as the station study does (`study.cluster.run_on_cluster`,
`study.run.run_guarded`): a case past ``--case-timeout`` or one that raises is a row with
its status and message, and the study goes on; Ctrl-C keeps the finished cases."""

from __future__ import annotations

import dataclasses
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest

from fleet_helpers import two_stones, write_fleet
from reagentplan.cli import main
from reagentplan.fleet.study import build_fleet_grid, run_fleet_case
from reagentplan.settings import STUDY

DAYS, FIRM = 42, 14
SPEC = "shared_contracts[Board pool].max_t_per_month=4000"


def test_a_fleet_case_past_its_timeout_is_a_row_and_the_study_ends_with_exit_1(tmp_path, capsys):
    path = write_fleet(tmp_path / "f", days=DAYS)
    out = tmp_path / "study"
    args = ["study", str(path), "--out", str(out), "--futures", "0", "--firm-days", str(FIRM),
            "--cluster", "local", "--workers", "1", "--case-timeout", "0.001", "--vary", SPEC]
    # (on a local cluster: the timed-out case's thread runs on in the worker, not in pytest)
    assert main(args) == 1
    printed = capsys.readouterr().out
    assert "case 1: timeout: no result after 0.001 s" in printed
    frame = pd.read_csv(out / "study.csv")
    assert list(frame["status"]) == ["timeout"]
    assert frame.loc[0, "message"].startswith("no result after 0.001 s (solver limit")
    assert list(frame["shared_contracts[Board pool].max_t_per_month"]) == [4000]


def test_a_fleet_case_that_raises_is_a_failed_row_with_its_error(tmp_path):
    grid = build_fleet_grid(write_fleet(tmp_path / "f", days=DAYS), [SPEC])
    broken = dataclasses.replace(grid.cases[0], fleet=None)  # no fleet to plan: plan_fleet raises
    row = run_fleet_case(broken, None, STUDY)
    assert row["case"] == 1 and row["status"] == "failed"
    assert row["message"].startswith("AttributeError: ") and "(at " in row["message"]
    assert row["total_cost"] is None and row["breaches"] is None


def _default_interrupt() -> None:
    """In the child before it runs: Ctrl-C at its default and not blocked, as a terminal
    starts a command, whatever the test process inherited."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)
    signal.pthread_sigmask(signal.SIG_UNBLOCK, [signal.SIGINT])


def test_ctrl_c_stops_a_fleet_study_and_keeps_the_finished_cases(tmp_path):
    """A real Ctrl-C (SIGINT to the process group, as a terminal sends it) to `reagentplan
    study FLEET.xlsx` on its own LocalCluster while the cases run: exit 130 with no
    traceback, and study.csv written with every case, those not finished marked 'not
    run' (before, nothing was written).  (On ``--cluster serial`` the solver in the
    process takes the Ctrl-C, as in the station study.)"""
    psutil = pytest.importorskip("psutil")
    path = write_fleet(tmp_path / "f", days=DAYS)
    out = tmp_path / "study"
    values = ",".join(str(v) for v in range(2500, 4100, 40))  # 40 cases
    proc = subprocess.Popen([sys.executable, "-m", "reagentplan.cli", "study", str(path), "--out", str(out),
                             "--futures", "0", "--firm-days", str(FIRM), "--cluster", "local", "--workers", "1",
                             "--vary", f"shared_contracts[Board pool].max_t_per_month={values}"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True,
                            env={**os.environ, "PYTHONUNBUFFERED": "1"}, preexec_fn=_default_interrupt)
    assert "40 case(s) of the fleet" in proc.stdout.readline()  # the grid is built
    deadline = time.time() + 120
    while time.time() < deadline and len(psutil.Process(proc.pid).children(recursive=True)) < 2:
        time.sleep(0.1)  # the cluster's nanny and worker are starting
    time.sleep(8.0)  # the worker up and the first cases under way
    assert proc.poll() is None, "the study ended before the Ctrl-C"
    os.killpg(proc.pid, signal.SIGINT)
    stdout, err = proc.communicate(timeout=180)
    assert proc.returncode == 130, (stdout, err)
    assert "Traceback" not in err and "KeyboardInterrupt" not in err
    assert "Interrupted: the finished cases are in study.csv" in err
    frame = pd.read_csv(out / "study.csv")
    assert list(frame["case"]) == list(range(1, 41))
    assert "not run" in set(frame["status"])
    assert set(frame["status"]) - {"optimal", "feasible", "not run"} == set()


def test_a_coupled_silo_in_a_fleet_study_is_priced_as_the_station_study_prices_it(tmp_path):
    """A station whose quarries give their own CaCO3 (its silo's stone coupled to the
    plan): each future's stone use and gypsum are moved to the plan's stone before the
    replay (`flows_at_plan_stone`), as the station study does, so the fleet's cost per
    future is the stations' replays so priced, summed, plus the pooled shortfalls."""

    from reagentplan.balance import balance_frame
    from reagentplan.fleet import plan_fleet
    from reagentplan.fleet.study import plan_case
    from reagentplan.pipeline import STORE_FLOWS
    from reagentplan.schedule.plan import flows_at_plan_stone
    from reagentplan.study.run import replay_costs

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"east": two_stones(DAYS)},
                       contracts=[["Board pool", "Board Co", "gypsum", None, 5000, None]], sets=[])
    grid = build_fleet_grid(path, ["shared_contracts[Board pool].max_t_per_month=5000"])
    settings = dataclasses.replace(STUDY, futures=8, firm_days=FIRM)
    assert grid.cases[0].fleet.station("east").scenario.quality_coupled
    row = plan_case(grid.cases[0], settings)
    result = plan_fleet(grid.cases[0].fleet, settings)  # the same inputs give the same plan
    assert round(result.total_cost, 2) == row["total_cost"]
    per_future = result.pools["cost"]
    moved = False
    for run in result.runs.values():
        plan = run.plan
        flows = {store: run.futures.flows[q] for store, q in STORE_FLOWS.items() if store in plan.scenario.storage}
        if plan.scenario.quality_coupled:
            at_stone = flows_at_plan_stone(plan, flows, balance_frame(plan.scenario))
            moved |= any(not np.allclose(at_stone[s], flows[s]) for s in flows)
            flows = at_stone
        per_future = per_future + replay_costs(plan, flows).costs
    assert moved  # the plan's stone is not the initial one: the test tells the two apart
    assert row["cost_p50"] == round(float(np.quantile(per_future, 0.5)), 2)
    assert row["cost_p90"] == round(float(np.quantile(per_future, 0.9)), 2)
