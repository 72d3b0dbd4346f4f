"""Studies: the cases of a `reagentplan study`, each one's expected cost against its risk,
with the values it varied on hover.

The study is read from the folder given at start (``reagentplan dashboard --study DIR``)
or from a ``study.csv`` uploaded on the page; nothing is planned here.  The functions
below are pure (frames in, figure and table out); `register` wires the upload.
"""

from __future__ import annotations

import base64
import binascii
import html as html_text

import pandas as pd
import plotly.graph_objects as go
from dash import Input, Output, State, dcc, html

from reagentplan.settings import STUDY
from reagentplan.study.results import case_risk, pick_winner, read_study_table, varied_columns

from ..style import ACCENT, BAD, MUTED, STORE_COLOURS
from ..views.common import card, fmt_money, fmt_pct, graph, table
from .controls import MAX_UPLOAD_BYTES

UPLOAD = "study-upload"
MESSAGE = "study-message"
CHART = "study-chart"
TABLE = "study-table"
WINNER = "study-winner"
OUTPUTS = (CHART, TABLE, WINNER)
FIGURE_OUTPUTS = (CHART,)
#: The risk level assumed for a study.csv uploaded without its study.json [-].
DEFAULT_RISK_LEVEL = STUDY.risk_level
PLANNED = ("optimal", "feasible")


def _value(v) -> str:
    if v is None or (isinstance(v, float) and pd.isna(v)):
        return "none"
    if isinstance(v, float) and v.is_integer():
        return f"{int(v)}"
    return str(v)


def study_points(frame: pd.DataFrame, winner: int | None) -> pd.DataFrame:
    """One row per planned case: risk [%], expected and P90 cost, whether it won, and the
    hover text naming every varied value."""
    varied = varied_columns(frame)
    planned = frame[frame["status"].isin(PLANNED)].copy()
    planned["risk_pct"] = 100 * case_risk(planned)
    planned["winner"] = planned["case"] == winner
    planned["hover"] = [
        "<br>".join([f"<b>case {int(r['case'])}</b>" + (" (winner)" if r["winner"] else "")]
                    + [f"{html_text.escape(str(c))} = {html_text.escape(_value(r[c]))}"
                       for c in varied]
                    + [f"expected cost {r['expected_cost']:,.0f}",
                       f"P10-P90 {r['cost_p10']:,.0f} to {r['cost_p90']:,.0f}",
                       f"risk {r['risk_pct']:.1f} %"])
        for _, r in planned.iterrows()]
    return planned


def study_figure(points: pd.DataFrame, currency: str = "", risk_level: float | None = None
                 ) -> go.Figure:
    """Expected cost against risk, one marker per case, the P10-P90 cost as a bar; the
    winner in the accent colour and the risk level as a line."""
    from ..figures import TEMPLATE, empty_figure

    if points.empty:
        return empty_figure("No planned case to show", 420, "Cases: expected cost against risk")
    fig = go.Figure()
    for won, colour, name in ((False, STORE_COLOURS.get("limestone", MUTED), "case"),
                              (True, ACCENT, "winner")):
        p = points[points["winner"] == won]
        if p.empty:
            continue
        fig.add_trace(go.Scatter(
            x=p["risk_pct"], y=p["expected_cost"], mode="markers+text", name=name,
            text=[str(int(c)) for c in p["case"]], textposition="top center",
            marker=dict(size=14 if won else 10, color=colour, symbol="diamond" if won else "circle",
                        line=dict(width=1, color="#ffffff")),
            error_y=dict(type="data", symmetric=False, array=p["cost_p90"] - p["expected_cost"],
                         arrayminus=p["expected_cost"] - p["cost_p10"], color=colour, thickness=1),
            hovertext=p["hover"], hoverinfo="text"))
    if risk_level is not None:
        fig.add_vline(x=100 * risk_level, line=dict(color=BAD, dash="dash", width=1),
                      annotation_text=f"risk level {100 * risk_level:g} %",
                      annotation_position="top right")
    fig.update_layout(template=TEMPLATE, height=460, title="Cases: expected cost against risk",
                      xaxis_title="risk: highest daily chance of breaking a store limit [%]",
                      yaxis_title=f"expected cost over the futures [{currency}]".replace(" []", ""),
                      legend=dict(orientation="h", y=-0.2))
    return fig


