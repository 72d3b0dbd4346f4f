"""What the page does when something changes.

The work of each callback is a plain function here, testable without a browser or a
server; `register` wires them to the page.  They look things up in the `PlanStore`,
call the library (`load_scenario`, `apply_whatif`, `run_plan`, the plan workbook writer)
and hand the views what to draw; nothing is planned or balanced here.
"""

from __future__ import annotations

import base64
import binascii
import dataclasses
import os
import tempfile
import time
from pathlib import Path

from dash import Input, Output, State, dcc, html, no_update
from dash.exceptions import PreventUpdate

from reagentplan.errors import ScenarioError
from reagentplan.settings import PlanSettings
from reagentplan.whatif import apply_whatif, describe_whatif

from .store import PlanStore
from .views import controls as C
from .views import coordinator, plant, sales
from .views.common import fmt_money

VIEWS = (coordinator, plant, sales)
UPLOAD_CAP_MB = C.MAX_UPLOAD_BYTES // 2**20


# --------------------------------------------------------------------------- drawing


def get_run(store: PlanStore, plan_id):
    entry = store.get("run", plan_id)
    if entry is None:
        raise PreventUpdate
    return entry


def view_outputs(view, run) -> list:
    """The view's content in the order of its ``OUTPUTS``."""
    content = view.content(run)
    return [content[k] for k in view.OUTPUTS]


class DrawnViews:
    """The last views drawn, by (view, plan id): a plan never changes once stored, so
    twenty sessions looking at one plan draw each view once.  A view being drawn is
    drawn by one request while the others for it wait (no stampede after a re-plan).
    At most ``size`` views are kept."""

    def __init__(self, size: int = 24):
        import threading
        from collections import OrderedDict

        self.size = size
        self._done: OrderedDict[tuple, list] = OrderedDict()
        self._busy: dict[tuple, object] = {}
        self._lock = threading.Lock()

    def get(self, view, plan_id, draw):
        import threading

        key = (view.__name__, plan_id)
        while True:
            with self._lock:
                if key in self._done:
                    self._done.move_to_end(key)
                    return self._done[key]
                busy = self._busy.get(key)
                if busy is None:
                    busy = self._busy[key] = threading.Event()
                    mine = True
                else:
                    mine = False
            if not mine:
                busy.wait(120)
                continue
            try:
                out = draw()
                with self._lock:
                    self._done[key] = out
                    while len(self._done) > self.size:
                        self._done.popitem(last=False)
                return out
            finally:
                with self._lock:
                    self._busy.pop(key, None)
                busy.set()


def _kpi(label: str, value: str, tone: str = "", kpi_id: str | None = None):
    kwargs = {"id": kpi_id} if kpi_id else {}
    return html.Div([html.Div(label, className="k"), html.Div(value, className="v")],
                    className=f"rp-kpi {tone}".strip(), **kwargs)


def header_content(run, meta: dict) -> list:
    """Station and horizon, the headline numbers, and the plan's label."""
    plan = run.plan
    scn = plan.scenario
    s = plan.summary()
    cur = s.get("currency", "")
    p = scn.plant
    title = p.name
    sub = (f"{p.horizon_days} days from {p.start_date:%d %b %Y} to {p.end_date:%d %b %Y} · "
           f"{len(scn.units)} unit{'s' if len(scn.units) != 1 else ''} · plan of "
           f"{meta.get('source', scn.source_name or 'the workbook')}")
    # the firm window's: the outlook's are re-planned before they come (listed on the plant view)
    firm = [b for b in s["breaches"] if b.get("window") != "outlook"]
    store_breaches = [b for b in firm if b["store"] in scn.storage]
    contract_breaches = len(firm) - len(store_breaches)
    saving = s["baseline_total_cost"] - s["total_cost"]
    at_risk = len(run.risk.top) if run.risk is not None else None
    kpis = [
        _kpi("Plan cost", fmt_money(s["total_cost"], cur), kpi_id="kpi-cost"),
        _kpi("Against reorder-point", ("saves " if saving >= 0 else "costs ") + fmt_money(abs(saving), cur),
             "good" if saving >= 0 else "warn"),
        _kpi("Store breaches", f"{len(store_breaches)}", "warn" if store_breaches else "good"),
        _kpi("Contract shortfalls", f"{contract_breaches}", "warn" if contract_breaches else "good"),
        _kpi("Stores at risk", "–" if at_risk is None else f"{at_risk}",
             "warn" if at_risk else "good"),
        _kpi("Futures", f"{run.risk.n_futures}" if run.risk is not None else "none"),
    ]
    made = meta.get("made", "")
    secs = meta.get("seconds")
    label = [html.Div(f"What-if: {meta.get('whatif', 'as the workbook says')}", id="plan-whatif"),
             html.Div(f"solver {s['solver']}: {s['status']}"
                      + ((f", proven within {100 * s['gap']:.2f} % of the best possible cost"
                          if not scn.quality_coupled else
                          f", within {100 * s['gap']:.2f} % of a lower bound on every plan of the mixed silo"
                          + ("" if (s.get("silo") or {}).get("settled") else " (its successive solves had not settled)"))
                         if s["gap"] is not None else "")
                      + ("; the wall-clock safety net cut a solve short: a re-run may differ"
                         if s.get("clock_cut") else "")
                      + (f", made {made} in {secs:.1f} s" if secs is not None else ""))]
    return [title, sub, kpis, label]


