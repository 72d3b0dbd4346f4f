"""Short plain-text summaries printed by the command line."""

from __future__ import annotations

import pandas as pd

from .scenario import Scenario


def describe_scenario(s: Scenario) -> str:
    """One paragraph: what the workbook holds."""
    p = s.plant
    lines = [
        f"Station {p.name}: {len(s.units)} unit(s), boiler {p.boiler}, "
        f"{p.horizon_days} days from {p.start_date:%Y-%m-%d} to {p.end_date:%Y-%m-%d}.",
        f"Coal sources: {', '.join(c.source for c in s.coal_sources)}; "
        f"{s.coal_blend['date'].nunique()} blend date(s).",
        f"Limestone lanes: {', '.join(x.lane for x in s.suppliers)}.",
        f"Byproduct lanes: {', '.join(x.lane for x in s.buyers) or 'none'}; "
        f"disposal: {', '.join(f'{d.site} ({d.material})' for d in s.disposal) or 'none'}.",
    ]
    rng = s.scrubber.removal_range
    removal = f"SO2 removal {s.scrubber.removal_pct:g} % (setpoint)"
    if rng is not None and rng[1] > rng[0]:
        removal += f"; the plan chooses it day by day within {rng[0]:g}-{rng[1]:g} %, inside the permit"
    lines.append(removal + ".")
    if s.allowances is not None:
        lines.append(f"SO2 allowances: {s.allowance_opening_t or 0:,.0f} t held at the start; "
                     f"{len(s.allowances)} dated row(s) of prices.")
    if s.firm_orders:
        lines.append(f"Firm orders: {len(s.firm_orders)}.")
    if s.generation_history is not None:
        lines.append(f"Generation history: {len(s.generation_history)} rows.")
    return "\n".join(lines)


def balance_totals(frame: pd.DataFrame) -> dict[str, float]:
    """Horizon totals and averages of a balance frame [t, MWh, kg/GJ]."""
    heat = frame["heat_input_gj"].sum()
    return {
        "days": float(len(frame)),
        "generation_mwh": frame["generation_mwh"].sum(),
        "coal_t": frame["coal_t"].sum(),
        "limestone_t": frame["limestone_t"].sum(),
        "gypsum_wet_t": frame["gypsum_wet_t"].sum(),
        "fly_ash_t": frame["fly_ash_t"].sum(),
        "bottom_ash_t": frame["bottom_ash_t"].sum(),
        "so2_emitted_t": frame["so2_emitted_t"].sum(),
        "so2_kg_per_gj": frame["so2_emitted_t"].sum() * 1000 / heat if heat > 0 else float("nan"),
        "days_over_limit": float(frame["so2_over_limit"].sum()),
        "max_rolling_kg_per_gj": frame["so2_rolling_kg_per_gj"].max(),
    }


def describe_balance(s: Scenario, frame: pd.DataFrame) -> str:
    """A small table of the balance's totals, for the terminal."""
    t = balance_totals(frame)
    n = t["days"]
    rows = [
        ("generation", t["generation_mwh"], "MWh"),
        ("coal burned", t["coal_t"], "t"),
        ("limestone used", t["limestone_t"], "t"),
        ("gypsum made (wet)", t["gypsum_wet_t"], "t"),
        ("fly ash collected", t["fly_ash_t"], "t"),
        ("bottom ash", t["bottom_ash_t"], "t"),
        ("SO2 emitted", t["so2_emitted_t"], "t"),
    ]
    out = [f"Mass balance for {s.plant.name}, {int(n)} days:",
           f"  {'':22} {'total':>14} {'per day':>10}"]
    out += [f"  {name:22} {v:>14,.0f} {v / n:>10,.1f} {unit}" for name, v, unit in rows]
    out.append(f"  SO2 rate {t['so2_kg_per_gj']:.4f} kg/GJ over the horizon; highest rolling "
               f"{s.plant.so2_limit_avg_days}-day average {t['max_rolling_kg_per_gj']:.4f} kg/GJ")
    if s.plant.so2_limit_kg_per_gj is not None:
        out.append(f"  permit limit {s.plant.so2_limit_kg_per_gj:g} kg/GJ: "
                   f"{int(t['days_over_limit'])} day(s) over the limit")
    return "\n".join(out)


