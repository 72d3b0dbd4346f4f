"""Figures of the record tab: pure functions of `reagentplan.record.overview` frames."""

from __future__ import annotations

import pandas as pd
import plotly.graph_objects as go

from .figures import TEMPLATE, empty_figure, legend_at_foot
from .style import MUTED, STORE_COLOURS, STORE_LABELS

SURVEY = "#222222"
#: a week on a date axis [ms], and the part of it a week's bars fill together [-]
WEEK_MS = 7 * 86_400_000
BARS_FILL = 0.8
#: up to this many weeks, a tick on each week's first day; more, Plotly's own [-]
MAX_WEEK_TICKS = 12


def record_store_figure(pva: pd.DataFrame, store: str) -> go.Figure:
    """A store's past: the level in the plan in force each day, the book level rolled
    from the surveys, and the surveyed levels as points."""
    label = STORE_LABELS.get(store, store)
    p = pva[pva["store"] == store]
    if p.empty:
        return empty_figure(f"No record for the {label.lower()} yet", 300, label)
    colour = STORE_COLOURS.get(store, "#446")
    fig = go.Figure()
    if p["planned_level_t"].notna().any():
        fig.add_trace(go.Scatter(x=p["date"], y=p["planned_level_t"], mode="lines", name="plan in force",
                                 line=dict(color=colour, width=2.2),
                                 hovertemplate="planned %{y:,.0f} t<extra></extra>"))
    fig.add_trace(go.Scatter(x=p["date"], y=p["book_level_t"], mode="lines", name="book (rolled from surveys)",
                             line=dict(color=MUTED, width=1.6, dash="dash"),
                             hovertemplate="book %{y:,.0f} t<extra></extra>"))
    s = p[p["surveyed_level_t"].notna()]
    fig.add_trace(go.Scatter(x=s["date"], y=s["surveyed_level_t"], mode="markers", name="surveyed",
                             marker=dict(color=SURVEY, size=9, symbol="diamond"),
                             hovertemplate="surveyed %{y:,.0f} t<extra></extra>"))
    fig.update_layout(template=TEMPLATE, title=f"{label}: plan, book and survey [t]", height=320,
                      hovermode="x unified", margin=dict(t=58, r=30))
    # in a card a third of the page wide the three entries wrap and, above the plot,
    # grew up over the title: at the foot, with room for two rows
    legend_at_foot(fig, bottom_px=60, per_row=2)
    return fig


def weekly_figure(weekly: pd.DataFrame) -> go.Figure:
    """Recorded tonnes in and out per week against the plan in force: one bar per
    material and direction around the week's first day, its planned tonnes a dash over it."""
    if weekly.empty:
        return empty_figure("No arrivals or shipments recorded yet", 300)
    fig = go.Figure()
    groups = list(weekly.groupby(["direction", "material"]))
    # each bar's width and place in its week given (in ms, the date axis' unit): left to
    # Plotly, a record of one week has no spacing to take the width from and its bars
    # were a millisecond wide, on an axis of milliseconds
    slot = WEEK_MS * BARS_FILL / max(1, len(groups))
    for i, ((direction, material), g) in enumerate(groups):
        name = f"{material.replace('_', ' ')} {'in' if direction == 'in' else 'out'}"
        colour = STORE_COLOURS.get(material, "#446")
        offset = -WEEK_MS * BARS_FILL / 2 + i * slot
        weeks = [f"week of {w:%a %d %b %Y}" for w in g["week"]]
        fig.add_trace(go.Bar(x=g["week"], y=g["recorded_t"], name=f"{name}: recorded", marker_color=colour,
                             width=slot, offset=offset, customdata=weeks,
                             hovertemplate=f"%{{customdata}}<br>{name}: recorded %{{y:,.0f}} t<extra></extra>"))
        # the planned dash over its own bar
        fig.add_trace(go.Scatter(x=g["week"] + pd.to_timedelta(offset + slot / 2, unit="ms"), y=g["planned_t"],
                                 name=f"{name}: planned", mode="markers+lines", customdata=weeks,
                                 line=dict(color=colour, dash="dot"), marker=dict(symbol="line-ew-open", size=14),
                                 hovertemplate=f"%{{customdata}}<br>{name}: planned %{{y:,.0f}} t<extra></extra>"))
    n_weeks = weekly["week"].nunique()
    xaxis = dict(tick0=weekly["week"].min(), dtick=WEEK_MS) if n_weeks <= MAX_WEEK_TICKS else {}
    fig.update_layout(template=TEMPLATE, title="Recorded against the plan in force, per week [t]", height=300,
                      hovermode="closest", margin=dict(t=58, r=30), xaxis=xaxis)
    # up to eight entries wrap to two rows: at the template's place above the plot they
    # grew up over the title; at the foot of the figure, below the dates, they have room
    legend_at_foot(fig, bottom_px=60)
    return fig
