"""A study of a fleet (``reagentplan study FLEET.xlsx --vary ...``, FLEET.md
"Elsewhere"): the grid of ``--vary`` values, each case the whole fleet planned together.

A spec names a station's value as ``STATION:sheet...`` (the station study's own syntax
after the station's name, `reagentplan.study.grid`: ``north:storage[gypsum].capacity_t=
18000,24000``) or a fleet sheet's (``shared_contracts[Board pool].max_t_per_month=
2500,4000``, ``shared_train_sets[Q set].max_trains=1,2``).  Every variant is made by
writing the values into the cells as read and loading the fleet again through
`workbook.load_fleet`, so a bad value gets the loader's own message, with its case.

Each case samples every station's futures with the study's seed: cases that vary no
driver (generation, coal) share the same futures (common random numbers).  The cases run
on the station study's runner (`reagentplan.study.cluster.run_on_cluster`): on Dask
distributed (``--cluster local|ADDRESS``) or one after the other (``serial``); a case that
raises or passes ``--case-timeout`` is a row with its message, and Ctrl-C keeps the
finished cases.
"""

from __future__ import annotations

import functools
import itertools
import math
import re
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import Problem, ScenarioError
from ..settings import MAX_CASES, PlanSettings
from ..study.cluster import NOT_RUN, StudyRun, run_on_cluster
from ..study.grid import (OPTION, VarySpec, apply_variant, case_label, cell_value, locate, parse_vary, set_cell,
                          with_case)
from ..study.results import case_table
from ..workbook import RawSheet, read_raw
from .workbook import SHARED_CONTRACTS, SHARED_TRAIN_SETS, Fleet, load_fleet

#: The fleet's own sheets a spec may vary, and the column that names their rows.
FLEET_TABLES = {"shared_contracts": SHARED_CONTRACTS, "shared_train_sets": SHARED_TRAIN_SETS}
FLEET_RE = re.compile(r"^\s*(?P<sheet>shared_contracts|shared_train_sets)\s*\[(?P<row>[^\]]+)\]\s*\.\s*"
                      r"(?P<column>[A-Za-z_][A-Za-z0-9_]*)\s*=(?P<values>.*)$", re.S | re.I)
STATION_RE = re.compile(r"^\s*(?P<station>[^:\[\]=.]+?)\s*:(?P<rest>.*)$", re.S)


@dataclass(frozen=True)
class FleetSpec:
    """One ``--vary`` of a fleet: a station's value (``station`` and its `VarySpec`) or a
    fleet sheet's (``sheet``, ``row``, ``column``), and the values to try (text)."""

    text: str
    values: tuple[str | None, ...]
    station: str | None = None
    spec: VarySpec | None = None
    sheet: str | None = None
    row: str | None = None
    column: str | None = None

    @property
    def target(self) -> str:
        if self.station is not None:
            return f"{self.station}:{self.spec.target}"
        return f"{self.sheet}[{self.row}].{self.column}"


@dataclass(frozen=True)
class FleetCase:
    case: int
    values: tuple[str | None, ...]
    fleet: Fleet

    def label(self, specs) -> str:
        return case_label(specs, self.values)


@dataclass(frozen=True)
class FleetGrid:
    specs: tuple[FleetSpec, ...]
    base: Fleet
    cases: tuple[FleetCase, ...]


def _problem(found: str, expected: str) -> Problem:
    return Problem(None, None, OPTION, found, expected)


def parse_fleet_vary(text: str, stations: list[str]) -> FleetSpec:
    """Parse one fleet ``--vary`` (``STATION:sheet...`` or a fleet sheet's row)."""
    m = FLEET_RE.match(text or "")
    if m:
        values = tuple(None if v.strip().lower() == "none" else v.strip() for v in m["values"].split(","))
        if any(v == "" for v in values):
            raise ScenarioError(_problem(f"'{text}' has an empty value", "values separated by commas"))
        sheet = m["sheet"].lower()
        column = m["column"].strip().lower()
        known = [f.name for f in FLEET_TABLES[sheet].fields[1:]]
        if column not in known:
            raise ScenarioError(_problem(f"'{text}' names the column '{column}', which {sheet} has not",
                                         "one of " + ", ".join(known)))
        return FleetSpec(text.strip(), values, sheet=sheet, row=m["row"].strip(), column=column)
    s = STATION_RE.match(text or "")
    if not s:
        raise ScenarioError(_problem(f"'{text}' is not a fleet {OPTION} spec",
                                     "STATION:sheet[row].column=V1,V2 (north:storage[gypsum].capacity_t=18000,24000) "
                                     "or shared_contracts[CONTRACT].max_t_per_month=V1,V2"))
    station = s["station"].strip()
    if station not in stations:
        from ..scenario.tables import did_you_mean

        raise ScenarioError(_problem(f"'{text}' names the station '{station}', which the fleet has not"
                                     f"{did_you_mean(station, stations)}", "one of " + ", ".join(stations)))
    spec = parse_vary(s["rest"])
    return FleetSpec(text.strip(), spec.values, station=station, spec=spec)


