"""The weekly loop's rehearsal on a tiny invented station (tests/helpers.py): 3 weeks ×
2 futures, both policies.  The invariants of the loop: nothing booked is dropped, no
contract month over its maximum in what really moved, true stock never negative and
conserved (the store's mass balance: level = opening + in − out, a conservation
identity, no source needed), the same seed gives the same figures."""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import openpyxl
import pandas as pd
import pytest

from helpers import minimal_sheets, set_value, write_workbook
from reagentplan.cli import main
from reagentplan.rehearse import Disturbances, rehearse
from reagentplan.scenario import load_scenario
from reagentplan.settings import WEEKLY_PLAN

#: The weekly plans of these tests: 10 solver seconds, else the rehearsal's own.
QUICK = dataclasses.replace(WEEKLY_PLAN, time_limit=10)

WEEKS, FUTURES, LOOKAHEAD = 3, 2, 35
#: Rough disturbances so that the test meets them: half the trains late (common practice, no source).
ROUGH = Disturbances(late_chance=0.5, late_max_days=2, partial_chance=0.3, partial_share=0.5, survey_sd=0.015)


def _sheets():
    s = minimal_sheets(days=70)
    # a tight limestone pile (about 5 days of use above safety) so that trains must be ordered
    # each week, and a small gypsum contract so that its monthly maximum binds
    set_value(s, "storage", 0, "initial_t", 900)
    set_value(s, "buyers", 0, "max_t_per_month", 1500)
    return s


@pytest.fixture(scope="module")
def rehearsal(tmp_path_factory):
    path = write_workbook(_sheets(), tmp_path_factory.mktemp("rh") / "tiny.xlsx")
    res = rehearse(path, weeks=WEEKS, futures=FUTURES, seed=3, lookahead_days=LOOKAHEAD, settings=QUICK,
                   disturbances=ROUGH)
    return path, res


def test_one_row_per_policy_and_future(rehearsal):
    _, res = rehearsal
    t = res.table
    assert sorted(zip(t["policy"], t["future"])) == sorted(
        (p, f) for p in ("plan", "baseline") for f in range(FUTURES))
    causes = [c for c in t.columns if c.startswith("cost_")]
    assert np.allclose(t[causes].sum(axis=1), t["realised_cost"], atol=0.05)
    assert (t["weeks"] == WEEKS).all()
    assert "saving_share_of_controllable" in res.summary()


def test_stock_never_negative_and_conserved(rehearsal):
    path, res = rehearsal
    sc = load_scenario(path)
    for run in res.runs:
        d = run.daily
        assert (d["level_t"] >= -1e-9).all()
        lime = d[d["store"] == "limestone"].reset_index(drop=True)
        assert len(lime) == 7 * WEEKS
        arrived = run.moved[run.moved["kind"] == "supply"].groupby("date")["tonnes"].sum()
        arrived = lime["date"].map(arrived).fillna(0.0).to_numpy()
        # the futures sampled again with the same seed are the truth the run met
        from reagentplan.forecast import sample_futures

        use = sample_futures(sc, FUTURES, seed=3, keep=("limestone_t",)).flows["limestone_t"][run.world]
        use = use[: len(lime)].astype(float)
        level = sc.storage["limestone"].initial_t + np.cumsum(arrived - use + lime["unmet_t"].to_numpy())
        assert np.allclose(level, lime["level_t"], atol=0.05)


def test_nothing_booked_is_dropped(rehearsal):
    """Every order booked in week w is held firm (booked) by each later plan made before
    it arrives, on the day the record then expects it (its planned day, or the late
    train's day once known), and every order due inside the rehearsal arrives."""
    path, res = rehearsal
    start = pd.Timestamp(load_scenario(path).plant.start_date)
    end = start + pd.Timedelta(days=7 * WEEKS)
    checked = 0
    for run in res.runs:
        assert len(run.orders), "the tight pile makes every policy book trains"
        for k in range(2, WEEKS + 1):
            as_of = start + pd.Timedelta(days=7 * (k - 1) - 1)
            plan = run.plans[k - 1]
            expected = {}
            for o in run.orders[run.orders["week"] < k].itertuples(index=False):
                planned, arrival = pd.Timestamp(o.planned), pd.Timestamp(o.arrival)
                day = planned if planned > as_of else (arrival if arrival > as_of else None)
                if day is not None and day <= as_of + pd.Timedelta(days=LOOKAHEAD):
                    expected[(o.lane, day)] = expected.get((o.lane, day), 0) + int(o.loads)
            for (lane, day), loads in expected.items():
                row = plan[(plan["lane"] == lane) & (plan["date"] == day) & plan["booked"].astype(bool)]
                assert int(row["loads"].sum()) >= loads, (run.policy, run.world, k, lane, day)
                checked += 1
        for o in run.orders.itertuples(index=False):
            if pd.Timestamp(o.arrival) < end:
                got = run.moved[(run.moved["date"] == pd.Timestamp(o.arrival)) & (run.moved["lane"] == o.lane)]
                assert got["loads"].sum() >= o.loads, (run.policy, o.order_id)
    assert checked > 0


