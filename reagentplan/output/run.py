"""The files of a planned run: ``balance.csv``, ``movements.csv``, ``inventory.csv``,
``risk.csv``, ``forecast.csv``, ``summary.json`` and ``plan.xlsx`` (DESIGN §6)."""

from __future__ import annotations

from pathlib import Path

from .files import write_csv, write_json
from .plan_workbook import write_plan_workbook


def input_warnings(scenario) -> list[dict]:
    """The scenario's unusual values (`Scenario.warnings`) as ``summary.json`` records
    (``kind`` = ``input``)."""
    return [{"kind": "input", **w.as_dict()} for w in getattr(scenario, "warnings", ())]


def run_warnings(run) -> list[dict]:
    """Every warning of a planned run for ``summary.json``: the inputs' unusual values,
    then the run's own plain-words warnings (``PlanRun.warnings`` where it has them, e.g.
    a coal sheet value far from its lab results: ``kind`` = ``forecast``)."""
    out = input_warnings(run.plan.scenario)
    for text in getattr(run, "warnings", None) or ():
        out.append({"kind": "forecast", "sheet": None, "row": None, "column": None,
                    "message": str(text)})
    return out


def plan_summary(result) -> dict:
    """A `PlanResult`'s summary with the scenario's ``warnings`` (a list, empty when
    every value is usual)."""
    from ..summary import cost_split

    summary = result.summary()
    summary["warnings"] = input_warnings(result.scenario)
    for key, costs in (("", summary.get("costs")), ("baseline_", summary.get("baseline_costs"))):
        if costs:
            cash, penalty = cost_split(costs)
            summary[f"{key}cash_cost"] = round(cash, 2)
            summary[f"{key}penalty_cost"] = round(penalty, 2)
    return summary


def write_plan_files(result, folder: Path) -> list[Path]:
    """Write balance.csv, movements.csv, inventory.csv and summary.json of a
    `reagentplan.schedule.PlanResult` into ``folder``."""
    folder = Path(folder)
    return [write_csv(result.balance, folder / "balance.csv"),
            write_csv(result.movements, folder / "movements.csv"),
            write_csv(result.inventory, folder / "inventory.csv", float_format="%.3f"),
            write_json(plan_summary(result), folder / "summary.json")]


def run_summary(run) -> dict:
    """``summary.json`` of a planned run: the plan's summary with the input ``warnings``,
    and the top risks and the number of futures when the run was replayed against
    futures."""
    summary = plan_summary(run.plan)
    summary["warnings"] = run_warnings(run)
    if run.risk is not None:
        summary["top_risks"] = run.risk.top
        summary["outlook_risks"] = getattr(run.risk, "outlook", [])
        summary["futures"] = run.risk.n_futures
    summary.update(getattr(run, "summary_extra", None) or {})
    return summary


def write_run(run, folder: Path) -> list[Path]:
    """Every output of a planned run (`reagentplan.pipeline.PlanRun`) into ``folder``:
    balance.csv, movements.csv, inventory.csv, summary.json (with the top risks), and with
    futures risk.csv and forecast.csv; then plan.xlsx."""
    folder = Path(folder)
    paths = write_plan_files(run.plan, folder)
    if run.risk is not None:
        paths.append(write_csv(run.risk.frame, folder / "risk.csv"))
    write_json(run_summary(run), folder / "summary.json")
    if run.futures is not None:
        from ..forecast import forecast_frame

        paths.append(write_csv(forecast_frame(run.futures), folder / "forecast.csv"))
    paths.append(write_plan_workbook(run, folder / "plan.xlsx"))
    return paths
