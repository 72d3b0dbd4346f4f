"""The record: the plan version in force, plan against book against survey, recorded
movements against the plan, what changed since the last plan, and uploads of actuals
(through `reagentplan record`'s own validation and conflict handling)."""

from __future__ import annotations

import pandas as pd
from dash import dcc, html

from .. import record_figures
from .common import GRAPH_CONFIG, card, fmt_date, fmt_t, table

IN_FORCE = "record-in-force"
STORES = "record-stores"
WEEKLY = "record-weekly"
CHANGES = "record-changes"
DRIFT = "record-drift"
CALIBRATION = "record-calibration"
UPLOAD = "record-upload"
REPLACE = "record-replace"
UPLOAD_MESSAGE = "record-upload-message"
IMPORTS = "record-imports"
OUTPUTS = (IN_FORCE, STORES, WEEKLY, CHANGES, DRIFT, CALIBRATION, IMPORTS)
FIGURE_OUTPUTS = (WEEKLY,)


def layout(uploads: bool = True):
    """The tab's components, to be filled by `content`.  ``uploads`` False: read-only (the
    fleet dashboard), no upload card; the intro says where actuals are recorded instead."""
    where = ("Record actuals here or with `reagentplan record`: the same checks, the same conflict rules."
             if uploads else "Read-only here: record actuals with `reagentplan record` or in the "
             "station's own dashboard (`reagentplan dashboard STATION.xlsx --db URL`).")
    upload = [html.Div(className="rp-grid", children=[
        card(dcc.Upload(id=UPLOAD, className="rp-upload", multiple=False, accept=".xlsx,.csv",
                        children=html.Div(["Drop a record file (.xlsx with record sheets, or "
                                           "arrivals.csv, ...) or ", html.A("choose one")])),
             dcc.Checklist(id=REPLACE, options=[{"label": " replace values already recorded "
                                                 "(old values kept in the audit trail)", "value": "replace"}],
                           value=[]),
             html.Div(id=UPLOAD_MESSAGE, className="rp-msg"),
             title="Record actuals", wide=True),
    ])] if uploads else []
    return html.Div(className="rp-view", children=[
        html.P("What happened against what was planned: surveys (points), the book level rolled "
               "from them, the plan in force each day; recorded arrivals and shipments per week; "
               "what changed between the last two plans. " + where, className="rp-view-intro"),
        html.Div(id=IN_FORCE, className="rp-headlines"),
        *upload,
        html.Div(id=STORES, className="rp-grid"),
        html.Div(className="rp-grid", style={"marginTop": "14px"}, children=[
            card(dcc.Graph(id=WEEKLY, config=GRAPH_CONFIG, className="rp-graph"), wide=True),
            card(html.Div(id=CHANGES), title="Changed since the last plan", wide=True),
            card(html.Div(id=DRIFT), title="Book against survey (the balance's drift)", wide=True),
            card(html.Div(id=CALIBRATION), title="What the record teaches the balance (fitted factors, "
                                                  "90 % intervals)", wide=True),
            card(html.Div(id=IMPORTS), title="Who recorded what (newest first)", wide=True),
        ]),
    ])


def filled(ov, uploads: bool = True):
    """`layout` with `content` of the overview ``ov`` in place (a page made whole, as the
    fleet dashboard shows a picked station's record)."""
    page = layout(uploads)
    body = content(ov)
    for key in OUTPUTS:
        setattr(page[key], "figure" if key in FIGURE_OUTPUTS else "children", body[key])
    return page


