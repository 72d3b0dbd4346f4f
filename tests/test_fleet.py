"""A fleet of stations planned together (../shared/FLEET.md), on the small invented fleet
of `fleet_helpers` (three stations from `helpers.minimal_sheets`)."""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest

from fleet_helpers import STATIONS, fleet_rows, station_sheets, two_stones, write_fleet
from helpers import START, set_value, write_workbook
from reagentplan.cli import main
from reagentplan.fleet import fleet_summary, load_fleet, plan_fleet
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario

DAYS, FIRM = 42, 14  # six weeks over two calendar months; the last four weeks in weekly buckets


def _plan_cli(fleet_path, out, *extra) -> int:
    return main(["plan", str(fleet_path), "--out", str(out), "--futures", "0", "--firm-days", str(FIRM), *extra])


# --------------------------------------------------------------------------- bad input


def _run_bad(path, tmp_path, capsys, *extra) -> str:
    out = tmp_path / "out"
    code = _plan_cli(path, out, *extra)
    err = capsys.readouterr().err
    assert code == 2, err
    assert not out.exists(), "nothing may be written for bad input"
    return err


def test_stations_disagreeing_on_currency_or_horizon_name_both(tmp_path, capsys):
    def eur(s):
        set_value(s, "plant", "currency", None, "EUR")

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"south": eur})
    err = _run_bad(path, tmp_path, capsys)
    assert "sheet 'stations', row 3, column 'workbook'" in err
    assert "station 'south' has currency EUR but station 'north' has currency USD" in err

    def shorter(s):
        set_value(s, "plant", "horizon_days", None, DAYS - 7)
        s["generation"] = s["generation"][:1 + DAYS - 7]

    path = write_fleet(tmp_path / "g", days=DAYS, per_station={"east": shorter})
    err = _run_bad(path, tmp_path, capsys)
    assert f"station 'east' has horizon_days {DAYS - 7} but station 'north' has horizon_days {DAYS}" in err


def test_start_date_mismatch_is_an_input_error(tmp_path, capsys):
    def later(s):
        week = dt.timedelta(days=7)
        set_value(s, "plant", "start_date", None, START + week)
        for r in s["generation"][1:] + s["coal_blend"][1:]:
            r[0] = r[0] + week

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"east": later})
    err = _run_bad(path, tmp_path, capsys)
    assert "station 'east' has start_date 2030-03-11 but station 'north' has start_date 2030-03-04" in err


def test_shared_contract_whose_party_no_station_has(tmp_path, capsys):
    path = write_fleet(tmp_path / "f", days=DAYS,
                       contracts=[["Quarry pool", "Quarry R", "limestone", None, 12000, None],
                                  ["Board pool", "Board Co", "fly_ash", None, 4000, None]])
    err = _run_bad(path, tmp_path, capsys)
    assert "sheet 'shared_contracts', row 2, column 'party': 'Quarry R' is no supplier of any station " \
           "(did you mean 'Quarry Q'?)" in err
    # Board Co buys gypsum, not fly ash
    assert "row 3, column 'party': 'Board Co' is no buyer of fly_ash of any station" in err


def test_missing_station_file_and_station_listed_twice(tmp_path, capsys):
    folder = tmp_path / "f"
    write_fleet(folder, days=DAYS)
    rows = fleet_rows({"north": "north.xlsx", "south": "south.xlsx"})
    rows["stations"] += [["east", "nowhere/east.xlsx"], ["north", "north.xlsx"]]
    path = write_workbook(rows, folder / "bad.xlsx")
    err = _run_bad(path, tmp_path, capsys)
    assert "sheet 'stations', row 4, column 'workbook': station 'east': 'nowhere/east.xlsx' does not exist" in err
    assert "sheet 'stations', row 5, column 'station': a duplicate of row 2 (north)" in err


def test_station_workbook_problem_is_named_by_station_sheet_row_column(tmp_path, capsys):
    def bad_load(s):
        s["suppliers"][1][2] = "lots"  # load_t

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"south": bad_load})
    err = _run_bad(path, tmp_path, capsys)
    assert "sheet 'south:suppliers', row 2, column 'load_t'" in err
    assert main(["check", str(path)]) == 2


