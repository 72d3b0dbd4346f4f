"""Materials coordinator: what to order and book, and how the contracts are running."""

from __future__ import annotations

import pandas as pd
from dash import html

from .. import figures, frames
from ..style import MATERIAL_LABELS, party_colours
from ..views.common import card, fmt_date, fmt_money, fmt_t, graph, table
from reagentplan.schedule.lanes import SUPPLY

CALENDAR = "coord-calendar"
ORDERS = "coord-orders"
HAULOUTS = "coord-haulouts"
CONTRACTS = "coord-contracts"
LANE_USE = "coord-lane-use"
OUTPUTS = (CALENDAR, ORDERS, HAULOUTS, CONTRACTS, LANE_USE)
FIGURE_OUTPUTS = (CALENDAR, CONTRACTS, LANE_USE)


def layout():
    return html.Div(className="rp-view", children=[
        html.P("Trains and trucks of limestone by arrival day, the orders to place this week, "
               "haul-outs to book, and each quarry contract month by month.", className="rp-view-intro"),
        html.Div(className="rp-grid", children=[
            card(graph(CALENDAR, 360), wide=True),
            card(html.Div(id=ORDERS), title="Orders to place this week (order-by date within 7 days)"),
            card(html.Div(id=HAULOUTS), title="Haul-outs to book this week"),
            card(graph(CONTRACTS, 420)),
            card(graph(LANE_USE, 320)),
        ]),
    ])


def content(run) -> dict:
    plan = run.plan
    scn = plan.scenario
    currency = scn.plant.currency
    mv = plan.movements
    start = pd.Timestamp(scn.plant.start_date)
    cal = frames.inbound_calendar(mv, plan.lanes)
    supply_lanes = [lane.name for lane in plan.lanes if lane.kind == SUPPLY]
    orders = frames.orders_this_week(mv, start)
    upcoming = frames.next_orders(mv, start)
    hauls = frames.haulouts_this_week(mv, start)
    totals = plan.evaluation.month_totals
    colours = party_colours(scn)
    order_columns = [
        ("order_by", "Order by", fmt_date, False),
        ("date", "Arrives", fmt_date, False),
        ("lane", "Lane", str, False),
        ("loads", "Loads", fmt_t, True),
        ("tonnes", "Tonnes", fmt_t, True),
        ("cost", f"Cost [{currency}]", fmt_money, True),
        ("firm", "Plan", lambda x: "firm" if x else "outlook", False),
    ]
    return {
        CALENDAR: figures.inbound_calendar_figure(cal, supply_lanes, start, scn.plant.end_date,
                                                  plan.firm_days, currency, colours),
        ORDERS: html.Div([
            table(orders, order_columns, empty="Nothing to order this week: no planned arrival has "
                  "its order-by date in the next 7 days.", table_id="orders-table",
                  row_class=lambda r: "soon" if r["order_by"] <= start + pd.Timedelta(days=2) else ""),
            html.Div("Coming up after this week", className="rp-subhead"),
            table(upcoming, order_columns, empty="No later orders in the plan.",
                  table_id="next-orders-table"),
        ]),
        HAULOUTS: table(hauls, [
            ("material", "Material", lambda x: MATERIAL_LABELS.get(x, x), False),
            ("party", "To", str, False),
            ("kind", "For", str, False),
            ("days", "Days", str, False),
            ("loads", "Loads", fmt_t, True),
            ("tonnes", "Tonnes", fmt_t, True),
        ], empty="No haul-outs in the first week.", table_id="haulouts-table"),
        CONTRACTS: figures.contract_figure(
            frames.contract_progress(scn, plan.lanes, totals, kinds=(SUPPLY,)),
            "Quarry contracts: tonnes per month, min–max",
            "No supplier lanes", colours),
        LANE_USE: figures.lane_use_figure(frames.lane_use(plan.lanes, totals, mv)),
    }
