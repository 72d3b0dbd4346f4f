"""Figure builders: pure functions from the tables of `dashboard.frames` (and the
library's own frames) to plotly figures.  No planning, no I/O."""

from __future__ import annotations

import numpy as np
import pandas as pd
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from . import style
from .style import (BAD, CAPACITY, GOOD, LANDFILL, MATERIAL_LABELS, MUTED, OUTLOOK, SAFETY,
                    STORE_COLOURS, STORE_LABELS, party_colour)

TEMPLATE = "reagentplan"


def _rgba(hex_colour: str, alpha: float) -> str:
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[i:i + 2], 16) for i in (0, 2, 4))
    return f"rgba({r},{g},{b},{alpha})"


def lane_label(name: str) -> str:
    """A lane's name as the page shows it (material codes in words)."""
    return name.replace("bottom_ash", "bottom ash").replace("fly_ash", "fly ash")


#: Height of one row of a horizontal legend [px].
LEGEND_ROW_PX = 24
#: Entries of a horizontal legend counted to one row (names up to about 30 characters).
LEGEND_PER_ROW = 4


def legend_rows(fig: go.Figure, per_row: int = LEGEND_PER_ROW) -> int:
    """Rows a horizontal legend of ``fig`` takes, ``per_row`` entries a row [-]."""
    n = sum(1 for t in fig.data if t.showlegend is not False and t.name)
    return max(1, -(-n // per_row))


def legend_at_foot(fig: go.Figure, bottom_px: int = 60, per_row: int = LEGEND_PER_ROW) -> None:
    """Put the legend at the foot of the figure (anchored to the figure, not the plot),
    with the bottom margin grown by its rows and the figure's height with it: a legend
    of several rows at the template's place above the plot grows up over the title.
    ``bottom_px`` is the room the x-axis labels need below the plot [px]."""
    rows = legend_rows(fig, per_row)
    extra = LEGEND_ROW_PX * rows
    margin = fig.layout.margin.to_plotly_json() if fig.layout.margin else {}
    fig.update_layout(height=int(fig.layout.height or 450) + extra,
                      margin={**margin, "b": bottom_px + extra},
                      legend=dict(orientation="h", yref="container", y=0.01, yanchor="bottom",
                                  x=0, xanchor="left"))


def _t(x) -> str:
    return "–" if x is None or (isinstance(x, float) and not np.isfinite(x)) else f"{x:,.0f} t"


def empty_figure(message: str, height: int = 260, title: str | None = None) -> go.Figure:
    fig = go.Figure()
    fig.update_layout(template=TEMPLATE, height=height, title=title,
                      xaxis=dict(visible=False), yaxis=dict(visible=False))
    fig.add_annotation(text=message, showarrow=False, x=0.5, y=0.5, xref="paper", yref="paper",
                       font=dict(color=MUTED, size=13))
    return fig


# --------------------------------------------------------------------------- coordinator

_UNIT_WORD = {"rail": "unit train", "truck": "truck"}
_STATUS_TEXT = {"booked": "already booked (firm order)", "firm": "firm window: to order",
                "outlook": "weekly outlook (bucket)"}


def inbound_calendar_figure(cal: pd.DataFrame, lane_names: list[str], start, end,
                            firm_days: int, currency: str = "",
                            colours: dict[str, str] | None = None) -> go.Figure:
    """Limestone arrivals by lane and date: squares are unit trains, circles trucks;
    filled = firm window, open = weekly outlook, dark = already booked.  A thin line
    runs back from each arrival to its order-by date (the lead time)."""
    if not len(lane_names):
        return empty_figure("No limestone supply lanes in this scenario", 320,
                            "Inbound limestone calendar")
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    fig = go.Figure()
    colours = colours or {}

    if len(cal):
        xs, ys = [], []
        for r in cal.itertuples():
            if pd.notna(r.order_by):
                xs += [r.order_by, r.date, None]
                ys += [r.lane, r.lane, None]
        fig.add_trace(go.Scatter(x=xs, y=ys, mode="lines", name="order-by date to arrival",
                                 line=dict(color="#c4ccc7", width=1.5), hoverinfo="skip"))
    for status in ("booked", "firm", "outlook"):
        for mode in ("rail", "truck"):
            part = cal[(cal["status"] == status) & (cal["mode"].fillna("truck") == mode)] if len(cal) else cal
            if part is None or not len(part):
                continue
            loads = part["loads"].astype(float).fillna(1.0).to_numpy()
            size = 15 if mode == "rail" else np.clip(7 + 2.2 * np.sqrt(loads), 8, 22)
            symbol = "square" if mode == "rail" else "circle"
            if status == "outlook":
                symbol += "-open"
            colour = [colours.get(x, OUTLOOK) for x in part["party"]]
            line_colour = "#1e2a30" if status == "booked" else colour
            hover = [
                f"<b>{r.lane}</b><br>arrives {r.date:%a %Y-%m-%d}<br>"
                f"{int(r.loads) if pd.notna(r.loads) else ''} × {_UNIT_WORD.get(mode, 'load')}"
                f" = {r.tonnes:,.0f} t<br>order by <b>{r.order_by:%a %Y-%m-%d}</b>"
                f"<br>{_STATUS_TEXT[status]}<br>cost {r.cost:,.0f} {currency}"
                for r in part.itertuples()]
            fig.add_trace(go.Scatter(
                x=part["date"], y=part["lane"], mode="markers",
                name=f"{_UNIT_WORD.get(mode, mode)} · {status}",
                marker=dict(symbol=symbol, size=size, color=colour if status != "booked" else "#1e2a30",
                            line=dict(width=2 if status == "outlook" else 1, color=line_colour)),
                hovertext=hover, hoverinfo="text"))
    week_end = start + pd.Timedelta(days=7)
    fig.add_vrect(x0=start - pd.Timedelta(hours=12), x1=week_end - pd.Timedelta(hours=12),
                  fillcolor=_rgba(style.ACCENT, 0.14), line_width=0, layer="below",
                  annotation_text="this week", annotation_position="top left",
                  annotation_font=dict(size=11, color=MUTED))
    outlook_from = start + pd.Timedelta(days=firm_days)
    if outlook_from <= end:
        fig.add_vrect(x0=outlook_from - pd.Timedelta(hours=12), x1=end + pd.Timedelta(hours=12),
                      fillcolor="rgba(150,160,165,0.10)", line_width=0, layer="below",
                      annotation_text="weekly outlook", annotation_position="top right",
                      annotation_font=dict(size=11, color=MUTED))
    fig.update_layout(template=TEMPLATE, title="Inbound limestone: arrivals by lane",
                      height=max(300, 150 + 46 * len(lane_names)),
                      yaxis=dict(categoryorder="array", categoryarray=list(reversed(lane_names)),
                                 range=[-0.6, len(lane_names) - 0.4], automargin=True, title=None),
                      xaxis=dict(range=[start - pd.Timedelta(days=1), end + pd.Timedelta(days=1)],
                                 title=None),
                      legend=dict(y=-0.18, yanchor="top", x=0, xanchor="left"),
                      margin=dict(t=56, b=64))
    return fig


#: The contract min-max band of every panel of `contract_figure` (one colour, one legend entry).
CONTRACT_BAND = "rgba(125,139,147,0.18)"


def contract_figure(progress: pd.DataFrame, title: str, empty_text: str,
                    colours: dict[str, str] | None = None) -> go.Figure:
    """Planned tonnes per month (bars) inside each lane's contract band (shaded from the
    monthly minimum to the maximum), one panel per lane."""
    if progress.empty:
        return empty_figure(empty_text, 260, title)
    lanes = list(dict.fromkeys(progress["lane"]))
    fig = make_subplots(rows=len(lanes), cols=1, shared_xaxes=True, vertical_spacing=0.06 if len(lanes) < 5 else 0.035,
                        subplot_titles=[lane_label(x) for x in lanes])
    # every colour a bar is drawn in has its own legend entry: each party's colour (once a
    # party), the months below the contract minimum or above its maximum, and one neutral
    # band colour for every panel's contract min-max
    status_colour = {"below minimum": SAFETY, "above maximum": BAD}
    status_name = {"below minimum": "planned, below the monthly minimum",
                   "above maximum": "planned, above the monthly maximum"}
    named: set[str] = set()
    for i, lane in enumerate(lanes, start=1):
        p = progress[progress["lane"] == lane]
        party = p["party"].iloc[0]
        colour = (colours or {}).get(party, party_colour(i - 1))
        lo = p["min_t"].fillna(0.0)
        hi = p["max_t"]
        has_band = hi.notna() | p["min_t"].notna()
        band_top = hi.where(hi.notna(), np.nan)
        fig.add_trace(go.Bar(
            x=p["month"], y=(band_top - lo).where(has_band), base=lo.where(has_band), width=25 * 86400e3,
            marker=dict(color=CONTRACT_BAND, line=dict(width=0)), name="contract min–max",
            legendgroup="band", showlegend="band" not in named,
            hovertext=[f"contract {_t(a)} to {_t(b)}" for a, b in zip(p["min_t"], p["max_t"])],
            hoverinfo="text"), row=i, col=1)
        named.add("band")
        hover = [f"<b>{lane_label(lane)}</b><br>{m}: {_t(v)} planned<br>contract min {_t(a)}, max {_t(b)}"
                 f"<br>{s}" for m, v, a, b, s in zip(p["month_label"], p["planned_t"],
                                                    p["min_t"], p["max_t"], p["status"])]
        for key, name, col in ((None, f"planned: {party}", colour),
                               *((k, status_name[k], c) for k, c in status_colour.items())):
            this = ~p["status"].isin(list(status_colour)) if key is None else p["status"] == key
            if key is not None and not this.any():
                continue
            fig.add_trace(go.Bar(
                x=p["month"], y=p["planned_t"].where(this.to_numpy()), width=13 * 86400e3,
                marker=dict(color=col), name=name, legendgroup=name, showlegend=name not in named,
                hovertext=hover, hoverinfo="text"), row=i, col=1)
            named.add(name)
        if p["min_t"].notna().any():
            fig.add_trace(go.Scatter(
                x=p["month"], y=p["min_t"], mode="markers", name="monthly minimum",
                legendgroup="min", showlegend="min" not in named,
                marker=dict(symbol="line-ew", size=30, line=dict(width=3, color="#1e2a30")),
                hoverinfo="skip"), row=i, col=1)
            named.add("min")
        top = np.nanmax(np.r_[p["planned_t"].to_numpy(float), p["max_t"].to_numpy(float),
                              p["min_t"].to_numpy(float), 1.0])
        # the unit on each tick ("20k t"): a rotated one-letter axis title reads as an odd glyph
        fig.update_yaxes(title_text=None, ticksuffix=" t", row=i, col=1, range=[0, 1.15 * top])
    fig.update_layout(template=TEMPLATE, title=title, barmode="overlay",
                      height=150 + 150 * len(lanes), bargap=0.2)
    # at the foot of the figure, below the two-line month labels (month, then year)
    legend_at_foot(fig, bottom_px=60)
    fig.update_annotations(font=dict(size=12, color=MUTED))
    fig.update_xaxes(dtick="M1", tickformat="%b\n%Y")
    return fig


def lane_use_figure(use: pd.DataFrame) -> go.Figure:
    """Share of each lane's calendar capacity the plan uses, and its tonnes."""
    use = use[use["use_pct"].notna()] if len(use) else use
    if use.empty:
        return empty_figure("No lanes with a daily capacity", 260, "Lane use")
    order = {"supply": 0, "sale": 1, "landfill": 2}
    use = use.assign(_o=use["kind"].map(order)).sort_values(["_o", "lane"], ascending=[False, False])
    colour = {"supply": STORE_COLOURS["limestone"], "sale": GOOD, "landfill": LANDFILL}
    label = {"supply": "limestone in", "sale": "sold", "landfill": "landfill"}
    fig = go.Figure()
    for kind in ("supply", "sale", "landfill"):
        part = use[use["kind"] == kind]
        if part.empty:
            continue
        fig.add_trace(go.Bar(
            x=part["use_pct"], y=[lane_label(x) for x in part["lane"]], orientation="h", name=label[kind],
            marker=dict(color=colour[kind]),
            text=[f"{u:.0f} %" for u in part["use_pct"]], textposition="outside",
            hovertext=[f"<b>{lane_label(r.lane)}</b><br>{r.planned_t:,.0f} t of {r.capacity_t:,.0f} t its calendar "
                       f"allows ({r.open_days} open days)<br>{r.use_pct:.1f} % used"
                       for r in part.itertuples()], hoverinfo="text"))
    fig.update_layout(template=TEMPLATE, title="Lane use",
                      height=max(260, 120 + 30 * len(use)),
                      xaxis=dict(title="% of capacity on open days",
                                 range=[0, 115], ticksuffix=" %"),
                      yaxis=dict(automargin=True), margin=dict(t=56, b=60))
    return fig


# --------------------------------------------------------------------------- plant


def shade_outlook(fig: go.Figure, frame: pd.DataFrame | None, text: str = "outlook") -> None:
    """Shade the days of ``frame`` whose ``window`` is ``outlook`` (risk.csv's column):
    beyond the firm window the replay's chances are an indication, not what the
    coordinator acts on.  Nothing where the frame has no outlook."""
    if frame is None or "window" not in frame or not (frame["window"] == "outlook").any():
        return
    days = pd.to_datetime(frame.loc[frame["window"] == "outlook", "date"])
    fig.add_vrect(x0=days.min() - pd.Timedelta(hours=12), x1=days.max() + pd.Timedelta(hours=12),
                  fillcolor="rgba(150,160,165,0.13)", line_width=0, layer="below",
                  # a short label: the capacity and limit labels sit at the top right,
                  # where a longer one ran into them on a short outlook (the page's
                  # intro says what the shading means)
                  annotation_text=text, annotation_position="top left",
                  annotation_font=dict(size=11, color=MUTED))


def store_figure(bands: pd.DataFrame, store: str, headline: dict | None = None,
                 n_futures: int | None = None) -> go.Figure:
    """One store's planned end-of-day level inside the P10–P90 band of the risk replay,
    with its safety stock and capacity."""
    label = STORE_LABELS.get(store, store)
    b = bands[bands["store"] == store]
    if b.empty:
        return empty_figure(f"No {label.lower()} in this scenario", 300, label)
    colour = STORE_COLOURS.get(store, "#446")
    fig = go.Figure()
    if b["level_p90_t"].notna().any():
        fig.add_trace(go.Scatter(x=b["date"], y=b["level_p90_t"], mode="lines", line=dict(width=0),
                                 name="P90", showlegend=False, hovertemplate="P90 %{y:,.0f} t<extra></extra>"))
        band_name = f"P10–P90 of {n_futures} futures" if n_futures else "P10–P90"
        fig.add_trace(go.Scatter(x=b["date"], y=b["level_p10_t"], mode="lines", line=dict(width=0),
                                 fill="tonexty", fillcolor=_rgba(colour, 0.22), name=band_name,
                                 hovertemplate="P10 %{y:,.0f} t<extra></extra>"))
        fig.add_trace(go.Scatter(x=b["date"], y=b["level_p50_t"], mode="lines",
                                 line=dict(color=colour, width=1, dash="dot"), name="P50",
                                 hovertemplate="P50 %{y:,.0f} t<extra></extra>"))
    fig.add_trace(go.Scatter(x=b["date"], y=b["level_t"], mode="lines", line=dict(color=colour, width=2.6),
                             name="planned level", hovertemplate="planned %{y:,.0f} t<extra></extra>"))
    safety, cap = float(b["safety_t"].iloc[0]), float(b["capacity_t"].iloc[0])
    if safety > 0:
        fig.add_hline(y=safety, line=dict(color=SAFETY, dash="dash", width=1.6),
                      annotation_text=f"safety stock {safety:,.0f} t", annotation_position="bottom right",
                      annotation_font=dict(color=SAFETY, size=11))
    fig.add_hline(y=cap, line=dict(color=CAPACITY, dash="dashdot", width=1.6),
                  annotation_text=f"capacity {cap:,.0f} t", annotation_position="top right",
                  annotation_font=dict(color=CAPACITY, size=11))
    if headline and headline.get("status") == "at risk" and headline.get("first_date"):
        x = pd.Timestamp(headline["first_date"])
        fig.add_vline(x=x, line=dict(color=BAD, width=1.4, dash="dot"))
        fig.add_annotation(x=x, y=0.5, yref="paper", text="first day at risk", showarrow=False,
                           xanchor="right", yanchor="middle", textangle=-90, xshift=-3,
                           font=dict(color=BAD, size=11), bgcolor="rgba(255,255,255,0.75)")
    shade_outlook(fig, b)
    top = max(cap, float(np.nanmax(b[["level_t", "level_p90_t"]].to_numpy(dtype=float)))) * 1.08
    fig.update_layout(template=TEMPLATE, title=f"{label} [t]", height=330, hovermode="x unified",
                      yaxis=dict(range=[0, top], title=None), margin=dict(t=58, r=30))
    return fig


def so2_figure(balance: pd.DataFrame, risk_frame: pd.DataFrame | None, avg_days: int,
               margin_pct: float = 0.0) -> go.Figure:
    """The permit's rolling SO2 average against its limit (and the limit less the
    compliance margin ``margin_pct`` [%]), the daily value behind it, and the replay's
    chance of being over the limit (and over the margin line)."""
    fig = make_subplots(specs=[[{"secondary_y": True}]])
    fig.add_trace(go.Scatter(x=balance["date"], y=balance["so2_kg_per_gj"], mode="lines",
                             line=dict(color="#9fb3bf", width=1), name="daily",
                             hovertemplate="daily %{y:.4f} kg/GJ<extra></extra>"), secondary_y=False)
    fig.add_trace(go.Scatter(x=balance["date"], y=balance["so2_rolling_kg_per_gj"], mode="lines",
                             line=dict(color="#2b5c7a", width=2.6), name=f"{avg_days}-day rolling average",
                             hovertemplate="rolling %{y:.4f} kg/GJ<extra></extra>"), secondary_y=False)
    limit = balance["so2_limit_kg_per_gj"]
    if limit.notna().any():
        fig.add_trace(go.Scatter(x=balance["date"], y=limit, mode="lines",
                                 line=dict(color=CAPACITY, width=1.8, dash="dash"), name="permit limit",
                                 hovertemplate="limit %{y:.4f} kg/GJ<extra></extra>"), secondary_y=False)
        if margin_pct > 0:
            fig.add_trace(go.Scatter(x=balance["date"], y=limit * (1 - margin_pct / 100), mode="lines",
                                     line=dict(color=CAPACITY, width=1.2, dash="dot"),
                                     name="limit less the compliance margin",
                                     hovertemplate="margin line %{y:.4f} kg/GJ<extra></extra>"), secondary_y=False)
    if risk_frame is not None and "p_so2_over_limit" in risk_frame:
        lime = risk_frame[risk_frame["store"] == "limestone"]
        fig.add_trace(go.Scatter(x=lime["date"], y=100 * lime["p_so2_over_limit"], mode="lines",
                                 line=dict(color=_rgba(BAD, 0.6), width=1), fill="tozeroy",
                                 fillcolor=_rgba(BAD, 0.10), name="chance over the limit",
                                 hovertemplate="chance over %{y:.1f} %<extra></extra>"), secondary_y=True)
        if margin_pct > 0 and "p_so2_over_margin" in lime:
            fig.add_trace(go.Scatter(x=lime["date"], y=100 * lime["p_so2_over_margin"], mode="lines",
                                     line=dict(color=_rgba(BAD, 0.45), width=1, dash="dot"),
                                     name="chance over the margin line",
                                     hovertemplate="chance over the margin line %{y:.1f} %<extra></extra>"),
                          secondary_y=True)
    if risk_frame is not None:
        shade_outlook(fig, risk_frame[risk_frame["store"] == "limestone"])
    fig.update_layout(template=TEMPLATE, title="SO2 emitted against the permit [kg/GJ heat input]",
                      height=340, hovermode="x unified", margin=dict(t=58))
    fig.update_yaxes(title_text="kg/GJ", rangemode="tozero", secondary_y=False)
    fig.update_yaxes(title_text="chance over the limit [%]", range=[0, 100], tickmode="linear", tick0=0,
                     dtick=25, showgrid=False, secondary_y=True)
    return fig


#: Colours of the removal panel: the removal chosen, the range's band, the setpoint.
REMOVAL_COLOUR = "#2b5c7a"
SETPOINT_COLOUR = "#c98b2b"
#: Height of the removal figure [px] (its panel titles name what it shows).
REMOVAL_FIGURE_HEIGHT = 520


def removal_figure(days: pd.DataFrame, dips: list[dict] | None = None, avg_days: int = 30) -> go.Figure:
    """The SO2 removal per day (the plan's choice, or the fixed removal) inside the range
    the plan may choose (a shaded band from its min to its max, where there is one) with
    the setpoint, above the permit's rolling average against its limit; the days of each
    dip below the setpoint are shaded.  ``days`` is
    `reagentplan.schedule.lever.lever_days`; ``dips`` the summary's ``removal.dips``."""
    chose = "removal_min_pct" in days
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.12, row_heights=[0.55, 0.45],
                        subplot_titles=["SO2 removal [%]" + (" chosen by the plan, within its range"
                                                             if chose else " (fixed)"),
                                        f"SO2 {avg_days}-day rolling average against the permit limit [kg/GJ]"])
    x = days["date"]
    if chose:
        fig.add_trace(go.Scatter(x=x, y=days["removal_max_pct"], mode="lines", line=dict(width=0),
                                 showlegend=False, hoverinfo="skip", legendgroup="range"), row=1, col=1)
        fig.add_trace(go.Scatter(x=x, y=days["removal_min_pct"], mode="lines", line=dict(width=0),
                                 fill="tonexty", fillcolor=_rgba(REMOVAL_COLOUR, 0.13), legendgroup="range",
                                 name=f"range the plan may choose ({days['removal_min_pct'].iloc[0]:g}-"
                                      f"{days['removal_max_pct'].iloc[0]:g} %)",
                                 hoverinfo="skip"), row=1, col=1)
    fig.add_trace(go.Scatter(x=x, y=days["setpoint_pct"], mode="lines", name="setpoint",
                             line=dict(color=SETPOINT_COLOUR, width=1.8, dash="dash"),
                             hovertemplate="setpoint %{y:.2f} %<extra></extra>"), row=1, col=1)
    fig.add_trace(go.Scatter(x=x, y=days["removal_pct"], mode="lines",
                             name="SO2 removal chosen" if chose else "SO2 removal",
                             line=dict(color=REMOVAL_COLOUR, width=2.6, shape="hv"),
                             hovertemplate="removal %{y:.2f} %<extra></extra>"), row=1, col=1)
    fig.add_trace(go.Scatter(x=x, y=days["so2_rolling_kg_per_gj"], mode="lines", name="rolling average",
                             line=dict(color="#1e2a30", width=2.2),
                             hovertemplate="rolling average %{y:.4f} kg/GJ<extra></extra>"), row=2, col=1)
    limit = days["so2_limit_kg_per_gj"]
    if limit.notna().any():
        fig.add_trace(go.Scatter(x=x, y=limit, mode="lines", name="permit limit",
                                 line=dict(color=CAPACITY, width=1.8, dash="dash"),
                                 hovertemplate="permit limit %{y:.4f} kg/GJ<extra></extra>"), row=2, col=1)
        line = days.get("so2_margin_line_kg_per_gj")
        if line is not None and (line < limit - 1e-12).any():
            fig.add_trace(go.Scatter(x=x, y=line, mode="lines", name="limit less the compliance margin",
                                     line=dict(color=CAPACITY, width=1.2, dash="dot"),
                                     hovertemplate="margin line %{y:.4f} kg/GJ<extra></extra>"), row=2, col=1)
    for d in dips or []:
        a = pd.Timestamp(d["first_date"]) - pd.Timedelta(hours=12)
        b = pd.Timestamp(d["last_date"]) + pd.Timedelta(hours=12)
        colour = SAFETY if d.get("kind") == "low limestone" else OUTLOOK
        for row in (1, 2):
            fig.add_vrect(x0=a, x1=b, fillcolor=_rgba(colour, 0.16), line_width=0, layer="below", row=row, col=1,
                          **(dict(annotation_text=f"below setpoint: {d.get('kind', '')}".strip(": "),
                                  annotation_position="bottom left",
                                  annotation_font=dict(size=10, color=MUTED)) if row == 1 else {}))
    values = days[[c for c in ("removal_pct", "removal_min_pct", "setpoint_pct") if c in days]].to_numpy(float)
    low = float(np.floor(np.nanmin(values) - 0.5))
    fig.update_yaxes(range=[low, 100.2], ticksuffix=" %", tickformat=".1f", row=1, col=1)
    top = float(np.nanmax(np.r_[days["so2_rolling_kg_per_gj"].to_numpy(float), limit.to_numpy(float)]))
    fig.update_yaxes(range=[0, 1.12 * top if top > 0 else 1.0], tickformat=".3f", row=2, col=1)
    fig.update_layout(template=TEMPLATE, height=REMOVAL_FIGURE_HEIGHT, hovermode="x unified",
                      margin=dict(t=36, b=40),
                      legend=dict(orientation="h", y=-0.07, yanchor="top", x=0, xanchor="left"))
    fig.update_annotations(font=dict(size=12, color=MUTED), selector=dict(showarrow=False, xref="paper"))
    return fig


# --------------------------------------------------------------------------- sales

_PROPERTY_TITLES = {"purity": "Gypsum purity (CaSO4·2H2O) [%]", "moisture": "Gypsum free moisture [%]",
                    "chloride": "Gypsum chloride [ppm]", "LOI": "Fly-ash LOI [%]",
                    "SO3": "Fly-ash SO3 [%]"}


def quality_figure(margins: pd.DataFrame, colours: dict[str, str] | None = None) -> go.Figure:
    """Each property of the day's product with every buyer's limit; days outside a
    buyer's limit are marked.  One panel per property."""
    if margins.empty:
        return empty_figure("No buyer sets a quality limit", 260, "Quality against buyers' limits")
    props = list(dict.fromkeys(margins["property"]))
    fig = make_subplots(rows=len(props), cols=1, shared_xaxes=True,
                        vertical_spacing=min(0.1, 0.35 / max(len(props), 1)),
                        subplot_titles=[_PROPERTY_TITLES.get(p, p) for p in props])
    buyers = list(dict.fromkeys(margins["buyer"]))
    bcol = {b: (colours or {}).get(b, party_colour(i)) for i, b in enumerate(buyers)}
    shown = set()
    for i, prop in enumerate(props, start=1):
        m = margins[margins["property"] == prop]
        first = m[m["buyer"] == m["buyer"].iloc[0]]
        material = first["material"].iloc[0]
        fig.add_trace(go.Scatter(
            x=first["date"], y=first["value"], mode="lines",
            line=dict(color=STORE_COLOURS.get(material, "#445"), width=2),
            name=MATERIAL_LABELS.get(material, material) + " as made", legendgroup=material,
            showlegend=material not in shown,
            hovertemplate=f"{prop} %{{y:.3g}} {first['unit'].iloc[0]}<extra></extra>"), row=i, col=1)
        shown.add(material)
        for buyer, part in m.groupby("buyer", sort=False):
            limit = float(part["limit"].iloc[0])
            word = "min" if part["sense"].iloc[0] == "min" else "max"
            fig.add_trace(go.Scatter(
                x=[part["date"].iloc[0], part["date"].iloc[-1]], y=[limit, limit], mode="lines",
                line=dict(color=bcol[buyer], dash="dash", width=1.5), name=f"{buyer} limit",
                legendgroup=buyer, showlegend=buyer not in shown,
                hovertemplate=f"{buyer}: {word} {limit:g} {part['unit'].iloc[0]}<extra></extra>"),
                row=i, col=1)
            shown.add(buyer)
            off = part[part["margin"] < 0]
            if len(off):
                fig.add_trace(go.Scatter(
                    x=off["date"], y=off["value"], mode="markers",
                    marker=dict(color=BAD, size=6, symbol="x"), name="outside a buyer's limit",
                    legendgroup="off", showlegend="off" not in shown,
                    hovertext=[f"{d:%Y-%m-%d}: outside {buyer}'s {word} {limit:g} by {-g:.3g}"
                               for d, g in zip(off["date"], off["margin"])], hoverinfo="text"),
                    row=i, col=1)
                shown.add("off")
    fig.update_yaxes(nticks=4)  # a few ticks per panel, so stacked panels stay readable
    fig.update_layout(template=TEMPLATE, title="Quality against each buyer's limits",
                      height=150 + 150 * len(props), hovermode="x", margin=dict(t=60, b=40),
                      legend=dict(orientation="h", y=-0.04, yanchor="top", x=0, xanchor="left"))
    fig.update_annotations(font=dict(size=12, color=MUTED))
    return fig


def season_figure(season: pd.DataFrame, colours: dict[str, str] | None = None) -> go.Figure:
    """Fly-ash buyers' seasons by month (top strip) and where the fly ash goes each
    month: sold per buyer, or landfilled."""
    if season.empty:
        return empty_figure("No fly-ash buyers or landfill in this scenario", 260, "Fly-ash season")
    sale = season[season["kind"] == "sale"]
    buyers = list(dict.fromkeys(sale["lane"]))
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, row_heights=[0.28, 0.72],
                        vertical_spacing=0.06)
    if buyers:
        z = [[1.0 if s else 0.0 for s in sale[sale["lane"] == b]["in_season"]] for b in buyers]
        months = sale[sale["lane"] == buyers[0]]["month"]
        text = [["in" if v else "off" for v in row] for row in z]
        parties = [sale.loc[sale["lane"] == b, "party"].iloc[0] for b in buyers]
        names = parties if len(set(parties)) == len(parties) else [lane_label(b) for b in buyers]
        fig.add_trace(go.Heatmap(x=months, y=names, z=z, zmin=0, zmax=1, showscale=False,
                                 colorscale=[[0, "#e6e3dc"], [1, _rgba(GOOD, 0.75)]], xgap=3, ygap=3,
                                 text=text, texttemplate="%{text}", textfont=dict(size=10),
                                 hovertemplate="%{y}<br>%{x|%b %Y}: %{text} season<extra></extra>"),
                      row=1, col=1)
    for i, b in enumerate(buyers):
        part = sale[sale["lane"] == b]
        fig.add_trace(go.Bar(x=part["month"], y=part["planned_t"], name=f"sold: {part['party'].iloc[0]}",
                             marker=dict(color=(colours or {}).get(part["party"].iloc[0], party_colour(i))),
                             hovertemplate="%{x|%b %Y}: %{y:,.0f} t sold<extra></extra>"), row=2, col=1)
    fill = season[season["kind"] == "landfill"].groupby("month", as_index=False)["planned_t"].sum()
    if len(fill):
        fig.add_trace(go.Bar(x=fill["month"], y=fill["planned_t"], name="landfilled",
                             marker=dict(color=LANDFILL, pattern=dict(shape="/", fgcolor="#ffffff", fillmode="overlay")),
                             hovertemplate="%{x|%b %Y}: %{y:,.0f} t landfilled<extra></extra>"),
                      row=2, col=1)
    fig.update_layout(template=TEMPLATE, title="Fly-ash season: buyers' months and where the ash goes",
                      barmode="stack", height=430, margin=dict(t=60, b=80),
                      legend=dict(orientation="h", y=-0.1, yanchor="top", x=0, xanchor="left"))
    fig.update_yaxes(title_text="t per month", row=2, col=1)
    fig.update_yaxes(automargin=True, row=1, col=1, showgrid=False)
    fig.update_xaxes(dtick="M1", tickformat="%b\n%Y", row=2, col=1)
    return fig


