"""The stages chained: scenario -> futures -> plan (and later risk and workbook).

The command line and the dashboard call these functions; they hold no computation of
their own.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field, replace
from pathlib import Path

import pandas as pd

from .balance import balance_frame
from .scenario import Scenario
from .schema import STORE_FLOW_COLUMN
from .risk import RiskResult, replay
from .schedule import PlanResult, make_plan
from .settings import PLAN, PlanSettings

#: Which sampled flow guards which store.
STORE_FLOWS = STORE_FLOW_COLUMN


#: Extra balance outputs kept per future for the permit consequence of a shortfall.
SO2_FLOWS = ("so2_emitted_t", "so2_removed_t", "heat_input_gj", "generation_mwh")


def _future_flows() -> tuple[str, ...]:
    from .forecast.futures import FLOWS

    return tuple(dict.fromkeys(FLOWS + SO2_FLOWS))


#: Quantities of the balance kept per future for a plan and its risk.
FUTURE_FLOWS = _future_flows()


@dataclass
class PlanRun:
    """A planned scenario: the plan, the futures it was guarded against, and its risk."""

    plan: PlanResult
    futures: object | None  # reagentplan.forecast.Futures, or None without futures
    risk: RiskResult | None = None
    #: Keys added to ``summary.json`` (contract months; from the record: as_of,
    #: opening_stock, plan_id, ...).
    summary_extra: dict = field(default_factory=dict)

    @property
    def warnings(self) -> list[str]:
        """Plain-words warnings of the run: inputs that look doubtful (a coal sheet value
        that disagrees with its lab results...)."""
        return list(self.futures.warnings) if self.futures is not None else []


def settings_of(settings: PlanSettings | None = None, **changes) -> PlanSettings:
    """``settings`` (default `reagentplan.settings.PLAN`) with ``changes`` to its fields
    (an unknown name raises ``TypeError``)."""
    return replace(settings or PLAN, **changes) if changes else (settings or PLAN)


def run_plan(scenario: Scenario, settings: PlanSettings | None = None, *, progress: bool = False,
             previous: pd.DataFrame | None = None, sampler=None, **changes) -> PlanRun:
    """Sample ``settings.futures`` futures (none when 0), plan against them, replay the
    plan against them (the risk).  ``settings`` defaults to `reagentplan.settings.PLAN`;
    ``changes`` (``futures=0, time_limit=20``...) replace its fields.  ``sampler(scenario)``,
    when given, returns the futures instead (futures sampled once and cut to the
    scenario's days, as a rehearsal's weekly plans take them; see
    `reagentplan.rehearse.guard`)."""
    settings = settings_of(settings, **changes)
    fut = None
    if sampler is not None:
        fut = sampler(scenario)
    elif settings.futures > 0:
        from .forecast import sample_futures

        fut = sample_futures(scenario, settings.futures, seed=settings.seed, progress=progress,
                             keep=FUTURE_FLOWS)
    return plan_with_futures(scenario, fut, settings, progress=progress, previous=previous)


def plan_with_futures(scenario: Scenario, fut, settings: PlanSettings | None = None, *,
                      progress: bool = False, previous: pd.DataFrame | None = None,
                      **changes) -> PlanRun:
    """Plan ``scenario`` against futures already sampled (`reagentplan.forecast.Futures`
    holding at least `FUTURE_FLOWS`, or ``None`` for none) and replay the plan against
    them; ``settings`` and ``changes`` as `run_plan` (its futures and seed unused).
    `run_plan` is this after sampling; a study calls it with futures shared between
    its cases."""
    settings = settings_of(settings, **changes)
    balance = balance_frame(scenario)
    flows = None
    if fut is not None:
        flows = {store: fut.flows[q] for store, q in STORE_FLOWS.items()
                 if store in scenario.storage and q in fut.flows}
    permit_flows = None if fut is None else fut.flows.get("so2_emitted_t")
    plan = make_plan(scenario, balance, flows=flows, permit_flows=permit_flows, progress=progress,
                     previous=previous, **settings.solve_options())
    risk = None
    if fut is not None:
        from .schedule.plan import flows_at_plan_stone

        so2 = {k: fut.flows[k] for k in SO2_FLOWS if k in fut.flows}
        risk = replay(plan, flows_at_plan_stone(plan, flows, balance),
                      so2=so2 if len(so2) == len(SO2_FLOWS) else None)
    from .schedule.lanes import contract_month_note

    return PlanRun(plan, fut, risk, {"contract_months": contract_month_note(scenario)})


def run_plan_from_record(workbook: str | Path, engine, as_of: dt.date | None = None,
                         settings: PlanSettings | None = None, *, scenario: Scenario | None = None,
                         horizon_days: int | None = None, store: bool = True,
                         progress: bool = False, previous: pd.DataFrame | None = None,
                         sampler=None, calibrated: bool = False, who: str | None = None,
                         **changes) -> PlanRun:
    """Plan a workbook from the operations record's state at the end of ``as_of``
    (default: the day before the workbook's start) and store the plan as a new version.

    ``calibrated``: first fit the balance's factors to the record's surveys up to
    ``as_of`` (`reagentplan.record.calibrate`) and plan (and roll the stores forward)
    with the fitted values; the calibration is stored with the plan version (the
    ``calibration`` key of its summary) and is part of its fingerprint.

    The workbook gives what does not change week to week; the record gives the opening
    stock, the month-to-date contract tonnes, the booked orders and the histories
    (`reagentplan.record.asof`).  ``scenario`` is the workbook already loaded (else it
    is read); ``horizon_days`` overrides the workbook's; ``store`` = False plans without
    storing a version (the dashboard's view).  ``settings``, ``changes``, ``progress``,
    ``previous`` and ``sampler`` are those of `run_plan`.  ``who`` is recorded as the
    version's maker (default: the operating-system user).
    """
    from .output import run_summary
    from .record.asof import apply_asof, asof_state, load_record
    from .record.versions import fingerprint, store_plan
    from .scenario import load_scenario

    if horizon_days is not None and not 1 <= horizon_days <= 1096:
        from .errors import Problem
        from .record.db import RecordError

        raise RecordError(Problem(None, None, "--horizon-days", f"found {horizon_days}",
                                  "a whole number of days from 1 to 1096"), "The command")
    data = Path(workbook).read_bytes()
    scenario = scenario or load_scenario(workbook)
    if as_of is None:
        as_of = scenario.plant.start_date - dt.timedelta(days=1)
    record = load_record(engine)
    calibration = None
    if calibrated:
        from .record.calibrate import apply_calibration, calibrate

        calibration = calibrate(scenario, record, last=as_of)
        scenario = apply_calibration(scenario, calibration)
    state = asof_state(scenario, record, as_of)
    planned = apply_asof(scenario, state, horizon_days)
    settings = settings_of(settings, **changes)
    if previous is None:
        # the plan in force holds its firm loads (the change cost) whether or not this plan
        # is stored: the dashboard's view of the record and `plan --db` then agree
        previous = plan_in_force(engine)
    run = run_plan(planned, settings, progress=progress, previous=previous, sampler=sampler)
    run.summary_extra.update(state.summary())
    if calibration is not None:
        run.summary_extra["calibration"] = calibration.summary()
    if not store:
        run.summary_extra["plan_id"] = None
        return run
    opts = settings.as_dict() | {"horizon_days": horizon_days}
    if calibration is not None:
        opts["calibration"] = calibration.summary()["applied"]
    plan_id = store_plan(engine, summary=run_summary(run), movements=run.plan.movements,
                         inventory=run.plan.inventory, workbook_bytes=data,
                         workbook_name=Path(workbook).name, as_of=as_of,
                         start_date=planned.plant.start_date, horizon_days=planned.plant.horizon_days,
                         finger=fingerprint(data, as_of, state.last_import_id, opts),
                         last_import_id=state.last_import_id, who=who)
    run.summary_extra["plan_id"] = plan_id
    return run


def plan_in_force(engine) -> pd.DataFrame | None:
    """The movements of the newest stored plan version (the plan the coordinator is
    following), or None when the record holds none."""
    from .record.versions import load_plan, plan_ids

    ids = plan_ids(engine)
    return load_plan(engine, ids[-1]).movements if ids else None


def baseline_from_record(workbook: str | Path, engine, as_of: dt.date, *, scenario: Scenario,
                         horizon_days: int | None = None, firm_days: int = PLAN.firm_days):
    """The reorder-point policy planned from the record's state at the end of ``as_of``,
    without the optimiser (a rehearsal of the baseline needs no solve): the planned
    scenario, its lanes, the policy's `DailyPlan` and its ``movements`` frame."""
    from .record.asof import apply_asof, asof_state, load_record
    from .schedule.baseline import baseline_plan
    from .schedule.lanes import build_lanes, firm_loads
    from .schedule.plan import movements_frame

    state = asof_state(scenario, load_record(engine), as_of)
    planned = apply_asof(scenario, state, horizon_days)
    balance = balance_frame(planned)
    lanes = build_lanes(planned, balance)
    base = baseline_plan(planned, balance, lanes, firm_loads(planned, lanes))
    return planned, lanes, base, movements_frame(planned, lanes, base, firm_days)
