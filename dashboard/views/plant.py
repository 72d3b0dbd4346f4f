"""Plant manager: will any store run dry or overflow, how likely, and the permit."""

from __future__ import annotations

import pandas as pd
from dash import dcc, html

from .. import figures, frames
from ..views.common import GRAPH_CONFIG, card, fmt_date, fmt_money, fmt_pct, fmt_t, graph, table
from reagentplan.risk import ALERT_LEVEL
from reagentplan.schedule.lever import lever_days

HEADLINES = "plant-headlines"
STORES = "plant-stores"
SO2 = "plant-so2"
BREACHES = "plant-breaches"
#: The "SO2 removal and permit" panel: empty unless the plan chose the removal or the
#: station holds allowances.
LEVER = "plant-lever"
LEVER_GRAPH = "plant-removal"
OUTPUTS = (HEADLINES, STORES, LEVER, SO2, BREACHES)
FIGURE_OUTPUTS = (SO2,)


def layout():
    return html.Div(className="rp-view", children=[
        html.P("Each store's planned level inside the band of the sampled futures (P10 to P90), "
               "with safety stock and capacity; the first day a store passes a "
               f"{ALERT_LEVEL:.0%} chance of breaking a limit; the SO2 permit average. The shaded "
               "outlook beyond the firm window is an indication only: it is re-planned every week.",
               className="rp-view-intro"),
        html.Div(id=HEADLINES, className="rp-headlines"),
        html.Div(id=STORES, className="rp-grid"),
        html.Div(id=LEVER, className="rp-grid", style={"marginTop": "14px"}),
        html.Div(className="rp-grid", style={"marginTop": "14px"}, children=[
            card(graph(SO2, 340), wide=True),
            card(html.Div(id=BREACHES), title="What the plan itself breaks (on the expected balance)",
                 wide=True),
        ]),
    ])


def _headline(h: dict) -> html.Div:
    if h["status"] == "at risk":
        detail = [f"{fmt_pct(h['chance'])} chance {h['what']} that day."]
        if h.get("remedy"):
            after = (f" (chance then {fmt_pct(h['chance_after'])})"
                     if h.get("chance_after") is not None else "")
            detail.append(f" Remedy: {h['remedy']}{after}.")
        return html.Div(className="rp-headline risk", id=f"headline-{h['store']}", children=[
            html.Div(h["label"], className="store"),
            html.Div(f"At risk from {fmt_date(h['first_date'])}", className="when"),
            html.Div(detail, className="detail")])
    if h["status"] == "plan breach":
        return html.Div(className="rp-headline breach", id=f"headline-{h['store']}", children=[
            html.Div(h["label"], className="store"),
            html.Div(f"Plan breaks a limit from {fmt_date(h['first_date'])}", className="when"),
            html.Div(f"{h['what']}; see the table below.", className="detail")])
    detail = (f"No day above a {ALERT_LEVEL:.0%} chance of breaking a limit."
              if h["replayed"] else "No risk replay (planned without sampled futures).")
    return html.Div(className="rp-headline", id=f"headline-{h['store']}", children=[
        html.Div(h["label"], className="store"),
        html.Div("Clear over the horizon", className="when"),
        html.Div(detail, className="detail")])


def dip_sentence(d: dict) -> str:
    """A removal dip (`reagentplan.schedule.lever.removal_dips`) in plain words."""
    when = (f"On {fmt_date(d['first_date'])}" if d["first_date"] == d["last_date"]
            else f"From {fmt_date(d['first_date'])} to {fmt_date(d['last_date'])}")
    return (f"{when} the plan runs the scrubber down to {d['lowest_pct']:.2f} % SO2 removal "
            f"(setpoint {d['setpoint_pct']:g} %). Why: {d['cause']}.")