def test_no_contract_month_over_its_maximum(rehearsal):
    path, res = rehearsal
    sc = load_scenario(path)
    limits = {s.supplier: s.max_t_per_month for s in sc.suppliers} | {b.buyer: b.max_t_per_month for b in sc.buyers}
    near = 0
    for run in res.runs:
        m = run.moved.assign(month=pd.to_datetime(run.moved["date"]).dt.to_period("M"))
        for (party, _month), t in m.groupby(["party", "month"])["tonnes"].sum().items():
            hi = limits.get(party)
            if hi:
                assert t <= hi + 1e-6, (run.policy, party, t, hi)
                near += t >= 0.5 * hi
    assert (res.table["months_over_max"] == 0).all()
    assert near > 0, "the gypsum contract is small enough to matter"


def test_same_seed_same_figures(rehearsal):
    path, res = rehearsal
    from reagentplan.forecast import sample_futures
    from reagentplan.rehearse import policy_figures, rehearse_policy, worlds_from_futures

    sc = load_scenario(path)
    world = worlds_from_futures(sample_futures(sc, FUTURES, seed=3, keep=("limestone_t", "gypsum_wet_t",
                                                                         "fly_ash_t", "bottom_ash_t")),
                                sc.storage)[1]
    from reagentplan.rehearse.guard import GuardFutures

    run = rehearse_policy(path, sc, world, "plan", weeks=WEEKS, disturbances=ROUGH, seed=3,
                          lookahead_days=LOOKAHEAD, settings=QUICK,
                          guard=GuardFutures.sample(sc, QUICK.futures, 3))
    again = policy_figures(sc, run)
    first = res.table[(res.table["policy"] == "plan") & (res.table["future"] == 1)].iloc[0].to_dict()
    for k, v in again.items():
        if k != "plan_seconds":
            assert first[k] == v, k


def test_cli_writes_files_and_names_bad_sheet(tmp_path, capsys):
    s = _sheets()
    s["rehearsal"] = [["key", "value"], ["late_train_chance_pct", 40], ["survey_eror_pct", 2]]
    bad = write_workbook(s, tmp_path / "bad.xlsx")
    out = tmp_path / "out"
    assert main(["rehearse", str(bad), "--out", str(out), "--weeks", "1", "--futures", "1",
                 "--lookahead-days", "21"]) == 2
    err = capsys.readouterr().err
    assert "sheet 'rehearsal', row 3, column 'key'" in err and "did you mean 'survey_error_pct'" in err
    assert not out.exists()
    s["rehearsal"] = [["key", "value"], ["late_train_chance_pct", 40], ["survey_error_pct", 2]]
    good = write_workbook(s, tmp_path / "good.xlsx")
    assert main(["rehearse", str(good), "--out", str(out), "--weeks", "30", "--futures", "1",
                 "--late-chance", "120"]) == 2
    err = capsys.readouterr().err
    assert "option '--weeks'" in err and "option '--late-chance': found 120 %" in err
    assert not out.exists()
    assert main(["rehearse", str(good), "--out", str(out), "--weeks", "1", "--futures", "1",
                 "--lookahead-days", "21", "--workers", "0", "--risk-level", "60"]) == 2
    err = capsys.readouterr().err
    assert "option '--workers': found 0" in err and "option '--risk-level': found 60 %" in err
    assert not out.exists()
    assert main(["rehearse", str(good), "--out", str(out), "--weeks", "1", "--futures", "1",
                 "--lookahead-days", "21", "--partial-chance", "0"]) == 0
    table = pd.read_csv(out / "rehearsal.csv")
    assert set(table["policy"]) == {"plan", "baseline"}
    for c in ("realised_cost", "cost_stone", "cost_freight", "cost_sales", "cost_landfill",
              "cost_stone_missing", "cost_overflow", "days_under_safety", "stockout_days", "overflow_days",
              "nervousness"):
        assert c in table.columns
    wb = openpyxl.load_workbook(out / "rehearsal.xlsx")
    assert wb["chart"]._charts, "the chart comparing the two policies"
    import json

    meta = json.loads((out / "rehearsal.json").read_text())
    assert meta["settings"]["late_chance"] == pytest.approx(0.4)
    assert meta["settings"]["survey_sd"] == pytest.approx(0.02)
    assert meta["settings"]["partial_chance"] == 0
    assert meta["settings"]["risk_level"] == pytest.approx(0.01) and meta["settings"]["plan_futures"] == 50
    assert dt.date.fromisoformat(meta["settings"]["start_date"]) == dt.date(2030, 3, 4)


