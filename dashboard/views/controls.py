"""The side panel: scenario upload, what-if sliders, re-plan and download."""

from __future__ import annotations

import pandas as pd
from dash import dcc, html

#: Largest workbook the page accepts [bytes].
MAX_UPLOAD_BYTES = 10 * 1024 * 1024

UPLOAD = "upload"
UPLOAD_CHECKED = "upload-checked"
UPLOAD_MESSAGE = "upload-message"
SOURCE_LABEL = "source-label"
LOAD = "load-factor"
SULFUR = "sulfur-scale"
REMOVAL = "removal"
REMOVAL_RANGE = "removal-range"
ALLOWANCE_PRICE = "allowance-price"
OUTAGE_ON = "outage-on"
OUTAGE_RANGE = "outage-range"
OUTAGE_DATES = "outage-dates"
REPLAN = "replan-btn"
CANCEL = "cancel-btn"
RUN_BOX = "replan-box"
PROGRESS_TEXT = "replan-progress-text"
REPLAN_MESSAGE = "replan-message"
DOWNLOAD_BUTTON = "download-btn"
DOWNLOAD = "download"
DOWNLOAD_MESSAGE = "download-message"
PLAN_LABEL = "plan-label"

DEFAULT_OUTAGE_DAYS = 14


def outage_marks(dates: pd.DatetimeIndex) -> dict[int, str]:
    """Slider marks at the first day of each month (every other month past six)."""
    firsts = [i for i, d in enumerate(dates) if d.day == 1 or i == 0]
    step = 1 if len(firsts) <= 6 else 2
    return {i: f"{dates[i]:%b}" for k, i in enumerate(firsts) if k % step == 0}


def outage_settings(dates: pd.DatetimeIndex) -> dict:
    """Range, marks and a default window (two weeks, a fortnight in) for the rail outage."""
    n = len(dates)
    first = min(max(n // 6, 0), max(n - 1, 0))
    last = min(first + DEFAULT_OUTAGE_DAYS - 1, n - 1)
    return {"min": 0, "max": max(n - 1, 0), "marks": outage_marks(dates), "value": [first, last]}


#: Ends of the removal sliders [%].
REMOVAL_MIN, REMOVAL_MAX = 80, 99.9


def removal_range_value(removal_pct: float, removal_range=None) -> list[float]:
    """The removal-range slider's value: the scenario's range, else its fixed removal at
    both ends (a range of one value plans as that fixed removal)."""
    lo, hi = removal_range if removal_range is not None else (removal_pct, removal_pct)
    clip = lambda x: round(min(max(float(x), REMOVAL_MIN), REMOVAL_MAX), 1)  # noqa: E731
    return [clip(lo), clip(hi)]


def layout(removal_pct: float, dates: pd.DatetimeIndex, source_label: str, removal_range=None):
    outage = outage_settings(dates)
    return html.Aside(className="rp-side", children=[
        html.H3("Scenario"),
        html.Div(source_label, id=SOURCE_LABEL, className="rp-source"),
        dcc.Upload(id=UPLOAD, className="rp-upload", multiple=False, accept=".xlsx",
                   children=html.Div(["Drop a scenario workbook here or ", html.B("choose one"),
                                      html.Br(), "(.xlsx, at most 10 MB; read in memory)"])),
        dcc.Store(id=UPLOAD_CHECKED),
        html.Div(id=UPLOAD_MESSAGE, className="rp-msg"),

        html.H3("What if"),
        html.Label("Generation (load factor) [% of plan]", htmlFor=LOAD),
        dcc.Slider(id=LOAD, min=50, max=130, step=1, value=100,
                   marks={50: "50", 75: "75", 100: "100", 130: "130"},
                   tooltip={"placement": "bottom", "always_visible": False}),
        html.Label("Coal sulfur [% of the workbook's]", htmlFor=SULFUR),
        dcc.Slider(id=SULFUR, min=50, max=200, step=5, value=100,
                   marks={50: "50", 100: "100", 150: "150", 200: "200"},
                   tooltip={"placement": "bottom", "always_visible": False}),
        html.Label("Scrubber SO2 removal [%]", htmlFor=REMOVAL),
        dcc.Slider(id=REMOVAL, min=REMOVAL_MIN, max=REMOVAL_MAX, step=0.1,
                   value=round(float(removal_pct), 1),
                   marks={80: "80", 90: "90", 95: "95", 99.9: "99.9"},
                   tooltip={"placement": "bottom", "always_visible": False}),
        html.Label("SO2 removal the plan may choose, lowest to highest [%]", htmlFor=REMOVAL_RANGE),
        dcc.RangeSlider(id=REMOVAL_RANGE, min=REMOVAL_MIN, max=REMOVAL_MAX, step=0.1,
                        allowCross=False, value=removal_range_value(removal_pct, removal_range),
                        marks={80: "80", 90: "90", 95: "95", 99.9: "99.9"},
                        tooltip={"placement": "bottom", "always_visible": False}),
        html.Label("SO2 allowance price, buy and sell [per t of SO2; empty = the workbook's]",
                   htmlFor=ALLOWANCE_PRICE),
        dcc.Input(id=ALLOWANCE_PRICE, type="number", min=0, step="any", value=None,
                  debounce=True, placeholder="the workbook's", className="rp-input"),
        html.Span("Rail outage", className="rp-field-label"),
        dcc.Checklist(id=OUTAGE_ON, options=[{"label": " close every rail supplier on these days",
                                              "value": "on"}], value=[],
                      inputStyle={"marginRight": "4px"}, style={"fontSize": "12.5px"}),
        dcc.RangeSlider(id=OUTAGE_RANGE, step=1, allowCross=False, updatemode="drag",
                        tooltip={"placement": "bottom", "always_visible": False}, **outage),
        html.Div(id=OUTAGE_DATES, className="rp-outage-dates"),

        html.Div(id=RUN_BOX, className="rp-run", children=[
            html.Div(className="rp-buttons", children=[
                html.Button("Re-plan", id=REPLAN, className="rp-button", n_clicks=0),
                html.Button("Cancel", id=CANCEL, className="rp-button secondary", disabled=True,
                            n_clicks=0),
            ]),
            html.Div(className="rp-progress", children=[
                html.Progress(id="replan-progress"),
                html.Div("Re-planning…", id=PROGRESS_TEXT, className="rp-progress-text"),
            ]),
            html.Div(id=REPLAN_MESSAGE, className="rp-msg"),
        ]),

        html.H3("Plan"),
        html.Div(id=PLAN_LABEL, className="rp-source"),
        html.Div(className="rp-buttons", children=[
            html.Button("Download plan.xlsx", id=DOWNLOAD_BUTTON, className="rp-button secondary",
                        n_clicks=0),
        ]),
        html.Div(id=DOWNLOAD_MESSAGE, className="rp-msg"),
        dcc.Download(id=DOWNLOAD),
    ])
