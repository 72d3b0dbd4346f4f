"""Stone quality in the plan: the well-mixed silo between the quarries and the scrubber.

The scrubber needs so many tonnes of CaCO3 a day (`caco3_need_t`: SO2 and HCl removed ×
stoichiometry), whatever the stone.  Which stone is in the silo sets how many tonnes of
stone carry that CaCO3 and how much inert material the stone brings into the gypsum.
With ``u`` = tonnes of stone per tonne of CaCO3 in the silo (1 / CaCO3 fraction), every
quantity of the day is linear in ``u``:

- stone drawn = need × u;
- dry gypsum cake = cake without stone inerts + scrubber need × (u − 1);
- a buyer's purity limit p holds when u ≤ 1 + (CaSO4·2H2O / p − cake without inerts) /
  scrubber need.

Only ``u`` itself is not linear in the decisions: u = silo tonnes / silo CaCO3 after the
day's deliveries (a pooling problem, Haverly 1978).  The model keeps the silo's tonnes I
and CaCO3 J as linear states; the purity limit is then exact in them (I' − u_max·J' ≤ 0
after the day's deliveries, for each buyer and month the plan ships).  What is fixed is
the ratio at which inerts leave with the CaCO3 drawn: it is taken from the exact replay of
a known plan (first the reorder-point baseline, then each solve's own plan), the model is
solved again, and so on until the silo's mix settles (Haverly's recursion).  Every
candidate is replayed exactly (`reagentplan.balance.silo_replay` and the full balance at
the replayed mix) and priced by `evaluate`, and the cheapest replayed plan is kept, so a
linearisation error can cost money but never hides a broken limit.  A first-order
(successive linear programming) term was tried and dropped: on the demo it made each
solve 3-10 times slower and moved the plan further between iterations.

References
----------
Haverly, C. A. (1978), "Studies of the behavior of recursion for the pooling problem",
ACM SIGMAP Bulletin 25:19-28.
Lasdon, L. S., Waren, A. D., Sarkar, S. and Palacios, F. (1979), "Solving the pooling
problem using generalized reduced gradient and successive linear programming
algorithms", ACM SIGMAP Bulletin 27:9-15.
Srivastava, R. K. and Jozewicz, W. (2001), J. Air & Waste Manage. Assoc. 51:1676-1688
(cake composition).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..balance import balance_frame, silo_replay
from ..scenario import Scenario
from .lanes import SUPPLY, Lane

#: Points of purity [%-points] the linear model keeps above a buyer's limit, so that the
#: linearisation's error does not put a shipment on the wrong side of the limit.
PURITY_MARGIN_PCT = 0.03


@dataclass
class SiloChemistry:
    """Per-day chemistry of a scenario that does not depend on the stone [t/d], the
    stone of each supply lane [-] and the initial silo.

    need : CaCO3 needed (scrubber, HCl, injection) [t]
    need_gypsum : the part whose stone inerts report to the gypsum (scrubber, HCl) [t]
    cake_base : dry cake without the stone's inerts [t]
    gypsum_pure : CaSO4·2H2O in the cake [t]
    wet_factor : wet cake per dry [-] (1 / (1 − moisture))
    lane_caco3 : CaCO3 fraction per supply lane name [-]
    lane_mgco3 : MgCO3 fraction per supply lane name [-]
    """

    need: np.ndarray
    need_gypsum: np.ndarray
    cake_base: np.ndarray
    gypsum_pure: np.ndarray
    wet_factor: np.ndarray
    lane_caco3: dict[str, float]
    lane_mgco3: dict[str, float]
    initial_t: float
    initial_caco3: float
    u_lo: float
    u_hi: float
    #: the removal lever (`lever.RemovalLever`) when the plan chooses the removal: the
    #: CaCO3 need then follows each plan's removal
    lever: object = None

    def need_of(self, plan) -> np.ndarray:
        """CaCO3 needed per day [t] under a plan: at its removal where it chose one."""
        if self.lever is None or getattr(plan, "removal", None) is None:
            return self.need
        return self.lever.at("caco3_need_t", plan.removal)

    @classmethod
    def from_balance(cls, scenario: Scenario, balance: pd.DataFrame, lanes: list[Lane]) -> "SiloChemistry":
        c0 = balance["limestone_caco3_pct"].to_numpy(float) / 100
        need = balance["caco3_need_t"].to_numpy(float)
        scrub = (balance["limestone_scrubber_t"] + balance["limestone_hcl_t"]).to_numpy(float)
        if scenario.plant.boiler == "cfb":
            scrub = np.zeros_like(scrub)
        dry = balance["gypsum_dry_t"].to_numpy(float)
        inerts = balance["gypsum_inerts_t"].to_numpy(float)
        purity = np.nan_to_num(balance["gypsum_purity_pct"].to_numpy(float)) / 100
        wet = balance["gypsum_wet_t"].to_numpy(float)
        lane_c = {l.name: scenario.stone_caco3_pct(l.source) / 100 for l in lanes if l.kind == SUPPLY}
        lane_mg = {l.name: (l.source.mgco3_pct or 0.0) / 100 for l in lanes if l.kind == SUPPLY}
        c_init = scenario.scrubber.limestone_caco3_pct / 100
        allc = list(lane_c.values()) + [c_init]
        return cls(need, scrub * c0, dry - inerts, purity * dry,
                   np.where(dry > 0, wet / np.where(dry > 0, dry, 1.0), 1.0),
                   lane_c, lane_mg, scenario.storage["limestone"].initial_t, c_init,
                   1 / max(allc), 1 / min(allc))

    # ---------------------------------------------------------------- replay

    def replay(self, lanes: list[Lane], plan) -> dict:
        """The exact well-mixed silo under a plan's deliveries (`silo_replay`)."""
        n = len(self.need)
        arr, comp = np.zeros(n), np.zeros((n, 2))
        for lane in lanes:
            if lane.kind != SUPPLY:
                continue
            t = plan.tonnes(lane)
            arr += t
            comp[:, 0] += t * self.lane_caco3[lane.name]
            comp[:, 1] += t * self.lane_mgco3[lane.name]
        init_mg = 0.0
        return silo_replay(self.initial_t, [self.initial_caco3, init_mg], arr, comp, self.need_of(plan))

    def plan_balance(self, scenario: Scenario, lanes: list[Lane], plan) -> pd.DataFrame:
        """The daily balance at the stone the plan puts in the silo, with the silo's
        CaCO3 [%] (``limestone_caco3_pct``) and MgCO3 [%] (``limestone_mgco3_pct``)."""
        r = self.replay(lanes, plan)
        frame = balance_frame(scenario, caco3_pct=100 * r["frac"][:, 0],
                              removal_pct=getattr(plan, "removal", None))
        frame["limestone_mgco3_pct"] = 100 * r["frac"][:, 1]
        return frame

    # ---------------------------------------------------------------- linear model

    def u_max(self, min_purity_pct: float, margin: bool = True) -> np.ndarray:
        """Most stone per CaCO3 [t/t] that keeps the day's gypsum at a purity [%]
        (+ `PURITY_MARGIN_PCT` unless ``margin`` is false); +inf on days without gypsum."""
        p = (min_purity_pct + (PURITY_MARGIN_PCT if margin else 0.0)) / 100
        with np.errstate(divide="ignore", invalid="ignore"):
            out = 1 + (self.gypsum_pure / p - self.cake_base) / self.need_gypsum
        return np.where(self.need_gypsum > 1e-9, out, np.inf)

    def linearisation(self, lanes: list[Lane], plan, periods: list[tuple[int, int]],
                      floor_t: float) -> tuple[np.ndarray, np.ndarray]:
        """Per period, the silo's stone per CaCO3 ``u`` [t/t] and its CaCO3 after the
        period's deliveries [t] under a known plan: the point the model linearises at."""
        r = self.replay(lanes, plan)
        u, j = np.empty(len(periods)), np.empty(len(periods))
        level = np.r_[self.initial_t, r["level_t"]]
        frac = r["frac"][:, 0]
        for k, (a, b) in enumerate(periods):
            stock = level[b + 1] + r["stone_t"][a:b + 1].sum()
            u[k] = float(np.mean(1 / frac[a:b + 1]))
            j[k] = max(stock / u[k], floor_t)
        return u, j