# --------------------------------------------------------------------------- upload

UPLOAD_CHECK_JS = """
function(contents, filename) {
    if (!contents) { return window.dash_clientside.no_update; }
    var comma = contents.indexOf(',');
    var b64 = comma >= 0 ? contents.length - comma - 1 : contents.length;
    var bytes = Math.floor(b64 * 3 / 4);
    if (bytes > %d) { return {filename: filename, too_big: bytes}; }
    return {filename: filename, contents: contents};
}
""" % C.MAX_UPLOAD_BYTES


def _clean_name(filename) -> str:
    """The upload's name for display only (never used as a path)."""
    name = os.path.basename(str(filename or "upload.xlsx").replace("\\", "/")).strip()
    return "".join(ch for ch in name if ch.isprintable())[:120] or "upload.xlsx"


def parse_upload(data: dict | None):
    """Read an upload in memory: ``(scenario or None, message, ok)``.

    ``data`` is ``{"filename", "contents"}`` (a data URL) or ``{"filename", "too_big"}``
    from the page's size check.  A bad workbook gives the loader's own report.
    """
    from reagentplan.scenario import load_scenario

    if not data:
        raise PreventUpdate
    name = _clean_name(data.get("filename"))
    if data.get("too_big"):
        size = float(data["too_big"]) / 2**20
        return None, (f"{name} is {size:.1f} MB; the dashboard reads workbooks of at most "
                      f"{UPLOAD_CAP_MB} MB. Remove pictures or unrelated sheets."), False
    contents = data.get("contents") or ""
    _, _, b64 = contents.partition(",") if "," in contents else ("", "", contents)
    if len(b64) * 3 // 4 > C.MAX_UPLOAD_BYTES + 3:
        return None, f"{name} is over {UPLOAD_CAP_MB} MB, the most the dashboard reads.", False
    try:
        raw = base64.b64decode(b64, validate=True)
    except (binascii.Error, ValueError):
        return None, f"{name} could not be read (the upload was damaged); try again.", False
    if len(raw) > C.MAX_UPLOAD_BYTES:
        return None, f"{name} is over {UPLOAD_CAP_MB} MB, the most the dashboard reads.", False
    try:
        scenario = load_scenario(raw)
    except ScenarioError as exc:
        return None, f"{name}: {exc.report()}", False
    scenario = dataclasses.replace(scenario, source_name=name)
    p = scenario.plant
    unusual = ""
    if scenario.warnings:
        n = len(scenario.warnings)
        unusual = (f" {n} value{'s are' if n != 1 else ' is'} unusual; check before relying on "
                   "the plan: " + " | ".join(str(w) for w in scenario.warnings[:5])
                   + (" | ..." if n > 5 else ""))
    return scenario, (f"{name}: the workbook is sound ({p.name}, {p.horizon_days} days from "
                      f"{p.start_date:%Y-%m-%d}). Press Re-plan to plan it.{unusual}"), True


def accept_upload(store: PlanStore, data: dict | None):
    """Outputs of the upload callback: scenario id, message, message class."""
    scenario, message, ok = parse_upload(data)
    if not ok:
        return no_update, message, "rp-msg bad"
    sid = store.put("scenario", scenario, {"source": scenario.source_name})
    return sid, message, "rp-msg good"


def scenario_controls(store: PlanStore, scenario_id):
    """Slider settings for a scenario: removal, outage range max / marks / value, label,
    removal range, allowance price (empty: the workbook's)."""
    entry = store.get("scenario", scenario_id)
    if entry is None:
        raise PreventUpdate
    scn = entry.value
    outage = C.outage_settings(scn.dates)
    label = (f"{entry.meta.get('source', scn.source_name)} · {scn.plant.name} · "
             f"{scn.plant.horizon_days} days from {scn.plant.start_date:%Y-%m-%d}")
    return (round(float(scn.scrubber.removal_pct), 1), outage["max"], outage["marks"],
            outage["value"], label,
            C.removal_range_value(scn.scrubber.removal_pct, scn.scrubber.removal_range), None)


