"""How a plan is made: one frozen settings object, with the defaults written once.

`PlanSettings` travels with a plan from the command line, the dashboard, a study and a
rehearsal to `reagentplan.pipeline.run_plan`, which passes its fields on to
`reagentplan.schedule.make_plan`.  Change a field with `dataclasses.replace`, never by
restating the others.

The named instances below are the defaults of the places that plan differently:
`PLAN` (a single plan: ``reagentplan plan``, ``demo``, the dashboard), `STUDY` (the
futures a study shares between its cases) and `WEEKLY_PLAN` (each weekly plan of a
rehearsal).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

#: The MIP solvers a plan can run on (OR-Tools MathOpt).
SOLVERS = ("highs", "scip", "cp-sat")


@dataclass(frozen=True)
class PlanSettings:
    """The options of one plan.

    Attributes
    ----------
    solver : the MIP solver, one of `SOLVERS`.
    time_limit : the wall-clock safety net of a whole plan [s].  The solves are bounded by
        work (`reagentplan.schedule.model.WorkLimits`: nodes, one thread, a fixed seed), so
        the same inputs give the same plan on any machine; only when this net cuts in may a
        re-run differ, and the plan's status and ``summary.json`` (``clock_cut``) say so.
    firm_days : days planned one by one; a weekly outlook after [d].
    risk_level : accepted daily chance of limestone below safety stock or a store above
        capacity, guarding the plan [-] (0.05 = 5 %).
    futures : sampled futures guarding the plan (0 = none, the deterministic balance only).
    seed : seed of those futures; the same seed gives the same futures.
    gap : relative optimality gap at which a solve stops [-].
    """

    solver: str = "highs"
    time_limit: float = 600.0
    firm_days: int = 56
    risk_level: float = 0.05
    futures: int = 500
    seed: int = 0
    gap: float = 5e-4

    def solve_options(self) -> dict:
        """The keyword arguments of `reagentplan.schedule.make_plan` these settings set."""
        return {"solver": self.solver, "time_limit": self.time_limit, "firm_days": self.firm_days,
                "risk_level": self.risk_level, "gap": self.gap}

    def as_dict(self) -> dict:
        """The fields as a plain dict (for a summary or a fingerprint)."""
        return dataclasses.asdict(self)


#: A single plan (``reagentplan plan``, ``demo``, the dashboard).
PLAN = PlanSettings()

#: A study: 200 futures sampled once and shared by every case.
STUDY = PlanSettings(futures=200)

#: Each weekly plan of a rehearsal: two firm weeks, guarded by 50
#: futures sampled once with a seed of their own and cut to each week, at a 1 % risk
#: level, not a single plan's 5 %, because a rehearsal counts a future clean only when
#: no day of its weeks breaks a limit (on the demo, 16 weeks x 6 futures: 5 % left an
#: overflow in 2 of 6 futures, 1 % in none; DEVELOPERS.md, "Rehearsal").
WEEKLY_PLAN = PlanSettings(firm_days=14, risk_level=0.01, futures=50)

#: Most cases a study accepts unless told otherwise (``--max-cases``).  At seconds to a
#: minute per solve this is hours to days of work; more is rarely meant.
MAX_CASES = 500

__all__ = ["PlanSettings", "SOLVERS", "PLAN", "STUDY", "WEEKLY_PLAN", "MAX_CASES"]