#: Cost items that are the workbook's penalty weights, not money paid: the price the plan
#: puts on a tonne below safety stock, above capacity, short of the scrubber's need or
#: shipped off-spec.  Everything else (stone, freight, sales, landfill, contract
#: shortfalls at the contract's own rate, end-stock value) is cash.
PENALTY_ITEMS = ("shortage_penalty", "overflow_penalty", "empty_penalty", "quality_penalty",
                 "permit_penalty", "allowance_penalty")


def cost_split(costs: dict[str, float]) -> tuple[float, float]:
    """(cash, penalty weights) of a plan's cost items [money]."""
    penalty = sum(v for k, v in costs.items() if k in PENALTY_ITEMS)
    return sum(costs.values()) - penalty, penalty


def describe_breach(b: dict) -> str:
    """One breach in words: what, where, when, how much and why."""
    unit = "t SO2 over the limit" if b["store"] == "so2_permit" else "t"
    when = (b["first_date"] if b["first_date"] == b["last_date"]
            else f"{b['first_date']} to {b['last_date']}")
    return f"{b['store']}: {b['kind']} {when}, {b['tonnes']:,.1f} {unit}; cause: {b['cause']}"


def describe_plan(result) -> str:
    """The plan against the baseline, the bookings and the breaches, for the terminal."""
    s = result.summary()
    cur = s["currency"]
    mv = result.movements
    gap = "not proven" if s["gap"] is None else f"{s['gap'] * 100:.2f} %"
    lines = [f"Plan for {result.scenario.plant.name}: solver {s['solver']} ({s['status']}, gap "
             f"{gap}, {s['solve_seconds']:.1f} s)",
             f"  the gap covers {s['gap_scope']}",
             *([f"  the silo's successive solves {'settled' if s['silo']['settled'] else 'did not settle'}: "
                f"{s['silo']['why']}"] if s.get("silo") else []),
             *(["  the wall-clock safety net cut a solve short: a re-run may give another plan "
                "(allow more with --time-limit)"] if s.get("clock_cut") else []),
             f"  total cost {s['total_cost']:>14,.0f} {cur}   (reorder-point baseline "
             f"{s['baseline_total_cost']:,.0f} {cur}; both include the end-stock value)"]
    cash, pen = cost_split(s["costs"])
    bcash, bpen = cost_split(s["baseline_costs"])
    lines.append(f"    of which cash {cash:,.0f} {cur} and penalty weights {pen:,.0f} {cur} "
                 f"(baseline: cash {bcash:,.0f}, penalty weights {bpen:,.0f})")
    inbound = mv[mv["direction"] == "in"]
    for lane, g in inbound.groupby("lane"):
        lines.append(f"  {lane:40} {int(g['loads'].sum()):>5} loads {g['tonnes'].sum():>12,.0f} t")
    out = mv[mv["direction"] == "out"]
    for (material, kind), g in out.groupby(["material", "kind"]):
        word = "sold" if kind == "sale" else "landfilled"
        lines.append(f"  {material:12} {word:11} {g['tonnes'].sum():>14,.0f} t")
    lines += describe_lever(s)
    firm, outlook = split_windows(s["breaches"])
    if firm:
        lines.append(f"  {len(firm)} limit(s) broken in the firm window (the first {s['firm_days']} days):")
        for b in firm[:8]:
            lines.append(f"    - {describe_breach(b)}")
    else:
        lines.append(f"  no limit broken in the firm window (the first {s['firm_days']} days) "
                     "in the planned (median) case")
    lines += describe_outlook_breaches(outlook)
    return "\n".join(lines)


def split_windows(breaches: list[dict]) -> tuple[list[dict], list[dict]]:
    """The breaches of the firm window and those of the outlook beyond it (a breach
    without a ``window`` counts as firm)."""
    outlook = [b for b in breaches if b.get("window") == "outlook"]
    return [b for b in breaches if b.get("window") != "outlook"], outlook


def describe_outlook_breaches(outlook: list[dict], shown: int = 3) -> list[str]:
    """The outlook's breaches, set apart: an indication that will be re-planned, not a
    limit the plan breaks now (and not a reason for exit code 1)."""
    if not outlook:
        return []
    lines = [f"  {len(outlook)} in the outlook beyond the firm window (an indication: the weekly "
             "outlook will be re-planned before these days come; no action now, not an exit code 1):"]
    for b in outlook[:shown]:
        lines.append(f"    - {describe_breach(b)}")
    if len(outlook) > shown:
        lines.append(f"    ... and {len(outlook) - shown} more in summary.json (window: outlook)")
    return lines