def content(ov) -> dict:
    f = ov.in_force
    if f is None:
        head = html.Div("No plan version in the record yet: run `reagentplan plan WORKBOOK --db URL "
                        "--as-of DATE`.", className="rp-headline")
    else:
        head = html.Div(className="rp-headline", id="record-plan-in-force", children=[
            html.Div(f"Plan version {f['id']} in force", className="store"),
            html.Div(f"as of {fmt_date(f['as_of'])}, {f['horizon_days']} days from {fmt_date(f['start_date'])}",
                     className="when"),
            html.Div(f"made {f['created_at']:%Y-%m-%d %H:%M} UTC by {f.get('created_by') or 'unknown'}; "
                     f"total cost {fmt_t(f['total_cost'])}", className="detail")])
    pva = ov.review.plan_vs_actual
    stores = [card(dcc.Graph(id=f"record-store-{s}", config=GRAPH_CONFIG, className="rp-graph",
                             figure=record_figures.record_store_figure(pva, s)))
              for s in ("limestone", "gypsum", "fly_ash", "bottom_ash")
              if not pva.empty and s in set(pva["store"])]
    if ov.compared is None:
        changes = html.Div("One plan version or none: nothing to compare yet.", className="rp-empty")
    else:
        a, b = ov.compared
        counts = ov.changes.groupby(["direction", "change"]).size() if len(ov.changes) else pd.Series(dtype=int)
        summary = "; ".join(f"{'orders' if d == 'in' else 'haul-outs'} {c}: {n}" for (d, c), n in counts.items())
        changes = html.Div([
            html.Div(f"Plan {a} → plan {b}: {summary or 'no order changed'}.", id="record-change-summary"),
            html.H5("Act on these first (this week)"),
            table(ov.act_first, [
                ("change", "Change", str, False), ("lane", "Lane", str, False),
                ("date_before", "Was on", fmt_date, False),
                ("date", "Day", fmt_date, False), ("loads_before", "Loads before", str, True),
                ("loads_after", "Loads after", str, True), ("order_by", "Order by", fmt_date, False)],
                empty="Nothing to place, cancel or move this week.", table_id="record-act-first", limit=15)])
    drift = table(ov.review.by_store, [
        ("store", "Store", str, False), ("surveys", "Surveys", str, True),
        ("mean_drift_t", "Mean book − survey [t]", fmt_t, True),
        ("mean_abs_drift_t", "Mean |book − survey| [t]", fmt_t, True),
        ("drift_t_per_day", "Drift [t/day]", lambda x: f"{x:+,.1f}", True),
        ("drift_pct_of_flow", "% of tonnes used or made", lambda x: f"{x:+.1f} %", True)],
        empty="No store has two surveys yet.", table_id="record-drift-table")
    imports = table(ov.imports, [
        ("id", "Import", str, True), ("recorded_at", "When (UTC)", lambda x: f"{x:%Y-%m-%d %H:%M}", False),
        ("recorded_by", "Recorded by", str, False), ("file_name", "File", str, False),
        ("added", "Rows added", str, True), ("replaced", "Replaced", str, True)],
        empty="Nothing recorded yet.", table_id="record-imports-table", limit=20)
    return {IN_FORCE: [head], STORES: stores, WEEKLY: record_figures.weekly_figure(ov.weekly),
            CHANGES: changes, DRIFT: drift, CALIBRATION: calibration(ov), IMPORTS: imports}


def _factor(key: str):
    return (lambda x: "–" if pd.isna(x) else f"{x:.3f}") if key == "ca_s_ratio" else \
        (lambda x: "–" if pd.isna(x) else f"{x:.1f}")


def calibration(ov):
    """The factors fitted to the surveys against the workbook's, and the drift they
    explain per store (computed by `reagentplan.record.calibrate`)."""
    cal = getattr(ov, "calibration", None)
    if cal is None:
        return html.Div(f"No calibration: {ov.calibration_message or 'no surveys'}", className="rp-empty",
                        id="record-calibration-table")
    view = cal.view()
    view["interval"] = [f"{_factor(k)(lo)} to {_factor(k)(hi)}" if pd.notna(lo) else "–"
                        for k, lo, hi in zip(view["key"], view["low"], view["high"])]
    for c in ("workbook_value", "fitted_value"):
        view[c] = [_factor(k)(v) for k, v in zip(view["key"], view[c])]
    factors = table(view, [
        ("key", "Factor", str, False), ("workbook_value", "Workbook", str, True),
        ("fitted_value", "Fitted", str, True), ("interval", "90 % interval", str, True),
        ("status", "", str, False)],
        empty="No factor.", table_id="record-calibration-table",
        row_class=lambda r: "soon" if r["status"] == "contradicts the workbook" else "")
    drift = table(cal.drift, [
        ("store", "Store", str, False), ("intervals", "Survey intervals", str, True),
        ("drift_before_pct_of_flow", "Drift, workbook's factors", lambda x: f"{x:+.1f} %", True),
        ("drift_after_pct_of_flow", "Drift, fitted factors", lambda x: f"{x:+.1f} %", True),
        ("drift_before_t_per_day", "Before [t/day]", lambda x: f"{x:+,.1f}", True),
        ("drift_after_t_per_day", "After [t/day]", lambda x: f"{x:+,.1f}", True)],
        empty="No store has two surveys.", table_id="record-calibration-drift")
    return html.Div([
        html.Div(f"Surveys from {cal.first:%Y-%m-%d} to {cal.last:%Y-%m-%d}; plan with the fitted values: "
                 "`reagentplan plan WORKBOOK --db URL --as-of DATE --calibrated`.", className="rp-empty"),
        factors, html.H5("Book against survey, % of the tonnes used or made"), drift])
