"""Pieces the views share: graphs, cards and plain HTML tables."""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd
from dash import dcc, html

GRAPH_CONFIG = {"displaylogo": False, "responsive": True, "displayModeBar": "hover",
                "modeBarButtonsToRemove": ["lasso2d", "select2d", "autoScale2d"],
                "toImageButtonOptions": {"format": "png", "scale": 2}}


def graph(graph_id: str, height: int = 320) -> dcc.Graph:
    return dcc.Graph(id=graph_id, config=GRAPH_CONFIG, style={"minHeight": f"{height}px"},
                     className="rp-graph")


def card(*children, wide: bool = False, title: str | None = None, card_id: str | None = None):
    kids = ([html.H4(title)] if title else []) + list(children)
    kwargs = {"id": card_id} if card_id else {}
    return html.Div(kids, className="rp-card wide" if wide else "rp-card", **kwargs)


def fmt_t(x) -> str:
    """Whole tonnes with thousands separators; a small negative rounds to 0, not "-0"."""
    return "–" if x is None or pd.isna(x) else f"{round(float(x)):,}"


def fmt_date(x) -> str:
    return "–" if x is None or pd.isna(x) else f"{pd.Timestamp(x):%a %d %b %Y}"


def fmt_money(x, currency: str = "") -> str:
    if x is None or pd.isna(x):
        return "–"
    return f"{x:,.0f} {currency}".strip()


def fmt_pct(x, digits: int = 0) -> str:
    return "–" if x is None or pd.isna(x) else f"{100 * x:.{digits}f} %"


def fmt_years(x) -> str:
    if x is None or pd.isna(x):
        return "–"
    if not np.isfinite(x):
        return "no limit at this rate"
    return f"{x:,.1f}"


Column = tuple[str, str, Callable[[object], str], bool]  # key, header, format, numeric


def table(frame: pd.DataFrame, columns: Sequence[Column], *, empty: str, table_id: str | None = None,
          row_class: Callable[[pd.Series], str] | None = None, limit: int = 60):
    """A plain HTML table of ``frame`` (first ``limit`` rows) or a line saying it is empty."""
    kwargs = {"id": table_id} if table_id else {}
    if frame is None or frame.empty:
        return html.Div(empty, className="rp-empty", **kwargs)
    head = html.Tr([html.Th(h, className="num" if num else None) for _, h, _, num in columns])
    rows = []
    for _, r in frame.head(limit).iterrows():
        rows.append(html.Tr([html.Td(f(r[k]), className="num" if num else None)
                             for k, _, f, num in columns],
                            className=row_class(r) if row_class else None))
    more = []
    if len(frame) > limit:
        more = [html.Div(f"… and {len(frame) - limit} more rows (all of them are in plan.xlsx)",
                         className="rp-empty")]
    return html.Div([html.Table([html.Thead(head), html.Tbody(rows)], className="rp-table"), *more],
                    **kwargs)