#: Removal dips named one by one on the console; the rest are counted.
DIPS_SHOWN = 3


def _above_setpoint(saving: dict | None) -> str:
    """What the days above the setpoint save, in words (`PlanResult.above_setpoint_saves`)."""
    if not saving:
        return ""
    text = f" (saving {saving['saves']:,.0f} in cash against the setpoint on those days"
    if saving.get("setpoint_penalty_weights", 0) > 0:
        text += "; at the setpoint the permit or the allowance holding would break"
    return text + ")"


def describe_lever(summary: dict) -> list[str]:
    """The lines on the scrubber's removal (where the plan chose it: its mean and lowest
    against the setpoint and the range, then each dip below the setpoint with its cause,
    at most `DIPS_SHOWN`) and on the allowances (bought, sold, held at the end), from a
    plan's ``summary()``; none where neither applies."""
    lines = []
    r = summary.get("removal")
    if r:
        lines.append(f"  SO2 removal chosen: mean {r['mean_pct']:.2f} %, lowest {r['lowest_pct']:.2f} % "
                     f"(setpoint {r['setpoint_pct']:g} %, range {r['min_pct']:g}-{r['max_pct']:g} %); "
                     f"{r['days_below_setpoint']} day(s) below the setpoint, "
                     f"{r['days_above_setpoint']} above"
                     + _above_setpoint(r.get("above_setpoint_saves")))
        dips = r.get("dips") or []
        for d in dips[:DIPS_SHOWN]:
            when = (d["first_date"] if d["first_date"] == d["last_date"]
                    else f"{d['first_date']} to {d['last_date']}")
            saves = (f"; saves {d['saves']:,.0f} in cash" if d.get("saves") is not None else "") + (
                "; at the setpoint a limit would break" if d.get("setpoint_penalty_weights", 0) > 0 else "")
            lines.append(f"    - below the setpoint {when}, down to {d['lowest_pct']:.2f} %{saves}; "
                         f"cause: {d['cause']}")
        if len(dips) > DIPS_SHOWN:
            lines.append(f"    ... and {len(dips) - DIPS_SHOWN} more in summary.json")
    a = summary.get("allowances")
    if a:
        months = a["months"]
        bought = sum(m["bought_t"] for m in months)
        sold = sum(m["sold_t"] for m in months)
        money = sum(m["cost"] for m in months)
        end = months[-1]["holding_end_t"] if months else a["opening_t"]
        cur = summary.get("currency", "")
        paid = (f"paid {money:,.0f} {cur}" if money >= 0 else f"received {-money:,.0f} {cur}").strip()
        lines.append(f"  SO2 allowances: held {a['opening_t']:,.0f} t at the start, bought {bought:,.0f} t, "
                     f"sold {sold:,.0f} t ({paid}), holding {end:,.0f} t at the end")
    return lines


def describe_risk(run) -> str:
    """The top risks of a planned run, for the terminal."""
    if run.risk is None:
        return "  risk: no futures sampled (--futures 0), so no risk figures"
    firm_days = run.plan.firm_days
    lines = [f"Risk across {run.risk.n_futures} sampled futures (plan held fixed), "
             f"in the firm window (the first {firm_days} days):"]
    if not run.risk.top:
        lines.append("  no store passes a 5 % chance of breaking a limit on any day of the firm window")
    for t in run.risk.top:
        after = f" -> {100 * t['chance_after']:.1f} %" if "chance_after" in t else ""
        lines.append(f"  - {t['store']}: {100 * t['chance']:.1f} % chance {t['what']} from "
                     f"{t['first_date']}; remedy: {t['remedy']}{after}")
    outlook = getattr(run.risk, "outlook", None) or []
    if outlook:
        lines.append("  beyond it, in the outlook (an indication only: with the movements held fixed over "
                     "the whole horizon every shortfall and surplus adds up, and the outlook is re-planned "
                     "every week before it comes):")
        for t in outlook:
            lines.append(f"  - {t['store']}: {100 * t['chance']:.1f} % chance {t['what']} from "
                         f"{t['first_date']} (up to {100 * t['highest_chance']:.0f} %)")
    return "\n".join(lines)