def lever_panel(run) -> list:
    """The "SO2 removal and permit" card, or nothing where the plan neither chose the
    removal nor the station holds allowances."""
    plan = run.plan
    days = lever_days(plan)
    if days is None:
        return []
    summary = plan.summary()
    removal = summary.get("removal")
    dips = (removal or {}).get("dips") or []
    fig = figures.removal_figure(days, dips, plan.scenario.plant.so2_limit_avg_days)
    if removal is None and plan.scenario.scrubber.removal_range is not None:
        words = [html.Li("The plan kept the reorder-point baseline (see the plan's status), which runs "
                         "the scrubber at its setpoint.")]
    elif removal is None:
        words = [html.Li("The removal is fixed in this scenario (no range on the scrubber sheet).")]
    elif not dips:
        words = [html.Li(f"The plan never runs the scrubber below its {removal['setpoint_pct']:g} % setpoint; "
                         f"it runs at {removal['mean_pct']:.2f} % on average "
                         f"({removal['days_above_setpoint']} day(s) above the setpoint).")]
    else:
        words = [html.Li(dip_sentence(d)) for d in dips]
    kids = [dcc.Graph(id=LEVER_GRAPH, config=GRAPH_CONFIG, className="rp-graph", figure=fig,
                      style={"height": f"{figures.REMOVAL_FIGURE_HEIGHT}px"}),
            html.H4("Days below the setpoint"), html.Ul(words, id="plant-dips")]
    allowances = summary.get("allowances")
    if allowances is not None:
        cur = summary["currency"]
        kids += [html.H4(f"SO2 allowances by month (held at the start: {fmt_t(allowances['opening_t'])} t)"),
                 table(pd.DataFrame(allowances["months"]), [
                     ("month", "Month", str, False),
                     ("emitted_t", "Emitted [t]", fmt_t, True),
                     ("allocated_t", "Allocated [t]", fmt_t, True),
                     ("bought_t", "Bought [t]", fmt_t, True),
                     ("sold_t", "Sold [t]", fmt_t, True),
                     ("cost", f"Paid [{cur}] (bought less sold)", fmt_money, True),
                     ("holding_end_t", "Held at month end [t]", fmt_t, True),
                 ], empty="No months in the horizon.", table_id="plant-allowances")]
    return [card(*kids, wide=True, title="SO2 removal and permit", card_id="plant-lever-card")]


def content(run) -> dict:
    plan = run.plan
    scn = plan.scenario
    risk = run.risk
    summary = plan.summary()
    heads = frames.store_headlines(scn, risk, summary["breaches"])
    bands = frames.store_bands(plan.inventory, risk.frame if risk is not None else None)
    n = risk.n_futures if risk is not None else None
    by_store = {h["store"]: h for h in heads}
    stores = [card(dcc.Graph(id=f"store-{s}", config=GRAPH_CONFIG, className="rp-graph",
                             figure=figures.store_figure(bands, s, by_store.get(s), n)))
              for s in scn.storage]
    breaches = pd.DataFrame(summary["breaches"])
    return {
        HEADLINES: [_headline(h) for h in heads],
        STORES: stores,
        LEVER: lever_panel(run),
        SO2: figures.so2_figure(plan.balance, risk.frame if risk is not None else None,
                                scn.plant.so2_limit_avg_days,
                                scn.plant.so2_limit_margin_pct if plan.plan.removal is not None else 0.0),
        BREACHES: table(breaches, [
            ("store", "Store or contract", str, False),
            ("kind", "What", str, False),
            ("first_date", "From", fmt_date, False),
            ("last_date", "To", fmt_date, False),
            ("tonnes", "Tonnes", lambda x: f"{x:,.0f}", True),
            ("cause", "Why", str, False),
            *([("window", "Window", lambda w: "outlook: re-planned before it comes" if w == "outlook"
                else "firm", False)] if "window" in breaches else []),
        ], empty="None: on the expected balance the plan keeps every store between safety stock "
                 "and capacity and meets every contract minimum."),
    }
