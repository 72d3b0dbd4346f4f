"""The options several commands share, each declared once here with its type, name and
help, its default taken from a `reagentplan.settings.PlanSettings` (`PLAN`, `STUDY`,
`WEEKLY_PLAN`) so that the command line and the library cannot drift apart.

A command passes the settings it starts from and, where its meaning differs, the words
of the help before "(default ...)"; `plan_settings` reads the parsed options back into a
`PlanSettings`.
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime as dt

from ..settings import SOLVERS, PlanSettings


def date_arg(text: str) -> dt.date:
    """An argparse type: a day written YYYY-MM-DD."""
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a date; expected YYYY-MM-DD") from None


def add_out(p, required: bool = True, default: str | None = None) -> None:
    """``--out``: the output folder."""
    if required:
        p.add_argument("--out", required=True, help="output folder")
    else:
        p.add_argument("--out", default=default, help="output folder (default: %(default)s)")


def _help(what: str, note: str = "") -> str:
    """``what (note; default X)``: the help of an option with its default."""
    return f"{what} ({note + '; ' if note else ''}default %(default)s)"


def add_futures(p, default: int, what: str = "sampled futures", note: str = "",
                option: str = "--futures") -> None:
    """``--futures`` (or ``option``, such as ``--plan-futures``): how many futures are
    sampled; ``default`` is a settings' ``futures`` where they guard a plan."""
    p.add_argument(option, type=int, default=default, help=_help(what, note))


def add_seed(p, base: PlanSettings, what: str = "seed of the futures") -> None:
    """``--seed``: the futures' seed (default ``base.seed``)."""
    p.add_argument("--seed", type=int, default=base.seed, help=_help(what))


def add_time_limit(p, base: PlanSettings,
                   what: str = "wall-clock safety net of the plan's solves, in seconds; the solves are bounded "
                               "by work, so a plan is the same on any machine unless this cuts in") -> None:
    """``--time-limit``: the wall-clock safety net of a plan [s] (default ``base.time_limit``)."""
    p.add_argument("--time-limit", type=float, default=base.time_limit,
                   help=_help(what))


def add_solver(p, base: PlanSettings, note: str = "") -> None:
    """``--solver``: the MIP solver (default ``base.solver``); ``note`` follows the
    default in the help."""
    p.add_argument("--solver", choices=list(SOLVERS), default=base.solver,
                   help="MIP solver (default %(default)s" + note + ")")


def add_firm_days(p, base: PlanSettings,
                  what: str = "days planned one by one; weekly outlook after") -> None:
    """``--firm-days`` (default ``base.firm_days``)."""
    p.add_argument("--firm-days", type=int, default=base.firm_days, help=_help(what))


def add_risk_level(p, base: PlanSettings, what: str, metavar: str | None = None) -> None:
    """``--risk-level``, given in percent on the command line (default
    ``base.risk_level`` as a percentage); `plan_settings` turns it into a fraction."""
    p.add_argument("--risk-level", type=float, default=round(100 * base.risk_level, 9), metavar=metavar,
                   help=_help(what))


def add_db(p) -> None:
    """``--db``: the operations record's URL (default: the environment variable)."""
    p.add_argument("--db", default=None, metavar="URL",
                   help="the record: sqlite:///station.db or postgresql+psycopg://user@host/db "
                        "(default: the environment variable REAGENTPLAN_DB)")


def add_user(p) -> None:
    """``--user NAME``: who the record names as having made this write."""
    p.add_argument("--user", default=None, metavar="NAME",
                   help="who the record names as having made this (a user of the record once it "
                        "has users; default: the operating-system user)")


def add_as_of(p, what: str) -> None:
    """``--as-of DATE``; ``what`` is the help."""
    p.add_argument("--as-of", type=date_arg, default=None, metavar="DATE", help=what)


def plan_settings(args, base: PlanSettings, futures: str = "futures") -> PlanSettings:
    """``base`` with the plan options the command declared (``--risk-level`` from percent
    to a fraction); ``futures`` names the option holding the plan's futures."""
    changes = {}
    for name in ("solver", "time_limit", "firm_days", "seed"):
        if hasattr(args, name):
            changes[name] = getattr(args, name)
    if hasattr(args, futures):
        changes["futures"] = getattr(args, futures)
    if hasattr(args, "risk_level"):
        changes["risk_level"] = args.risk_level / 100
    return dataclasses.replace(base, **changes)