def landfill_figure(monthly: pd.DataFrame) -> go.Figure:
    """Tonnes landfilled per month, by material."""
    if monthly.empty:
        return empty_figure("Nothing goes to landfill in this plan", 260, "Landfill")
    fig = go.Figure()
    for material, part in monthly.groupby("material", sort=False):
        fig.add_trace(go.Bar(x=part["month"], y=part["tonnes"], name=MATERIAL_LABELS.get(material, material),
                             marker=dict(color=STORE_COLOURS.get(material, LANDFILL)),
                             hovertemplate="%{x|%b %Y}: %{y:,.0f} t<extra></extra>"))
    fig.update_layout(template=TEMPLATE, title="Landfilled per month [t]", barmode="stack", height=320,
                      xaxis=dict(dtick="M1", tickformat="%b\n%Y"), margin=dict(t=58))
    return fig


__all__ = ["empty_figure", "inbound_calendar_figure", "contract_figure", "lane_use_figure",
           "store_figure", "so2_figure", "removal_figure", "quality_figure", "season_figure", "landfill_figure"]


def silo_figure(stone: pd.DataFrame, deliveries: pd.DataFrame, colours: dict[str, str] | None = None) -> go.Figure:
    """The silo's CaCO3 by day with each limestone delivery marked at its stone's CaCO3
    (open markers: chosen for quality over cheaper lower-grade stone), above the gypsum's
    purity against each buyer's limit."""
    if stone.empty:
        return empty_figure("No stone quality in this scenario", 260, "Stone in the silo")
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.08,
                        subplot_titles=["Silo CaCO3 [%] and deliveries", "Gypsum purity [%] against buyers' limits"])
    fig.add_trace(go.Scatter(x=stone["date"], y=stone["silo_caco3_pct"], mode="lines", name="silo CaCO3",
                             line=dict(color="#2F4858", width=2),
                             hovertemplate="silo %{y:.2f} % CaCO3<extra></extra>"), row=1, col=1)
    for i, (party, part) in enumerate(deliveries.groupby("party", sort=False)):
        colour = (colours or {}).get(party, party_colour(i))
        fig.add_trace(go.Scatter(
            x=part["date"], y=part["caco3_pct"], mode="markers", name=party,
            marker=dict(color=colour, size=7 + 5 * (part["tonnes"] / max(deliveries["tonnes"].max(), 1.0)),
                        symbol=["circle-open" if q else "circle" for q in part["chosen_for_quality"]]),
            hovertext=[f"{d:%Y-%m-%d} {party}: {t:,.0f} t at {c:g} % CaCO3"
                       + (f"; chosen for quality over {w}" if q else "")
                       for d, t, c, q, w in zip(pd.to_datetime(part["date"]), part["tonnes"], part["caco3_pct"],
                                                part["chosen_for_quality"], part["instead_of"])],
            hoverinfo="text"), row=1, col=1)
    fig.add_trace(go.Scatter(x=stone["date"], y=stone["gypsum_purity_pct"], mode="lines", name="gypsum purity",
                             line=dict(color=STORE_COLOURS.get("gypsum", "#445"), width=2),
                             hovertemplate="purity %{y:.2f} %<extra></extra>"), row=2, col=1)
    for i, col in enumerate([c for c in stone.columns if c.endswith("min purity [%]")]):
        buyer = col[: -len(" min purity [%]")]
        fig.add_trace(go.Scatter(x=stone["date"], y=stone[col], mode="lines", name=f"{buyer} limit",
                                 line=dict(color=(colours or {}).get(buyer, party_colour(i + 3)), dash="dash", width=1.5),
                                 hovertemplate=f"{buyer}: min %{{y:g}} %<extra></extra>"), row=2, col=1)
    fig.update_layout(template=TEMPLATE, title="Stone in the silo and the gypsum it makes", height=520,
                      hovermode="x", margin=dict(t=60, b=40),
                      legend=dict(orientation="h", y=-0.06, yanchor="top", x=0, xanchor="left"))
    fig.update_annotations(font=dict(size=12, color=MUTED))
    # percentages to one decimal: the silo's CaCO3 may sit still to 1e-6 % (one stone)
    fig.update_yaxes(tickformat=".1f", row=1, col=1)
    fig.update_yaxes(tickformat=".1f", row=2, col=1)
    lo = min(float(stone["silo_caco3_pct"].min()), float(deliveries["caco3_pct"].min())
             if len(deliveries) else float("inf"))
    hi = max(float(stone["silo_caco3_pct"].max()), float(deliveries["caco3_pct"].max())
             if len(deliveries) else float("-inf"))
    if hi - lo < 1.0:  # keep at least a point of CaCO3 in view, so noise does not fill it
        mid = (hi + lo) / 2
        fig.update_yaxes(range=[mid - 0.75, mid + 0.75], row=1, col=1)
    return fig
