"""The files of a planned run: ``balance.csv``, ``movements.csv``, ``inventory.csv``,
``risk.csv``, ``forecast.csv``, ``summary.json`` and ``plan.xlsx`` (DESIGN §6)."""

from __future__ import annotations

from pathlib import Path

from .files import write_csv, write_json
from .plan_workbook import write_plan_workbook


def write_plan_files(result, folder: Path) -> list[Path]:
    """Write balance.csv, movements.csv, inventory.csv and summary.json of a
    `reagentplan.schedule.PlanResult` into ``folder``."""
    folder = Path(folder)
    return [write_csv(result.balance, folder / "balance.csv"),
            write_csv(result.movements, folder / "movements.csv"),
            write_csv(result.inventory, folder / "inventory.csv", float_format="%.3f"),
            write_json(result.summary(), folder / "summary.json")]


def run_summary(run) -> dict:
    """``summary.json`` of a planned run: the plan's summary, with the top risks and the
    number of futures when the run was replayed against futures."""
    summary = run.plan.summary()
    if run.risk is not None:
        summary["top_risks"] = run.risk.top
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