def test_check_accepts_a_fleet_workbook(tmp_path, capsys):
    path = write_fleet(tmp_path / "f", days=DAYS)
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "the fleet workbook is sound" in out and "[east] east.xlsx" in out


# --------------------------------------------------------------------------- planning


def test_nothing_shared_equals_the_stations_planned_alone(tmp_path):
    """With nothing shared, the fleet plan is the stations' own plans: planned apart (each
    as `plan` plans it) exactly, and as one joint model within 0.1 % of their cost."""
    path = write_fleet(tmp_path / "f", days=DAYS, shared=False)
    fleet = load_fleet(path)
    alone = {s.station: run_plan(load_scenario(s.workbook), futures=0, firm_days=FIRM).plan.evaluation.total_cost
             for s in fleet.stations}
    apart = plan_fleet(fleet, futures=0, firm_days=FIRM)
    assert apart.groups == [["north"], ["south"], ["east"]]
    for name, cost in alone.items():
        assert apart.runs[name].plan.evaluation.total_cost == pytest.approx(cost, rel=1e-9)
    joint = plan_fleet(fleet, futures=0, firm_days=FIRM, decompose=False)
    assert joint.groups == [["north", "south", "east"]]
    total_alone = sum(alone.values())
    gross = sum(abs(v) for r in apart.runs.values() for v in r.plan.evaluation.costs.values())
    assert abs(joint.total_cost - total_alone) <= 1e-3 * max(abs(total_alone), gross)


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    """The test fleet planned by the command line: a quarry contract and a board plant's
    room pooled, tight, and one car set for the three stations."""
    folder = tmp_path_factory.mktemp("fleet")
    path = write_fleet(folder / "in", days=DAYS,
                       contracts=[["Quarry pool", "Quarry Q", "limestone", 2000, 5000, 6],
                                  ["Board pool", "Board Co", "gypsum", None, 2500, None]],
                       sets=[["Q set", 1, 6]])
    out = folder / "out"
    code = _plan_cli(path, out)
    return path, out, code


def test_outputs_are_those_fleet_md_names(planned):
    path, out, code = planned
    assert code in (0, 1)
    for name in STATIONS:
        for f in ("balance.csv", "movements.csv", "inventory.csv", "summary.json", "plan.xlsx"):
            assert (out / name / f).is_file(), f"{name}/{f}"
    summary = json.loads((out / "fleet_summary.json").read_text())
    for key in ("total_cost", "baseline_total_cost", "stations", "shared_contracts", "shared_train_sets",
                "breaches", "solver", "gap", "solve_seconds"):
        assert key in summary
    for name in STATIONS:
        assert set(summary["stations"][name]) >= {"total_cost", "baseline_total_cost", "breaches"}
    for month in summary["shared_contracts"]["Quarry pool"].values():
        assert set(month) >= {"tonnes", "min_t", "max_t"}
    assert "most_in_window" in summary["shared_train_sets"]["Q set"]
    from openpyxl import load_workbook

    wb = load_workbook(out / "fleet.xlsx", read_only=True)
    assert {"Fleet", "Pooled contracts", "Car sets", "Stores"} <= set(wb.sheetnames)


def _movements(out) -> pd.DataFrame:
    return _movements_of(out, STATIONS)