def _fleet_target(raw: dict[str, RawSheet], spec: FleetSpec) -> tuple[int, int | None]:
    """(row index, column index or None to add) of a fleet sheet's cell."""
    sheet = raw.get(spec.sheet)
    key = FLEET_TABLES[spec.sheet].fields[0].name
    if sheet is None or key not in sheet.header:
        raise ScenarioError(_problem(f"'{spec.text}': the fleet workbook has no sheet '{spec.sheet}'",
                                     f"a sheet '{spec.sheet}' with a '{key}' column"))
    jk = sheet.header.index(key)
    names = [str(r[1][jk]).strip() if jk < len(r[1]) else "" for r in sheet.rows]
    if spec.row not in names:
        from ..scenario.tables import did_you_mean

        raise ScenarioError(_problem(f"'{spec.text}': no row '{spec.row}' in {spec.sheet}"
                                     f"{did_you_mean(spec.row, names)}", "one of " + ", ".join(names)))
    column = spec.column if spec.column in sheet.header else None
    return names.index(spec.row), None if column is None else sheet.header.index(column)


def _apply_fleet(raw: dict[str, RawSheet], spec: FleetSpec, target, value) -> dict[str, RawSheet]:
    out = dict(raw)
    sheet = out[spec.sheet]
    sheet = RawSheet(sheet.name, list(sheet.header), list(sheet.header_as_written), list(sheet.rows))
    out[spec.sheet] = sheet
    i, j = target
    if j is None:
        j = len(sheet.header)
        sheet.header.append(spec.column)
        sheet.header_as_written.append(spec.column)
    sheet.rows[i] = (sheet.rows[i][0], set_cell(sheet.rows[i][1], j, cell_value(value)))
    return out


def build_fleet_grid(path: str | Path, texts: list[str], *, max_cases: int = MAX_CASES) -> FleetGrid:
    """Every case of the grid, each a loaded and checked `Fleet` (`ScenarioError` for a
    spec or value the workbooks refuse, named with its case)."""
    path = Path(path)
    base = load_fleet(path)
    fleet_raw = read_raw(path)
    names = [s.station for s in base.stations]
    if not texts:
        raise ScenarioError(_problem("no --vary given", "at least one spec"))
    specs = tuple(parse_fleet_vary(t, names) for t in texts)
    n = math.prod(len(s.values) for s in specs)
    if n > max_cases:
        raise ScenarioError(_problem(f"the grid has {n:,} cases", f"at most {max_cases:,} cases"))
    station_raw = {s.station: read_raw(s.workbook) for s in base.stations
                   if any(sp.station == s.station for sp in specs)}
    targets = []
    for sp in specs:
        targets.append(locate(station_raw[sp.station], sp.spec) if sp.station else _fleet_target(fleet_raw, sp))
    cases, problems = [], []
    for i, values in enumerate(itertools.product(*(s.values for s in specs)), start=1):
        raws = dict(station_raw)
        fraw = fleet_raw
        for sp, tg, v in zip(specs, targets, values):
            if sp.station:
                raws[sp.station] = apply_variant(raws[sp.station], (sp.spec,), (tg,), (v,))
            else:
                fraw = _apply_fleet(fraw, sp, tg, v)
        try:
            cases.append(FleetCase(i, tuple(values), load_fleet(path, raw=fraw, station_raws=raws)))
        except ScenarioError as exc:
            problems += with_case(exc, f"case {i}: {case_label(specs, values)}")
    if problems:
        raise ScenarioError(problems)
    return FleetGrid(specs, base, tuple(cases))