def content(frame: pd.DataFrame | None, meta: dict | None = None) -> dict:
    """The view's figure, table and winner line for a study table."""
    meta = meta or {}
    if frame is None:
        from ..figures import empty_figure

        return {CHART: empty_figure("Load a study: reagentplan dashboard --study DIR, or drop "
                                    "a study.csv here", 420, "Cases: expected cost against risk"),
                TABLE: html.Div("No study loaded.", className="rp-empty"), WINNER: ""}
    risk_level = float(meta.get("risk_level", DEFAULT_RISK_LEVEL))
    currency = meta.get("currency", "")
    if "winner" in meta:
        winner, reason = meta.get("winner"), meta.get("winner_reason", "")
    else:
        w = pick_winner(frame, risk_level, currency)
        winner, reason = w.case, w.reason + f" (risk level {100 * risk_level:g} % assumed)"
    points = study_points(frame, winner)
    varied = varied_columns(frame)
    shown = frame.assign(risk=case_risk(frame))
    columns = ([("case", "Case", str, True)]
               + [(c, c, _value, False) for c in varied]
               + [("status", "Status", str, False),
                  ("expected_cost", f"Expected cost {currency}".strip(), fmt_money, True),
                  ("cost_p90", f"P90 cost {currency}".strip(), fmt_money, True),
                  ("risk", "Risk", lambda x: fmt_pct(x, 1), True),
                  ("trains", "Trains", _value, True), ("trucks", "Trucks", _value, True)])
    text = ("Winner: " + reason) if winner is not None else ("No winner: " + reason)
    return {CHART: study_figure(points, currency, risk_level),
            TABLE: table(shown, columns, empty="The study has no cases.", limit=200,
                         row_class=lambda r: "rp-row-win" if r["case"] == winner else ""),
            WINNER: text}


def layout(frame: pd.DataFrame | None = None, meta: dict | None = None):
    body = content(frame, meta)
    chart = graph(CHART, 460)
    chart.figure = body[CHART]
    return html.Div(className="rp-view", children=[
        html.P("The cases of a study (reagentplan study): each one's expected cost over the "
               "shared futures against its risk, the highest daily chance of limestone below "
               "safety stock or a store over capacity. Hover a case for the values it varied.",
               className="rp-view-intro"),
        dcc.Upload(id=UPLOAD, className="rp-upload", max_size=MAX_UPLOAD_BYTES, multiple=False,
                   children=html.Div(["Drop a study.csv here, or ", html.A("choose one")])),
        html.Div(id=MESSAGE, className="rp-msg"),
        html.Div(body[WINNER], id=WINNER, className="rp-view-intro"),
        html.Div(className="rp-grid", children=[
            card(chart, wide=True),
            card(html.Div(body[TABLE], id=TABLE), title="Cases", wide=True),
        ]),
    ])


def parse_study_upload(contents: str | None, filename: str | None):
    """``(frame or None, message, ok)`` for an uploaded study.csv (a data URL)."""
    name = "".join(ch for ch in str(filename or "study.csv").replace("\\", "/").split("/")[-1]
                   if ch.isprintable())[:120]
    if not contents:
        return None, "", False
    _, _, b64 = contents.partition(",") if "," in contents else ("", "", contents)
    if len(b64) * 3 // 4 > MAX_UPLOAD_BYTES + 3:
        return None, f"{name} is over {MAX_UPLOAD_BYTES // 2**20} MB.", False
    try:
        raw = base64.b64decode(b64, validate=True)
        frame, _ = read_study_table(raw)
    except (binascii.Error, ValueError) as exc:
        return None, f"{name}: {exc}", False
    return frame, f"{name}: {len(frame)} cases.", True


def register(app) -> None:
    """Wire the upload: read the table (library), draw it (this module)."""

    @app.callback(Output(CHART, "figure"), Output(TABLE, "children"), Output(WINNER, "children"),
                  Output(MESSAGE, "children"), Output(MESSAGE, "className"),
                  Input(UPLOAD, "contents"), State(UPLOAD, "filename"), prevent_initial_call=True)
    def _study_upload(contents, filename):
        frame, message, ok = parse_study_upload(contents, filename)
        if not ok:
            from dash import no_update

            return no_update, no_update, no_update, message, "rp-msg bad"
        body = content(frame)
        return body[CHART], body[TABLE], body[WINNER], message, "rp-msg good"


__all__ = ["layout", "content", "study_points", "study_figure", "parse_study_upload", "register"]
