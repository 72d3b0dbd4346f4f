"""Figures of the fleet view: pure functions from the fleet's tables
(`reagentplan.fleet.fleet_frames`) to plotly figures."""

from __future__ import annotations

import pandas as pd
import plotly.graph_objects as go

from .figures import TEMPLATE, legend_at_foot

PALETTE = ("#2f6f8f", "#d9a441", "#7a9e4f", "#b5523b", "#6d5a8f", "#3f8f7a", "#8f6d3f", "#5a6f8f",
           "#9e4f7a", "#4f9e9e")
#: the figures' heights before their legends' rows [px]
POOLED_HEIGHT = 380
CARS_HEIGHT = 360


def _colours(names) -> dict[str, str]:
    """A colour per station; given the names sorted, a station has one colour in every figure."""
    return {n: PALETTE[i % len(PALETTE)] for i, n in enumerate(names)}


def pooled_figure(pooled: pd.DataFrame, contract: str) -> go.Figure:
    """One pooled contract month by month: each station's tonnes stacked, the pooled
    maximum and minimum as lines [t]."""
    f = pooled[pooled["contract"] == contract]
    fig = go.Figure()
    colours = _colours(sorted(pooled["station"].unique()))
    for station, g in f.groupby("station", sort=True):
        fig.add_bar(x=g["month"], y=g["tonnes"], name=station, marker_color=colours[station],
                    customdata=g["hand_split_tonnes"],
                    hovertemplate="%{x}: %{y:,.0f} t (hand split %{customdata:,.0f} t)<extra>" + station + "</extra>")
    months = f.drop_duplicates("month")
    for col, label, dash in (("pool_max_t", "pooled maximum", "solid"), ("pool_min_t", "pooled minimum", "dot")):
        if months[col].notna().any():
            fig.add_scatter(x=months["month"], y=months[col], name=label, mode="lines+markers",
                            line={"color": "#222", "dash": dash})
    fig.update_layout(template=TEMPLATE, barmode="stack", title=f"{contract}: each station's tonnes a month",
                      yaxis_title="t", height=POOLED_HEIGHT, margin={"l": 60, "r": 10, "t": 50})
    fig.update_xaxes(type="category", title="calendar month (its planned days)")
    # at the foot of the figure, below the axis title it used to cover
    legend_at_foot(fig, bottom_px=80)
    return fig


def cars_figure(cars: pd.DataFrame, train_set: str) -> go.Figure:
    """A shared train set's arrivals by day, each station's stacked, and the trains in the
    window starting that day against the set's limit."""
    f = cars[cars["train_set"] == train_set]
    stations = [c for c in f.columns if c not in ("train_set", "date", "weekday", "trains", "trains_in_window",
                                                  "max_trains")]
    colours = _colours(sorted(stations))  # as `pooled_figure` colours them
    fig = go.Figure()
    for s in stations:
        fig.add_bar(x=f["date"], y=f[s], name=s, marker_color=colours[s])
    fig.add_scatter(x=f["date"], y=f["trains_in_window"], name="trains in the window from this day",
                    mode="lines", line={"color": "#222", "shape": "hv"})
    fig.add_scatter(x=f["date"], y=f["max_trains"], name="most the set can bring", mode="lines",
                    line={"color": "#b5523b", "dash": "dash"})
    fig.update_layout(template=TEMPLATE, barmode="stack", title=f"Car set {train_set}: arrivals by day",
                      yaxis_title="trains", height=CARS_HEIGHT, margin={"l": 60, "r": 10, "t": 50})
    legend_at_foot(fig, bottom_px=60)
    return fig