def test_every_pooled_limit_and_the_car_set_replayed_from_movements(planned):
    """Independent check: read back every station's movements.csv and hold the pooled
    monthly maxima and the car set's window.  A contract month that started before the
    plan has its maximum reduced by the even pace of the days before (DEVELOPERS.md,
    contract months): March here starts on the 4th, so 3 of 31 days are gone."""
    _, out, _ = planned
    mv = _movements(out)
    mv["month"] = mv["date"].dt.to_period("M")
    limits = {("Quarry Q", "limestone"): 5000.0, ("Board Co", "gypsum"): 2500.0}
    for (party, material), limit in limits.items():
        rows = mv[(mv["party"] == party) & (mv["material"] == material)]
        assert len(rows), party
        for month, t in rows.groupby("month")["tonnes"].sum().items():
            cap = limit * (1 - 3 / 31) if month == pd.Period("2030-03") else limit
            assert t <= cap + 1e-6, (party, str(month), t, cap)
    trains = mv[(mv["party"] == "Quarry Q") & (mv["direction"] == "in")].groupby("date")["loads"].sum()
    days = pd.date_range(START, periods=DAYS, freq="D")
    daily = trains.reindex(days, fill_value=0).to_numpy(float)
    windows = np.convolve(daily, np.ones(6), mode="valid")
    assert windows.max() <= 1 + 1e-9
    assert daily.sum() >= 3  # the set is used, not trivially empty


def test_fleet_plan_never_dearer_than_the_hand_split_and_room_goes_where_it_pays(planned):
    _, out, _ = planned
    summary = json.loads((out / "fleet_summary.json").read_text())
    assert summary["total_cost"] <= summary["baseline_total_cost"] + 1e-6
    assert summary["total_cost"] < summary["baseline_total_cost"]  # on this fleet it saves
    # the board plant's pooled room goes first to the station whose landfill is dearest
    north = sum(m["stations"]["north"] for m in summary["shared_contracts"]["Board pool"].values())
    base_north = sum(m["stations"]["north"] for m in summary["baseline_shared_contracts"]["Board pool"].values())
    south = sum(m["stations"]["south"] for m in summary["shared_contracts"]["Board pool"].values())
    assert north >= base_north and north > south
    # each station's cost in its own summary.json is the one fleet_summary.json reports
    for name in STATIONS:
        own = json.loads((out / name / "summary.json").read_text())
        assert own["total_cost"] == pytest.approx(summary["stations"][name]["total_cost"], abs=0.01)


def test_a_station_of_two_stones_in_the_fleet_replays_independently(tmp_path):
    """A station whose quarries give their own CaCO3 (its silo linearised where the joint
    linear programme's recursion settles, its byproducts planned again at the stone
    chosen, every plan replayed exactly) shares the board plant's room with two
    plain stations: the independent replay of its silo, purity on every shipping day and
    train windows (`plancheck.check_plan`) finds nothing its plan does not list."""
    from plancheck import check_plan

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"east": two_stones(DAYS)},
                       contracts=[["Board pool", "Board Co", "gypsum", None, 5000, None]], sets=[])
    fleet = load_fleet(path)
    assert fleet.station("east").scenario.quality_coupled
    result = plan_fleet(fleet, futures=0, firm_days=FIRM)
    assert result.groups == [["north", "south", "east"]]
    r = result.runs["east"].plan
    assert check_plan(r.scenario, r.movements.astype({"date": str}), r.balance, r.inventory, r.breaches) == []
    # its byproducts were planned again at the stone it chose (exact purity): no shipment
    # outside a buyer's limits is left to be listed
    assert "byproducts planned again at the chosen stone" in result.status
    assert not [b for b in r.breaches if b["kind"] == "shipped outside the buyer's limits"]
    s = fleet_summary(result)
    assert s["total_cost"] <= s["baseline_total_cost"] + 1e-6
    for month in s["shared_contracts"]["Board pool"].values():
        assert month["tonnes"] <= month["max_t"] + 1e-6


def test_trains_go_to_the_stations_that_burn_while_one_unit_is_out(tmp_path):
    """North's unit is out for two weeks and the car set brings one train in six days to
    the three stations: in the fleet plan the set's trains of those weeks go to the other
    two stations, and the fleet costs no more than the hand split."""
    out_days = range(14, 28)

    def outage(s):
        for i in out_days:
            s["generation"][1 + i][2] = 0.0

    path = write_fleet(tmp_path / "f", days=DAYS, per_station={"north": outage},
                       contracts=[["Quarry pool", "Quarry Q", "limestone", None, 6000, None]], sets=[["Q set", 1, 6]])
    result = plan_fleet(load_fleet(path), futures=0, firm_days=DAYS)
    trains = {n: r.plan.movements.query("party == 'Quarry Q'").set_index("date")["loads"]
              for n, r in result.runs.items()}
    days = pd.date_range(START, periods=DAYS, freq="D")[list(out_days)]
    during = {n: int(t[t.index.isin(days)].sum()) for n, t in trains.items()}
    assert during["north"] == 0
    assert during["south"] + during["east"] >= 2
    assert result.total_cost <= result.baseline_total_cost + 1e-6
    assert fleet_summary(result)["shared_train_sets"]["Q set"]["most_in_window"] <= 1


