"""Byproduct sales: contracts with board plants and ready-mix buyers, quality against
their limits, the fly-ash season and the landfill."""

from __future__ import annotations

from dash import html

from .. import figures, frames
from ..style import MATERIAL_LABELS, party_colours
from ..views.common import card, fmt_date, fmt_t, fmt_years, graph, table
from reagentplan.schedule.lanes import SALE

SHIPMENTS = "sales-shipments"
QUALITY = "sales-quality"
QUALITY_TABLE = "sales-quality-table"
SEASON = "sales-season"
LANDFILL = "sales-landfill"
AIRSPACE = "sales-airspace"
SILO = "sales-silo"
OUTPUTS = (SHIPMENTS, QUALITY, QUALITY_TABLE, SEASON, LANDFILL, AIRSPACE, SILO)
FIGURE_OUTPUTS = (SHIPMENTS, QUALITY, SEASON, LANDFILL, SILO)


def layout():
    return html.Div(className="rp-view", children=[
        html.P("Shipments of wallboard gypsum, fly ash and bottom ash per buyer against the "
               "monthly contracts; the product's quality against each buyer's limits; the "
               "fly-ash season; what goes to landfill and the airspace it leaves.",
               className="rp-view-intro"),
        html.Div(className="rp-grid", children=[
            card(graph(SHIPMENTS, 620)),
            card(graph(QUALITY, 620)),
            card(html.Div(id=QUALITY_TABLE), title="Tightest margin per buyer and limit"),
            card(graph(SEASON, 430)),
            card(graph(LANDFILL, 320)),
            card(html.Div(id=AIRSPACE), title="Landfill airspace left"),
            card(graph(SILO, 520)),
        ]),
    ])


def _margin(row) -> str:
    return f"{row['min_margin']:+.3g} {row['unit']}"


def content(run) -> dict:
    plan = run.plan
    scn = plan.scenario
    mv = plan.movements
    totals = plan.evaluation.month_totals
    margins = frames.quality_margins(plan.balance, scn.buyers)
    summary = frames.quality_summary(margins)
    if len(summary):
        summary = summary.assign(margin_text=summary.apply(_margin, axis=1),
                                 limit_text=summary.apply(
                                     lambda r: f"{'≥' if r['sense'] == 'min' else '≤'} {r['limit']:g} {r['unit']}",
                                     axis=1))
    space = frames.airspace(scn, mv)
    colours = party_colours(scn)
    one_site = space["site"].nunique() <= 1
    site_cols = [] if one_site else [("site", "Site", str, False)]
    return {
        SHIPMENTS: figures.contract_figure(
            frames.contract_progress(scn, plan.lanes, totals, kinds=(SALE,)),
            "Shipments per buyer and month against the contract min–max",
            "No buyers in this scenario", colours),
        QUALITY: figures.quality_figure(margins, colours),
        QUALITY_TABLE: table(summary, [
            ("buyer", "Buyer", str, False),
            ("property", "Limit on", str, False),
            ("limit_text", "Limit", str, False),
            ("margin_text", "Tightest margin", str, True),
            ("days_off_spec", "Days outside", lambda x: f"{x:d}", True),
            ("first_off_spec", "First outside", fmt_date, False),
        ], empty="No buyer sets a quality limit.", table_id="quality-table",
            row_class=lambda r: "soon" if r["days_off_spec"] > 0 else ""),
        SEASON: figures.season_figure(frames.buyer_season(scn, plan.lanes, totals, "fly_ash"), colours),
        LANDFILL: figures.landfill_figure(frames.landfill_monthly(mv)),
        SILO: figures.silo_figure(*frames.silo_quality(plan), colours),
        AIRSPACE: html.Div([
            table(space, [
                ("material", "Material", lambda x: MATERIAL_LABELS.get(x, x), False),
                *site_cols,
                ("airspace_t", "Airspace now [t]", fmt_t, True),
                ("landfilled_t", "Landfilled in plan [t]", fmt_t, True),
                ("left_t", "Left at the end [t]", fmt_t, True),
                ("t_per_year", "At [t/year]", fmt_t, True),
                ("years_left", "Years left", fmt_years, True),
            ], empty="No landfill in this scenario.", table_id="airspace-table"),
            html.Div((f"Site: {space['site'].iloc[0]}. " if one_site and len(space) else "")
                     + "The rate is this plan's landfilling spread over a year; the years left "
                       "assume it goes on.", className="rp-empty")]),
    }