def test_guard_futures_are_cut_and_scaled_to_each_week(tmp_path):
    """The weekly plans' guard futures: sampled once from a seed that is not the truth's,
    cut to the week's days, the limestone use scaled to the week's stone.  Limestone
    needed is the CaCO3 needed over the stone's CaCO3 share (stoichiometry; a
    conservation identity, no source needed), so stone of 90 % in place of 94 % needs
    94/90 times the tonnes each day."""
    from reagentplan.forecast import sample_futures
    from reagentplan.rehearse.guard import GuardFutures
    from reagentplan.schedule.plan import guard_margins

    path = write_workbook(_sheets(), tmp_path / "tiny.xlsx")
    sc = load_scenario(path)
    guard = GuardFutures.sample(sc, 40, seed=3)
    truth = sample_futures(sc, 40, seed=3, keep=("limestone_t",))
    assert not np.allclose(guard.futures.flows["limestone_t"], truth.flows["limestone_t"])
    assert GuardFutures.sample(sc, 0, seed=3) is None

    import dataclasses
    week = dataclasses.replace(sc, plant=dataclasses.replace(sc.plant, start_date=sc.plant.start_date
                                                             + dt.timedelta(days=7), horizon_days=21))
    cut = guard(week)
    assert list(cut.dates) == list(pd.date_range(week.plant.start_date, periods=21, freq="D"))
    for q in ("limestone_t", "gypsum_wet_t", "so2_emitted_t"):
        assert np.allclose(cut.flows[q], guard.futures.flows[q][:, 7:28], rtol=1e-6), q

    s = _sheets()
    set_value(s, "scrubber", "limestone_caco3_pct", None, 90)
    poorer = load_scenario(write_workbook(s, tmp_path / "poorer.xlsx"))
    cut90 = guard(dataclasses.replace(poorer, plant=week.plant))
    assert np.allclose(cut90.flows["limestone_t"], cut.flows["limestone_t"] * 94 / 90, rtol=1e-5)
    # and the plan's margin for the limestone grows with it
    from reagentplan.balance import balance_frame
    m = guard_margins(balance_frame(dataclasses.replace(poorer, plant=week.plant)),
                      {"limestone": cut90.flows["limestone_t"]}, 0.05)["limestone"]
    m94 = guard_margins(balance_frame(week), {"limestone": cut.flows["limestone_t"]}, 0.05)["limestone"]
    assert m[-1] > 0 and np.isclose(m[-1], m94[-1] * 94 / 90, rtol=1e-3)
    with pytest.raises(KeyError, match="not every day"):
        guard.futures.window(pd.date_range(sc.dates[-1], periods=3, freq="D"))


def test_two_workers_play_the_same_rehearsal(tmp_path):
    """Futures played in two processes give the same rows as played in one."""
    path = write_workbook(_sheets(), tmp_path / "tiny.xlsx")
    kw = dict(weeks=2, futures=2, seed=5, lookahead_days=LOOKAHEAD,
              settings=dataclasses.replace(QUICK, futures=20), disturbances=ROUGH)
    one = rehearse(path, workers=1, **kw).table.drop(columns="plan_seconds")
    two = rehearse(path, workers=2, **kw).table.drop(columns="plan_seconds")
    pd.testing.assert_frame_equal(one, two)


