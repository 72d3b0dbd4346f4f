"""The Dash app: `create_app` plans the scenario it is given (or the demo station) once,
keeps the result on the server and serves the three views around it.

Usage::

    reagentplan dashboard [WORKBOOK] [--host H] [--port P]

or, from Python::

    from dashboard.app import create_app, serve
    serve(create_app("station.xlsx"), "127.0.0.1", 8050)
"""

from __future__ import annotations

import atexit
import os
import shutil
import signal
import sys
import tempfile
import threading
import time
from pathlib import Path
from types import SimpleNamespace

from dash import Dash, dcc, html

from reagentplan import CAUTION, __version__

from . import callbacks
from .callbacks import PlanOptions
from .security import DEFAULT_HOST, install_basic_auth, install_headers
from .store import PlanStore
from .style import INDEX_STRING
from .views import controls, coordinator, plant, sales

#: Largest request body the server takes [bytes]: a 10 MB upload as base64, and room.
MAX_REQUEST_BYTES = 16 * 1024 * 1024
DEFAULT_PORT = 8050

TABS = (
    ("coordinator", "Deliveries & orders", coordinator),
    ("plant", "Stores & risk", plant),
    ("sales", "Byproduct sales", sales),
)


def _load(workbook, work_dir: Path, demo_days: int):
    """The scenario to start with, and the name the page shows for it."""
    from reagentplan.scenario import load_scenario

    if workbook is None:
        from demo.build_demo import build_demo_workbook

        path = build_demo_workbook(work_dir / "demo_station.xlsx", horizon_days=demo_days)
        return load_scenario(path), "the demo station"
    if isinstance(workbook, (bytes, bytearray)):
        return load_scenario(bytes(workbook)), "the given workbook"
    return load_scenario(workbook), Path(workbook).name


def build_layout(run, meta: dict, scenario_id: str, plan_id: str, record_overview=None):
    """The page, already filled with the startup plan (no round trip on first load);
    with ``record_overview`` (a `reagentplan.record.overview.Overview`), a record tab."""
    from .views import record as record_view

    scn = run.plan.scenario
    all_tabs = TABS + ((("record", "Record & changes", record_view),) if record_overview is not None else ())
    tabs = [dcc.Tab(label=label, value=value, className="rp-tab", selected_className="rp-tab--selected",
                    children=view.layout(), id=f"tab-{value}")
            for value, label, view in all_tabs]
    page = html.Div(className="rp-page", children=[
        dcc.Store(id="scenario-id", data=scenario_id),
        dcc.Store(id="plan-id", data=plan_id),
        html.Header(className="rp-header", children=[
            html.Div(className="rp-brand", children=[
                html.Div("reagentplan · limestone, gypsum and ash", className="rp-sub",
                         style={"color": "#d9a441", "letterSpacing": ".6px", "marginTop": 0}),
                html.Div(id="header-title", className="rp-name"),
                html.Div(id="header-sub", className="rp-sub"),
            ]),
            html.Div(id="header-kpis", className="rp-kpis"),
        ]),
        html.Div(CAUTION, className="rp-caution", id="caution"),
        html.Div(className="rp-body", children=[
            controls.layout(scn.scrubber.removal_pct, scn.dates, meta.get("source", "")),
            html.Main(className="rp-main", children=[
                dcc.Tabs(id="views", value="coordinator", className="rp-tabs", children=tabs),
            ]),
        ]),
        html.Div(f"reagentplan {__version__} · everything on this page is served from this "
                 "machine; nothing is fetched from elsewhere.", className="rp-foot"),
    ])
    for _, _, view in all_tabs:
        content = view.content(record_overview if view is record_view else run)
        for key in view.OUTPUTS:
            prop = "figure" if key in view.FIGURE_OUTPUTS else "children"
            setattr(page[key], prop, content[key])
    title, sub, kpis, label = callbacks.header_content(run, meta)
    page["header-title"].children = title
    page["header-sub"].children = sub
    page["header-kpis"].children = kpis
    page[controls.PLAN_LABEL].children = label
    return page