def describe_demo(run, out, files: list[str]) -> str:
    """The short table the demo prints: cost against the baseline, bookings, tonnes sold
    and landfilled, the top risks and where the files are."""
    plan = run.plan
    s = plan.summary()
    cur = s["currency"]
    mv = plan.movements
    inbound = mv[mv["direction"] == "in"]
    trains = int(inbound.loc[inbound["lane"].str.contains(" rail"), "loads"].sum())
    trucks = int(inbound.loc[inbound["lane"].str.contains(" truck"), "loads"].sum())
    saving = s["baseline_total_cost"] - s["total_cost"]
    cash, pen = cost_split(s["costs"])
    bcash, bpen = cost_split(s["baseline_costs"])
    lines = [f"Demo station: {plan.scenario.plant.name}, {plan.scenario.plant.horizon_days} days "
             f"from {plan.scenario.plant.start_date:%Y-%m-%d}",
             "",
             f"  {'cost of the plan':34} {s['total_cost']:>14,.0f} {cur}",
             f"  {'cost of the reorder-point policy':34} {s['baseline_total_cost']:>14,.0f} {cur}",
             f"  {'saving':34} {saving:>14,.0f} {cur}",
             f"  {'  of which cash':34} {bcash - cash:>14,.0f} {cur}",
             f"  {'  of which penalty weights':34} {bpen - pen:>14,.0f} {cur}"
             "   (the workbook's price on a tonne below safety or over capacity)",
             f"  {'limestone trains / trucks booked':34} {trains:>8} / {trucks}",
             (f"  {'gap to the best plan at most':34} {100 * s['gap']:>13.2f} %" if s["gap"] is not None
              else f"  {'gap to the best plan':34} {'not proven':>15}")
             + ("   (the silo's solves settled)" if s.get("silo", {}).get("settled")
                else "   (the silo's solves had not settled)" if s.get("silo") else ""),
             *(["  the wall-clock safety net cut a solve short: a re-run may give another plan"]
               if s.get("clock_cut") else []),
             *describe_lever(s),
             ""]
    out_rows = mv[mv["direction"] == "out"]
    lines.append(f"  {'product':12} {'sold [t]':>12} {'landfilled [t]':>15}")
    for material in ("gypsum", "fly_ash", "bottom_ash"):
        g = out_rows[out_rows["material"] == material]
        sold = g.loc[g["kind"] == "sale", "tonnes"].sum()
        land = g.loc[g["kind"] == "landfill", "tonnes"].sum()
        lines.append(f"  {material:12} {sold:>12,.0f} {land:>15,.0f}")
    lines.append("")
    firm, outlook = split_windows(s["breaches"])
    lines.append(f"  limits broken in the planned case, firm window: {len(firm)}")
    for b in firm[:5]:
        lines.append(f"    - {describe_breach(b)}")
    if len(firm) > 5:
        lines.append(f"    ... and {len(firm) - 5} more in summary.json")
    lines += describe_outlook_breaches(outlook)
    lines.append(describe_risk(run))
    lines.append("")
    lines.append(f"Files in {out}: {', '.join(files)}")
    return "\n".join(lines)


def describe_warnings(warnings) -> str:
    """The unusual values of a scenario (`Scenario.warnings`), one per line; empty
    text for none."""
    if not warnings:
        return ""
    n = len(warnings)
    lines = [f"Warning: {n} value{'s are' if n != 1 else ' is'} possible but unusual; the run goes "
             "on with {0} as written. Check {1}:".format("them" if n != 1 else "it",
                                                         "them" if n != 1 else "it")]
    lines += [f"  - {w}" for w in warnings]
    return "\n".join(lines)


def describe_asof(extra: dict) -> str:
    """The record's state a plan started from (the ``summary.json`` keys), in words."""
    lines = [f"Planned from the record as of {extra.get('as_of')} (plan version {extra.get('plan_id')}):"]
    for store, o in extra.get("opening_stock", {}).items():
        src = (f"survey of {o['survey_date']}" if o["survey_date"] else "workbook's initial level")
        src += f", rolled {o['days_rolled']} day(s)" if o["days_rolled"] else ""
        q = f", CaCO3 {o['caco3_pct']:.1f} %" if "caco3_pct" in o else ""
        lines.append(f"  {store:<10} {o['level_t']:>12,.0f} t  ({src}{q})")
    for lane, t in extra.get("month_to_date_t", {}).items():
        lines.append(f"  this month so far: {lane} {t:,.0f} t")
    if extra.get("contract_months"):
        lines.append(f"  contract months: {extra['contract_months']}")
    for a in extra.get("record_assumptions", []):
        lines.append(f"  assumed: {a}")
    return "\n".join(lines)