def test_poorer_stone_is_drawn_in_more_tonnes_and_off_spec_gypsum_refused(tmp_path):
    """The rehearsal's truth follows the stone really fed.  The only quarry ships 88 %
    stone into a silo opened at 94 %: the scrubber's CaCO3 need (the world's use at the
    workbook's 94 %) is met by more tonnes of the mix, CaCO3 is conserved (need = drawn ×
    the silo's CaCO3; stoichiometry, no source needed), the store's tonnes are conserved,
    and no gypsum leaves for the 94 %-purity board plant on a day the cake is below it."""
    from reagentplan.balance import balance_frame
    from reagentplan.forecast import sample_futures

    s = _sheets()
    s["suppliers"][0].append("caco3_pct")
    s["suppliers"][1].append(88)
    path = write_workbook(s, tmp_path / "poor.xlsx")
    sc = load_scenario(path)
    assert balance_frame(sc, caco3_pct=np.full(sc.plant.horizon_days, 88.0))["gypsum_purity_pct"].max() < 94
    res = rehearse(path, weeks=WEEKS, futures=1, seed=3, lookahead_days=LOOKAHEAD,
                   settings=dataclasses.replace(QUICK, futures=10), disturbances=ROUGH)
    use = sample_futures(sc, 1, seed=3, keep=("limestone_t",)).flows["limestone_t"][0].astype(float)
    refused = 0.0
    for run in res.runs:
        d = run.daily
        lime = d[d["store"] == "limestone"].sort_values("date").reset_index(drop=True)
        world = use[: len(lime)]
        need = world * 0.94
        assert np.allclose((lime["used_t"] + lime["unmet_t"]) * lime["caco3_pct"] / 100, need, rtol=1e-6)
        arrived = run.moved[run.moved["kind"] == "supply"].groupby("date")["tonnes"].sum()
        arrived = lime["date"].map(arrived).fillna(0.0).to_numpy()
        level = sc.storage["limestone"].initial_t + np.cumsum(arrived - lime["used_t"].to_numpy())
        assert np.allclose(level, lime["level_t"], atol=0.05)
        if arrived.sum() > 0:
            after = lime["date"] >= lime.loc[np.argmax(arrived > 0), "date"]
            assert (lime.loc[after, "caco3_pct"] < 94 - 1e-6).all()
            assert lime.loc[after, "used_t"].sum() > world[after.to_numpy()].sum()
        fed = np.full(sc.plant.horizon_days, 94.0)
        fed[: len(lime)] = lime["caco3_pct"].to_numpy()
        purity = pd.Series(balance_frame(sc, caco3_pct=fed)["gypsum_purity_pct"].to_numpy()[: len(lime)],
                           index=lime["date"])
        board = run.moved[run.moved["party"] == "Board Co"]
        assert (purity.reindex(pd.to_datetime(board["date"])).to_numpy() >= 94 - 1e-9).all()
        refused += float(d["refused_t"].sum())
    assert res.table["stone_received_t"].max() > 0, "a train came, so the silo's stone changed"
    assert "refused_t" in res.table.columns and np.isclose(res.table["refused_t"].sum(), refused)
    # the board plant's laboratory did refuse a day's loads: a plan made before a train's
    # stone was recorded, or on the record's estimate of the silo, met a poorer cake
    assert refused > 0


def _default_interrupt() -> None:
    """In the child before it runs: Ctrl-C at its default and not blocked, as a terminal
    starts a command, whatever the test process inherited (a disposition or mask left by
    a library earlier in the suite would otherwise make the child deaf to it)."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_DFL)
    signal.pthread_sigmask(signal.SIG_UNBLOCK, [signal.SIGINT])


def _signal_status(pid: int) -> str:
    try:
        return " ".join(line.strip() for line in open(f"/proc/{pid}/status") if line.startswith(("SigBlk", "SigIgn")))
    except OSError:
        return "gone"


def test_ctrl_c_stops_the_workers_at_once(tmp_path):
    """A real Ctrl-C (SIGINT to the process group, as a terminal sends it) to
    `reagentplan rehearse --workers 2` half-way: exit 130 within seconds, not after the
    futures already queued; no traceback from the workers; nothing written."""
    import os
    import signal
    import subprocess
    import sys
    import threading
    import time

    s = minimal_sheets(days=120)
    set_value(s, "storage", 0, "initial_t", 900)
    book = write_workbook(s, tmp_path / "tiny.xlsx")
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "reagentplan.cli", "rehearse", str(book), "--out", str(out),
                             "--weeks", "4", "--futures", "6", "--lookahead-days", "35", "--workers", "2"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True,
                            env={**os.environ, "PYTHONUNBUFFERED": "1"}, preexec_fn=_default_interrupt)
    seen: list[str] = []
    reader = threading.Thread(target=lambda: seen.extend(iter(lambda: proc.stderr.read(1), "")), daemon=True)
    reader.start()
    deadline = time.time() + 180
    sent = None
    while time.time() < deadline and proc.poll() is None:
        import re

        if re.search(r"\b([6-9]|[1-3][0-9])/48\b", "".join(seen[-2000:])):
            status = _signal_status(proc.pid)
            os.killpg(proc.pid, signal.SIGINT)
            sent = time.time()
            break
        time.sleep(0.05)
    proc.stdout.read()
    proc.wait(timeout=120)
    reader.join(timeout=10)
    err = "".join(seen)
    assert sent is not None, err[-500:]
    assert proc.returncode == 130, (status, err[-500:])
    assert time.time() - sent < 20, "the workers were stopped, not left to finish their queue"
    assert "Traceback" not in err and "KeyboardInterrupt" not in err
    assert not out.exists()