class SiloLots:
    """The silo's relaxation for a bound: each stone kept as a lot of its own, the scrubber
    fed any blend of the lots the day's CaCO3 need allows.

    Per period k and lot g (the initial silo, each supply lane) with CaCO3 fraction c_g:

    - S[g,k] = S[g,k−1] + delivered[g,k] − drawn[g,k]        (stone [t], S ≥ 0, drawn ≥ 0)
    - Σ_g c_g drawn[g,k] + unmet[k] = need[k]                (CaCO3 [t])
    - I[k] = Σ_g S[g,k]                                      (the store's level [t])
    - inerts drawn to the gypsum: Σ_g (1 − c_g) drawn[g,k]   [t]
    - a purity-limited sale in period k: Σ_g (1 − u_max c_g) drawn[g,k] ≤ M (1 − z), and on
      a single day Σ_g (1 − u_max c_g) (S[g,k] + drawn[g,k]) ≤ M (1 − z) (the content fed)

    A well-mixed silo is one such blend (each lot drawn in proportion to its share of the
    silo, which keeps the feed's stone per CaCO3 equal to the silo's), so every plan of the
    well-mixed model is a plan of this one at the same cost: its optimum, and any dual bound
    a solver proves on it, is a lower bound on the best well-mixed plan.  This is the
    pooling problem's relaxation that sends the sources straight to the products (the
    pool's mixing dropped); see Audet, Brimberg, Hansen, Le Digabel and Mladenović (2004),
    "Pooling problem: alternate formulations and solution methods", Management Science
    50(6):761-776, and Tawarmalani and Sahinidis (2002), *Convexification and Global
    Optimization in Continuous and Mixed-Integer Nonlinear Programming*, Kluwer, ch. 9.
    """

    def __init__(self, model, chem: "SiloChemistry", lanes: list[Lane], initial_t: float, most: float):
        self.m, self.most = model, float(most)
        self.c = {"(initial silo)": chem.initial_caco3}
        self.c.update({l.name: chem.lane_caco3[l.name] for l in lanes if l.kind == SUPPLY})
        self.stock = {g: 0.0 for g in self.c}
        self.stock["(initial silo)"] = float(initial_t)
        self.drawn: dict[int, dict] = {}
        self.stock_at: dict[int, dict] = {}
        self.u_hi = chem.u_hi

    def period(self, k: int, level, arrivals: dict, need, unmet):
        """Rows of period k: the lots' stock, the CaCO3 drawn, the level; returns the
        inerts drawn [t] (an expression)."""
        m = self.m
        drawn = {}
        for g, c in self.c.items():
            d = m.add_variable(lb=0, ub=self.most, name=f"drawn[{g},{k}]")
            s = m.add_variable(lb=0, ub=self.most, name=f"lot[{g},{k}]")
            m.add_linear_constraint(s == self.stock[g] + arrivals.get(g, 0.0) - d, name=f"lot_balance[{g},{k}]")
            self.stock[g] = s
            drawn[g] = d
        m.add_linear_constraint(sum((self.c[g] * d for g, d in drawn.items()), 0.0) + unmet == need,
                                name=f"lots_caco3[{k}]")
        m.add_linear_constraint(level == sum(self.stock.values(), 0.0), name=f"lots_level[{k}]")
        self.drawn[k] = drawn
        self.stock_at[k] = dict(self.stock)
        return sum(((1.0 - self.c[g]) * d for g, d in drawn.items()), 0.0)

    def purity_row(self, k: int, u_max: float, z, daily: bool) -> None:
        """A purity-limited sale in period k (``z`` = 1) needs the feed's stone per CaCO3 at
        most ``u_max`` [t/t]; on a single day also the silo's content after the day's
        deliveries (lots left + drawn), which a well-mixed silo feeds as it is: a valid
        cut that keeps the relaxation from holding poor stone back on the days it ships."""
        big = (self.u_hi - u_max) * self.most * (1 - z)
        feed = sum(((1.0 - u_max * self.c[g]) * d for g, d in self.drawn[k].items()), 0.0)
        self.m.add_linear_constraint(feed <= big, name=f"lots_purity[{k}]")
        if daily:
            content = sum(((1.0 - u_max * self.c[g]) * (self.stock_at[k][g] + d) for g, d in self.drawn[k].items()), 0.0)
            self.m.add_linear_constraint(content <= big, name=f"lots_content_purity[{k}]")

    def caco3_left(self):
        """CaCO3 in the lots after the last period [t] (an expression)."""
        return sum((self.c[g] * s for g, s in self.stock.items()), 0.0)


