"""A fleet planned from its stations' operations records (`reagentplan plan FLEET.xlsx
--as-of DATE`): each station as `plan --db --as-of` plans it (opening stock, month-to-date
contract tonnes, booked orders, histories from its own record; the plan in force's loads
priced to move), the pooled contracts' month-to-date the sum over the stations' records,
and each station's plan stored as a new version in its own record."""

from __future__ import annotations

import datetime as dt
from dataclasses import replace
from pathlib import Path

from ..scenario.tables import Collector
from ..settings import PlanSettings
from .plan import FleetResult, plan_fleet
from .workbook import Fleet


def plan_fleet_from_records(fleet: Fleet, as_of: dt.date, settings: PlanSettings | None = None, *,
                            horizon_days: int | None = None, user: str | None = None,
                            progress: bool = False) -> FleetResult:
    """Plan ``fleet`` from the end of ``as_of`` (every station needs a ``db``; a station
    without one is an input error naming its row) and store each station's plan."""
    from ..output import run_summary
    from ..pipeline import plan_in_force, settings_of
    from ..record.asof import apply_asof, asof_state, load_record
    from ..record.db import connect
    from ..record.users import writer
    from ..record.versions import fingerprint, store_plan

    settings = settings_of(settings)
    out = Collector()
    for s in fleet.stations:
        if not s.db:
            out.add("stations", s.row, "db", f"station '{s.station}' has no record",
                    "a db (sqlite:///... or postgresql+psycopg://...) for every station when the fleet is "
                    "planned from its records (--as-of)")
    out.fail()
    engines, states, previous, who, stations = {}, {}, {}, {}, []
    try:
        for s in fleet.stations:
            engine = connect(s.db)
            engines[s.station] = engine
            who[s.station] = writer(engine, user)
            state = asof_state(s.scenario, load_record(engine), as_of)
            states[s.station] = state
            previous[s.station] = plan_in_force(engine)
            stations.append(replace(s, scenario=apply_asof(s.scenario, state, horizon_days)))
        planned = replace(fleet, stations=tuple(stations))
        result = plan_fleet(planned, settings, progress=progress, previous=previous)
        for s in planned.stations:
            run, state = result.runs[s.station], states[s.station]
            run.summary_extra.update(state.summary())
            data = Path(s.workbook).read_bytes()
            opts = settings.as_dict() | {"horizon_days": horizon_days, "fleet": fleet.name,
                                         "planned_with": run.summary_extra.get("fleet", {}).get("planned_with")}
            run.summary_extra["plan_id"] = store_plan(
                engines[s.station], summary=run_summary(run), movements=run.plan.movements,
                inventory=run.plan.inventory, workbook_bytes=data, workbook_name=Path(s.workbook).name, as_of=as_of,
                start_date=s.scenario.plant.start_date, horizon_days=s.scenario.plant.horizon_days,
                finger=fingerprint(data, as_of, state.last_import_id, opts), last_import_id=state.last_import_id,
                who=who[s.station])
    finally:
        for e in engines.values():
            e.dispose()
    result.fleet = planned
    return result