def test_a_fleet_planned_from_its_stations_records(tmp_path, capsys):
    """`plan FLEET.xlsx --as-of DATE`: each station from its own record (opening stock,
    month-to-date), the pooled maximum's first month less the tonnes the records say all
    the stations took already (1,010 t each on 2 March in `record_data`), each plan
    stored as a version in its station's record; a station without a record is an input
    error naming its row."""
    from record_data import record_sheets, write_record

    from reagentplan.record.db import connect
    from reagentplan.record.versions import plan_ids

    folder = tmp_path / "f"
    write_fleet(folder, days=DAYS)
    as_of = START - dt.timedelta(days=1)
    rows = fleet_rows({}, [["Quarry pool", "Quarry Q", "limestone", None, 5000, None]], [["Q set", 2, 7]])
    rows["stations"] = [["station", "workbook", "db"]]
    for name in ("north", "south"):
        url = f"sqlite:///{tmp_path / (name + '.db')}"
        assert main(["db", "upgrade", "--db", url]) == 0
        week = write_record(record_sheets(), tmp_path / f"{name}-week.xlsx")
        assert main(["record", str(week), "--db", url, "--scenario", str(folder / f"{name}.xlsx"),
                     "--as-of", f"{as_of}"]) == 0
        rows["stations"].append([name, f"{name}.xlsx", url])
    path = write_workbook(rows, folder / "recorded.xlsx")
    capsys.readouterr()
    out = tmp_path / "out"
    code = _plan_cli(path, out, "--as-of", f"{as_of}")
    assert code in (0, 1), capsys.readouterr().err
    summary = json.loads((out / "fleet_summary.json").read_text())
    march = summary["shared_contracts"]["Quarry pool"]["2030-03"]
    assert march["max_t"] == pytest.approx(5000 - 2 * 1010.0)
    mv = _movements_of(out, ("north", "south"))
    in_march = mv[(mv["party"] == "Quarry Q") & (mv["date"] < "2030-04-01")]["tonnes"].sum()
    assert in_march <= 5000 - 2020 + 1e-6
    for name in ("north", "south"):
        own = json.loads((out / name / "summary.json").read_text())
        assert own["as_of"] == f"{as_of}" and own["plan_id"] is not None
        engine = connect(rows["stations"][1 + ("north", "south").index(name)][2])
        assert plan_ids(engine) == [own["plan_id"]]
        engine.dispose()
    # a station without a record
    rows["stations"].append(["east", "east.xlsx", None])
    path = write_workbook(rows, folder / "recorded2.xlsx")
    err = _run_bad(path, tmp_path / "again", capsys, "--as-of", f"{as_of}")
    assert "sheet 'stations', row 4, column 'db': station 'east' has no record" in err


def _movements_of(out, names) -> pd.DataFrame:
    frames = []
    for name in names:
        m = pd.read_csv(out / name / "movements.csv", parse_dates=["date"])
        m["station"] = name
        frames.append(m)
    return pd.concat(frames, ignore_index=True)