def plan_case(case: FleetCase, settings: PlanSettings) -> dict:
    """Plan one case's fleet and summarise it as a row of ``study.csv`` (fleet-wide
    figures, and each station's cost).  Costs over the futures: per future, the sum of
    the stations' plans replayed against their futures as the station study replays a
    case (`study.run.replay_run`) plus the pooled shortfalls of the plan; loads and
    tonnes as `study.run.movement_totals` counts them."""
    from ..study.run import movement_totals, replay_run
    from .plan import plan_fleet

    t0 = time.perf_counter()
    result = plan_fleet(case.fleet, settings)
    row = {"case": case.case, "status": result.status.split(" ")[0], "total_cost": round(result.total_cost, 2),
           "baseline_total_cost": round(result.baseline_total_cost, 2)}
    per_future = None
    p_below = p_over = 0.0
    for name, run in result.runs.items():
        if run.futures is not None:
            fig = replay_run(run)
            per_future = fig.costs if per_future is None else per_future + fig.costs
            p_below, p_over = max(p_below, fig.p_limestone_below_safety), max(p_over, fig.p_any_over_capacity)
        row[f"{name}_total_cost"] = round(run.plan.evaluation.total_cost, 2)
    moved = movement_totals(run.plan for run in result.runs.values())
    if per_future is not None:
        per_future = per_future + result.pools["cost"]
        q10, q50, q90 = np.quantile(per_future, [0.1, 0.5, 0.9])
        row.update(cost_p10=round(float(q10), 2), cost_p50=round(float(q50), 2), cost_p90=round(float(q90), 2),
                   p_limestone_below_safety=round(p_below, 6), p_any_over_capacity=round(p_over, 6))
    row.update(trains=moved.trains, trucks=moved.trucks, sold_t=round(moved.sold_t, 1),
               landfilled_t=round(moved.landfilled_t, 1),
               breaches=len(result.all_breaches), gap=None if result.gap is None else round(result.gap, 6),
               solve_seconds=round(result.solve_seconds, 3), case_seconds=round(time.perf_counter() - t0, 3))
    return row


#: Statuses of a case that has no plan (its row's ``message`` says why).
NO_PLAN = ("failed", "timeout", NOT_RUN)
#: The fields of a fleet case's row that every case has (a row with no plan has them
#: empty, and its ``message``); a planned case adds each station's cost and, with
#: futures, the costs and chances over them.
FLEET_ROW_COLUMNS = ("status", "total_cost", "baseline_total_cost", "trains", "trucks", "sold_t", "landfilled_t",
                     "breaches", "gap", "solve_seconds", "case_seconds")


def failed_fleet_row(case: FleetCase, status: str, message: str, seconds: float | None = None) -> dict:
    """The row of a fleet case with no plan: ``failed``, ``timeout`` or ``not run``, and
    why (``message``)."""
    row = {"case": case.case, **{k: None for k in FLEET_ROW_COLUMNS}}
    row.update(status=status, case_seconds=None if seconds is None else round(seconds, 3), message=message)
    return row


def run_fleet_case(case: FleetCase, shared: None, settings: PlanSettings,
                   case_timeout: float | None = None) -> dict:
    """`plan_case` as the station study runs its cases (`study.run.run_guarded`): a case
    that raises gives a ``failed`` row, one not done after ``case_timeout`` [s] a
    ``timeout`` row (`failed_fleet_row`).  ``shared`` is ``None``: a fleet's cases share
    no futures in memory (each samples its stations' with the study's seed)."""
    from ..study.run import run_guarded

    return run_guarded(case, functools.partial(plan_case, case, settings), failed_fleet_row,
                       case_timeout=case_timeout, time_limit=settings.time_limit)


@dataclass
class FleetStudyResult:
    """A fleet study run: the table (``study.csv``) and how the cases ran
    (`study.cluster.StudyRun`: interrupted, where, workers, seconds)."""

    frame: pd.DataFrame
    run: StudyRun


def run_fleet_study(grid: FleetGrid, settings: PlanSettings, *, cluster: str = "local",
                    workers: int | None = None, case_timeout: float | None = None,
                    progress: bool = False) -> FleetStudyResult:
    """Run every case (on Dask, or ``serial``) with the station study's runner
    (`study.cluster.run_on_cluster`, no Dask dashboard) and tabulate them
    (``study.csv``, `study.results.case_table`): case, the varied values, each case's
    row (`plan_case`)."""
    run = run_on_cluster(grid.cases, None, settings, cluster=cluster, workers=workers, dashboard=False,
                         case_timeout=case_timeout, progress=progress, case_fn=run_fleet_case,
                         failed_fn=failed_fleet_row)
    # the varied values as given (text), as the fleet study has always written them
    return FleetStudyResult(case_table(grid.specs, grid.cases, run.rows, cells=False), run)


def pick_fleet_winner(frame: pd.DataFrame, risk_level: float) -> int | None:
    """The case of least expected cost (the median over the futures where sampled, else
    the plan's cost) among those that break no limit and keep each station's daily
    chance of a store out of its limits within ``risk_level``."""
    ok = frame["breaches"] == 0
    for col in ("p_limestone_below_safety", "p_any_over_capacity"):
        if col in frame:
            ok &= frame[col] <= risk_level + 1e-12
    if not ok.any():
        return None
    cost = frame["cost_p50"] if "cost_p50" in frame else frame["total_cost"]
    return int(frame.loc[cost[ok].idxmin(), "case"])