def create_app(workbook_bytes_or_path=None, *, futures: int = 500, seed: int = 0,
               solver: str = "highs", time_limit: float = 60.0, firm_days: int = 56,
               risk_level: float = 0.05, demo_days: int = 365, password: str | None = None,
               run=None, work_dir: str | os.PathLike | None = None, db: str | None = None,
               as_of=None) -> Dash:
    """Plan the scenario and build the app around the result.

    Parameters
    ----------
    workbook_bytes_or_path : a scenario workbook (path or bytes); ``None`` for the demo
        station, built into the app's private folder with ``demo_days`` days.
    futures, seed, solver, time_limit, firm_days, risk_level : as `run_plan`, for the
        startup plan and every re-plan.
    password : when given, every request must carry it (HTTP basic auth).
    run : an already planned `PlanRun` to start from instead (its scenario is used).
    work_dir : folder for the app's caches; a fresh temporary one (removed at exit)
        when not given.
    db, as_of : the operations record (a database URL): the startup plan starts from its
        state at the end of ``as_of`` (not stored as a version), and a record tab shows
        the plan version in force, surveys, recorded movements against the plan, what
        changed since the last plan and takes uploads of actuals.

    Raises
    ------
    reagentplan.errors.ScenarioError
        The workbook is bad (the CLI prints the report and exits with 2).
    """
    import diskcache
    import flask
    from dash import DiskcacheManager

    if work_dir is None:
        work = Path(tempfile.mkdtemp(prefix="reagentplan-dashboard-"))
        atexit.register(shutil.rmtree, work, True)
    else:
        work = Path(work_dir)
        work.mkdir(parents=True, exist_ok=True)
    options = PlanOptions(futures=futures, seed=seed, solver=solver, time_limit=time_limit,
                          firm_days=firm_days, risk_level=risk_level)
    t0 = time.perf_counter()
    record_source = None
    if db is not None:
        from reagentplan.pipeline import run_plan_from_record
        from reagentplan.record.db import connect

        from .record_callbacks import RecordSource

        scenario, source = _load(workbook_bytes_or_path, work, demo_days)
        engine = connect(db)
        try:
            wb_path = workbook_bytes_or_path if isinstance(workbook_bytes_or_path, (str, os.PathLike)) \
                else work / "demo_station.xlsx"
            run = run or run_plan_from_record(wb_path, engine, as_of, scenario=scenario, store=False,
                                              futures=futures, seed=seed, solver=solver,
                                              time_limit=time_limit, firm_days=firm_days,
                                              risk_level=risk_level)
        finally:
            engine.dispose()
        import datetime as _dt

        record_source = RecordSource(db, scenario, _dt.date.fromisoformat(run.summary_extra["as_of"]))
        scenario = run.plan.scenario  # what-if re-plans start from the record's state too
        source = f"{source} from the record as of {run.summary_extra.get('as_of')}"
    elif run is None:
        scenario, source = _load(workbook_bytes_or_path, work, demo_days)
        run = options.run(scenario)
    else:
        scenario, source = run.plan.scenario, run.plan.scenario.source_name or "the given plan"
    seconds = time.perf_counter() - t0

    store = PlanStore(str(work / "plans"))
    meta = {"source": source, "whatif": "as the workbook says", "made": time.strftime("%H:%M:%S"),
            "seconds": seconds}
    scenario_id = store.put("scenario", scenario, {"source": source}, pin=True)
    plan_id = store.put("run", run, meta, pin=True)

    server = flask.Flask("reagentplan.dashboard")
    if password:
        install_basic_auth(server, password)
    install_headers(server)
    server.config["MAX_CONTENT_LENGTH"] = MAX_REQUEST_BYTES

    manager = DiskcacheManager(diskcache.Cache(str(work / "jobs")))
    app = Dash(__name__, server=server, serve_locally=True, title="reagentplan · station logistics",
               update_title=None, background_callback_manager=manager, include_assets_files=False,
               enable_mcp=False, suppress_callback_exceptions=False)
    prefix = app.config.requests_pathname_prefix or "/"
    app.index_string = INDEX_STRING.replace(
        "PLOTLY_JS_URL", f"{prefix}_dash-component-suites/plotly/package_data/plotly.min.js")
    app.layout = build_layout(run, meta, scenario_id, plan_id,
                              record_source.overview() if record_source is not None else None)
    callbacks.register(app, store, options, manager)
    if record_source is not None:
        from .record_callbacks import register_record

        register_record(app, record_source)
    app.reagentplan = SimpleNamespace(store=store, options=options, scenario_id=scenario_id,
                                      plan_id=plan_id, work_dir=work, startup_seconds=seconds,
                                      record=record_source)
    return app


def serve(app: Dash, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT) -> None:
    """Serve ``app`` until interrupted (Flask's threaded server).  A SIGTERM stops it
    like Ctrl+C, so the app's temporary folder is removed."""
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, lambda *_: sys.exit(0))
    app.run(host=host, port=port, debug=False, dev_tools_ui=False, dev_tools_props_check=False)