def outage_text(store: PlanStore, scenario_id, outage_on, outage_range) -> str:
    entry = store.get("scenario", scenario_id)
    if entry is None or not outage_range:
        return ""
    dates = entry.value.dates
    try:
        a, b = sorted(int(min(max(x, 0), len(dates) - 1)) for x in outage_range)
    except (TypeError, ValueError):
        return ""
    span = f"{dates[a]:%a %d %b} to {dates[b]:%a %d %b %Y} ({b - a + 1} days)"
    return f"Rail closed {span}" if outage_on and "on" in outage_on else f"Not applied: {span}"


# --------------------------------------------------------------------------- re-plan


def whatif_kwargs(scenario, load_pct, sulfur_pct, removal, outage_on, outage_range,
                  removal_range=None, allowance_price=None) -> dict:
    """The sliders as `apply_whatif` arguments (removal only when moved off the
    workbook's value; ``removal_range`` only when moved off the workbook's range, or its
    fixed removal; ``allowance_price`` only when a price is typed)."""
    kwargs: dict = {"load_factor": float(load_pct if load_pct is not None else 100) / 100,
                    "sulfur_scale": float(sulfur_pct if sulfur_pct is not None else 100) / 100,
                    "removal_pct": None, "rail_outage": None}
    base = round(float(scenario.scrubber.removal_pct), 1)
    if removal is not None and abs(float(removal) - base) > 1e-9:
        kwargs["removal_pct"] = float(removal)
    if outage_on and "on" in outage_on and outage_range:
        dates = scenario.dates
        a, b = (int(min(max(x, 0), len(dates) - 1)) for x in outage_range)
        kwargs["rail_outage"] = (dates[min(a, b)].date(), dates[max(a, b)].date())
    if removal_range:
        lo, hi = sorted(float(x) for x in removal_range)
        was = C.removal_range_value(scenario.scrubber.removal_pct, scenario.scrubber.removal_range)
        if abs(lo - was[0]) > 1e-9 or abs(hi - was[1]) > 1e-9:
            kwargs["removal_range"] = (lo, hi)
    if allowance_price is not None and str(allowance_price).strip() != "":
        kwargs["allowance_price"] = float(allowance_price)
    return kwargs


def replan(store: PlanStore, options: PlanSettings, scenario_id, load_pct, sulfur_pct, removal,
           outage_on, outage_range, set_progress=None, removal_range=None, allowance_price=None):
    """Apply the what-if, plan it with ``options`` (those of the startup plan), store the
    run: ``(plan id, message, message class)``."""
    say = set_progress or (lambda _text: None)
    entry = store.get("scenario", scenario_id)
    if entry is None:
        return no_update, "That scenario is no longer on the server; upload it again.", "rp-msg bad"
    try:
        kwargs = whatif_kwargs(entry.value, load_pct, sulfur_pct, removal, outage_on, outage_range,
                               removal_range, allowance_price)
        say("Applying the what-if to the scenario…")
        changed = apply_whatif(entry.value, **kwargs)
        say(f"Sampling {options.futures} futures, solving the plan and replaying it…"
            if options.futures else "Solving the plan…")
        t0 = time.perf_counter()
        from reagentplan.pipeline import run_plan

        run = run_plan(changed, options)
        seconds = time.perf_counter() - t0
    except ScenarioError as exc:
        return no_update, exc.report(), "rp-msg bad"
    except (TypeError, ValueError) as exc:
        return no_update, f"The what-if cannot be applied: {exc}", "rp-msg bad"
    say("Storing the plan…")
    text = describe_whatif(**kwargs)
    meta = {"source": entry.meta.get("source", changed.source_name), "whatif": text,
            "made": time.strftime("%H:%M:%S"), "seconds": seconds}
    pid = store.put("run", run, meta)
    return pid, f"Re-planned in {seconds:.1f} s: {text}.", "rp-msg good"


# --------------------------------------------------------------------------- download


def plan_workbook_bytes(run) -> bytes:
    """The plan workbook (`reagentplan.output.plan_workbook.write_plan_workbook`) as bytes,
    written to a private temporary folder and read back."""
    from reagentplan.output import write_plan_workbook

    with tempfile.TemporaryDirectory(prefix="reagentplan-download-") as tmp:
        path = Path(tmp) / "plan.xlsx"
        write_plan_workbook(run, path)
        return path.read_bytes()


def download(store: PlanStore, plan_id):
    """Outputs of the download button: the file, and a message."""
    entry = get_run(store, plan_id)
    try:
        data = plan_workbook_bytes(entry.value)
    except ImportError:
        return no_update, "This installation has no plan workbook writer yet.", "rp-msg bad"
    return dcc.send_bytes(data, "plan.xlsx"), "plan.xlsx is ready (see your downloads).", "rp-msg good"