def stone_frame(scenario: Scenario, balance: pd.DataFrame) -> pd.DataFrame:
    """Per day: the silo's CaCO3 [%] (and MgCO3 [%] where given), the gypsum's purity [%]
    and each purity-limited gypsum buyer's limit [%] (NaN out of its season)."""
    out = pd.DataFrame({"date": balance["date"].to_numpy(),
                        "silo_caco3_pct": balance["limestone_caco3_pct"].to_numpy(float),
                        "gypsum_purity_pct": balance["gypsum_purity_pct"].to_numpy(float)})
    if "limestone_mgco3_pct" in balance:
        out["silo_mgco3_pct"] = balance["limestone_mgco3_pct"].to_numpy(float)
    for b in scenario.buyers:
        if b.material == "gypsum" and b.min_purity_pct is not None:
            season = np.isin(pd.DatetimeIndex(out["date"]).month - 1, sorted(b.months))
            out[f"{b.buyer} min purity [%]"] = np.where(season, b.min_purity_pct, np.nan)
    return out


def deliveries_quality_frame(scenario: Scenario, lanes: list[Lane], movements: pd.DataFrame) -> pd.DataFrame:
    """Each limestone delivery with its stone's CaCO3 [%], its delivered cost per tonne of
    CaCO3 [money/t] and ``chosen_for_quality``: true when a lane of lower-grade stone that
    is cheaper per tonne of CaCO3 was open that day, so the plan paid for the better stone."""
    supply = {l.name: l for l in lanes if l.kind == SUPPLY}
    per_caco3 = {n: (l.cost_per_t + l.cost_per_load / l.load_t) / (scenario.stone_caco3_pct(l.source) / 100)
                 for n, l in supply.items()}
    start = pd.Timestamp(scenario.plant.start_date)
    rows = []
    for r in movements[(movements["material"] == "limestone") & (movements["direction"] == "in")].itertuples():
        lane = supply[r.lane]
        c = scenario.stone_caco3_pct(lane.source)
        d = (pd.Timestamp(r.date) - start).days
        cheaper = [n for n, l in supply.items() if n != r.lane and l.open[d]
                   and scenario.stone_caco3_pct(l.source) < c and per_caco3[n] < per_caco3[r.lane]]
        rows.append({"date": r.date, "lane": r.lane, "party": r.party, "tonnes": r.tonnes, "caco3_pct": c,
                     "cost_per_t_caco3": round(per_caco3[r.lane], 3), "chosen_for_quality": bool(cheaper),
                     "instead_of": ", ".join(cheaper)})
    return pd.DataFrame(rows, columns=["date", "lane", "party", "tonnes", "caco3_pct", "cost_per_t_caco3",
                                       "chosen_for_quality", "instead_of"])

__all__ = ["SiloChemistry", "SiloLots", "PURITY_MARGIN_PCT", "stone_frame", "deliveries_quality_frame"]
