"""Plant manager: will any store run dry or overflow, how likely, and the permit."""

from __future__ import annotations

import pandas as pd
from dash import dcc, html

from .. import figures, frames
from ..views.common import GRAPH_CONFIG, card, fmt_date, fmt_pct, graph, table
from reagentplan.risk import ALERT_LEVEL

HEADLINES = "plant-headlines"
STORES = "plant-stores"
SO2 = "plant-so2"
BREACHES = "plant-breaches"
OUTPUTS = (HEADLINES, STORES, SO2, BREACHES)
FIGURE_OUTPUTS = (SO2,)


def layout():
    return html.Div(className="rp-view", children=[
        html.P("Each store's planned level inside the band of the sampled futures (P10 to P90), "
               "with safety stock and capacity; the first day a store passes a "
               f"{ALERT_LEVEL:.0%} chance of breaking a limit; the SO2 permit average.",
               className="rp-view-intro"),
        html.Div(id=HEADLINES, className="rp-headlines"),
        html.Div(id=STORES, className="rp-grid"),
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
        SO2: figures.so2_figure(plan.balance, risk.frame if risk is not None else None,
                                scn.plant.so2_limit_avg_days),
        BREACHES: table(breaches, [
            ("store", "Store or contract", str, False),
            ("kind", "What", str, False),
            ("first_date", "From", fmt_date, False),
            ("last_date", "To", fmt_date, False),
            ("tonnes", "Tonnes", lambda x: f"{x:,.0f}", True),
            ("cause", "Why", str, False),
        ], empty="None: on the expected balance the plan keeps every store between safety stock "
                 "and capacity and meets every contract minimum."),
    }