# --------------------------------------------------------------------------- wiring


def register(app, store: PlanStore, options: PlanSettings, manager) -> None:
    """Wire the callbacks to ``app``."""

    drawn = DrawnViews()
    for view in VIEWS:
        outputs = [Output(k, "figure" if k in view.FIGURE_OUTPUTS else "children")
                   for k in view.OUTPUTS]

        def _draw(plan_id, _view=view):
            return drawn.get(_view, plan_id, lambda: view_outputs(_view, get_run(store, plan_id).value))

        app.callback(outputs, Input("plan-id", "data"), prevent_initial_call=True)(_draw)

    @app.callback(Output("header-title", "children"), Output("header-sub", "children"),
                  Output("header-kpis", "children"), Output(C.PLAN_LABEL, "children"),
                  Input("plan-id", "data"), prevent_initial_call=True)
    def _header(plan_id):
        entry = get_run(store, plan_id)
        return header_content(entry.value, entry.meta)

    app.clientside_callback(UPLOAD_CHECK_JS, Output(C.UPLOAD_CHECKED, "data"),
                            Input(C.UPLOAD, "contents"), State(C.UPLOAD, "filename"),
                            prevent_initial_call=True)

    @app.callback(Output("scenario-id", "data"), Output(C.UPLOAD_MESSAGE, "children"),
                  Output(C.UPLOAD_MESSAGE, "className"), Input(C.UPLOAD_CHECKED, "data"),
                  prevent_initial_call=True)
    def _upload(data):
        return accept_upload(store, data)

    @app.callback(Output(C.REMOVAL, "value"), Output(C.OUTAGE_RANGE, "max"),
                  Output(C.OUTAGE_RANGE, "marks"), Output(C.OUTAGE_RANGE, "value"),
                  Output(C.SOURCE_LABEL, "children"), Output(C.REMOVAL_RANGE, "value"),
                  Output(C.ALLOWANCE_PRICE, "value"), Input("scenario-id", "data"),
                  prevent_initial_call=True)
    def _controls(scenario_id):
        return scenario_controls(store, scenario_id)

    @app.callback(Output(C.OUTAGE_DATES, "children"), Input(C.OUTAGE_RANGE, "value"),
                  Input(C.OUTAGE_ON, "value"), State("scenario-id", "data"))
    def _outage(outage_range, outage_on, scenario_id):
        return outage_text(store, scenario_id, outage_on, outage_range)

    @app.callback(Output("plan-id", "data"), Output(C.REPLAN_MESSAGE, "children"),
                  Output(C.REPLAN_MESSAGE, "className"),
                  Input(C.REPLAN, "n_clicks"),
                  State("scenario-id", "data"), State(C.LOAD, "value"), State(C.SULFUR, "value"),
                  State(C.REMOVAL, "value"), State(C.OUTAGE_ON, "value"), State(C.OUTAGE_RANGE, "value"),
                  State(C.REMOVAL_RANGE, "value"), State(C.ALLOWANCE_PRICE, "value"),
                  background=True, manager=manager, interval=250, prevent_initial_call=True,
                  progress=[Output(C.PROGRESS_TEXT, "children")],
                  running=[(Output(C.REPLAN, "disabled"), True, False),
                           (Output(C.CANCEL, "disabled"), False, True),
                           (Output(C.RUN_BOX, "className"), "rp-run busy", "rp-run"),
                           (Output(C.DOWNLOAD_BUTTON, "disabled"), True, False)],
                  cancel=[Input(C.CANCEL, "n_clicks")])
    def _replan(set_progress, n_clicks, scenario_id, load, sulfur, removal, outage_on, outage_range,
                removal_range, allowance_price):
        if not n_clicks:
            raise PreventUpdate
        return replan(store, options, scenario_id, load, sulfur, removal, outage_on, outage_range,
                      set_progress=lambda text: set_progress((text,)),
                      removal_range=removal_range, allowance_price=allowance_price)

    @app.callback(Output(C.DOWNLOAD, "data"), Output(C.DOWNLOAD_MESSAGE, "children"),
                  Output(C.DOWNLOAD_MESSAGE, "className"), Input(C.DOWNLOAD_BUTTON, "n_clicks"),
                  State("plan-id", "data"), prevent_initial_call=True)
    def _download(n_clicks, plan_id):
        if not n_clicks:
            raise PreventUpdate
        return download(store, plan_id)


__all__ = ["register", "parse_upload", "accept_upload", "whatif_kwargs", "replan",
           "header_content", "view_outputs", "download", "plan_workbook_bytes", "scenario_controls",
           "outage_text"]