def test_study_of_a_fleet_on_dask(tmp_path, capsys):
    """`study FLEET.xlsx` with a station's spec and a fleet sheet's: the full grid, each
    case the fleet planned together, run on a local Dask cluster; a spec naming no
    station of the fleet is bad input."""
    path = write_fleet(tmp_path / "f", days=DAYS)
    out = tmp_path / "study"
    args = ["study", str(path), "--out", str(out), "--futures", "5", "--firm-days", str(FIRM),
            "--cluster", "local", "--workers", "1",
            "--vary", "north:storage[gypsum].capacity_t=3000,6000",
            "--vary", "shared_contracts[Board pool].max_t_per_month=2500,4000"]
    assert main(args) == 0, capsys.readouterr().err
    frame = pd.read_csv(out / "study.csv")
    assert list(frame["case"]) == [1, 2, 3, 4]
    assert {"north:storage[gypsum].capacity_t", "shared_contracts[Board pool].max_t_per_month", "total_cost",
            "cost_p50", "north_total_cost", "breaches"} <= set(frame.columns)
    # more pooled room for the board plant never costs the fleet more (same futures)
    by = frame.set_index(["north:storage[gypsum].capacity_t", "shared_contracts[Board pool].max_t_per_month"])
    for cap in (3000, 6000):
        assert by.loc[(cap, 4000), "total_cost"] <= by.loc[(cap, 2500), "total_cost"] + 1e-6
    assert (out / "study.xlsx").is_file()
    capsys.readouterr()
    bad = ["study", str(path), "--out", str(tmp_path / "bad"), "--cluster", "serial",
           "--vary", "nort:storage[gypsum].capacity_t=3000,6000"]
    assert main(bad) == 2
    err = capsys.readouterr().err
    assert "names the station 'nort', which the fleet has not (did you mean 'north'?)" in err
    assert not (tmp_path / "bad").exists()


def test_station_sweeps_lower_the_joint_objective_and_keep_the_shared_limits(planned):
    """Block coordinate descent (`fleet.solve.station_sweeps`), started from the hand
    split (its car-set collisions repaired) pinned in the joint model day by day: each station re-planned with the others
    held never raises the joint objective, here lowers it, and the plans it returns still
    keep every pooled monthly maximum and the car set's window (the joint rows hold: the
    held stations' movements are part of each solve)."""
    from reagentplan.fleet.plan import _prepare, pool_accounts
    from reagentplan.fleet.solve import _as_days, _one_pass, repair_car_sets, station_sweeps
    from reagentplan.schedule.model import WorkLimits
    from reagentplan.settings import PLAN

    path, _, _ = planned
    fleet = load_fleet(path)
    names = [s.station for s in fleet.stations]
    stations = _prepare(fleet, names, {}, PLAN, None)
    daily = [(d, d) for d in range(DAYS)]
    args = dict(solver="highs", gap=1e-4, time_limit=120, node_limit=WorkLimits().nodes, scale=None,
                late_days=0, firm_days=DAYS, used=None, change_cost=None)
    # the hand split, its trains that meet in one window of the car set moved apart
    hand = repair_car_sets(stations, {s.name: s.base for s in stations}, fleet.shared_train_sets)
    pinned = {s.name: {l.name: np.asarray(hand[s.name].quantity[l.name], float) for l in s.lanes}
              for s in stations}
    start, _ = _one_pass(stations, fleet.shared_contracts, fleet.shared_train_sets, daily, lins={}, hints={},
                         totals=None, fixed=pinned, **args)
    before = next(iter(start.values())).objective
    plans = dict(hand)
    sols, plans = station_sweeps(stations, fleet.shared_contracts, fleet.shared_train_sets, daily, start, plans,
                                 lins={}, **args)
    after = next(iter(sols.values())).objective
    assert after < before - 1.0, (before, after)
    # the pinned start was that plan exactly: its days read back unchanged
    for s in stations:
        back = _as_days(s, daily, start[s.name])
        for lane in s.lanes:
            assert np.allclose(back[lane.name], hand[s.name].quantity[lane.name]), (s.name, lane.name)
    pools = pool_accounts(fleet, {s.name: (s.lanes, plans[s.name]) for s in stations})
    assert not [b for b in pools["breaches"] if "maximum" in b["cause"]], pools["breaches"]
    trains = np.zeros(DAYS)
    for s in stations:
        for lane in s.lanes:
            if getattr(lane.source, "train_set", None) == "Q set":
                trains += np.asarray(plans[s.name].quantity[lane.name], float)
    assert np.convolve(trains, np.ones(6), mode="valid").max() <= 1 + 1e-9
