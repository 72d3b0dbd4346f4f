"""The Dash app: `create_app` plans the scenario it is given (or the demo station) once,
keeps the result on the server and serves the three views around it.

Usage::

    reagentplan dashboard [WORKBOOK] [--host H] [--port P]

or, from Python::

    from reagentplan.dashboard.app import create_app, serve
    serve(create_app("station.xlsx"), "127.0.0.1", 8050)

It is served by waitress (a production WSGI server, pure Python): a fixed pool of
threads, request bodies over `MAX_REQUEST_BYTES` refused from their headers, no
tracebacks shown.  `make_server` gives the server without running it (tests and
`bench/serve.py` run it in a thread and stop it with `stop_server`).
"""

from __future__ import annotations

import atexit
import dataclasses
import os
import shutil
import signal
import sys
import tempfile
import threading
import time
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace

from dash import Dash, dcc, html

from reagentplan import CAUTION, __version__
from reagentplan.pipeline import settings_of
from reagentplan.settings import PlanSettings

from . import callbacks
from .security import (DEFAULT_HOST, ORIGINS_ENV, LoginThrottle, install_basic_auth,
                       install_body_limit, install_headers, install_origin_check)
from .store import PlanStore
from .style import INDEX_STRING
from .views import controls, coordinator, plant, sales
from .views import study as study_view

#: Largest request body the server takes [bytes]: a 10 MB upload as base64, and room.
MAX_REQUEST_BYTES = 16 * 1024 * 1024
DEFAULT_PORT = 8050
#: Threads answering requests (a re-plan runs in its own process, not in one of these).
SERVER_THREADS = 8
#: Most bytes of plans kept in the app's disk cache; the oldest go first.  A 90-day plan
#: with 500 futures is about 3.5 MB, a 365-day one about 14 MB.
CACHE_BYTES = 256 * 2**20
#: Most bytes of finished re-plan jobs kept for the page to collect.
JOBS_BYTES = 64 * 2**20

TABS = (
    ("coordinator", "Deliveries & orders", coordinator),
    ("plant", "Stores & risk", plant),
    ("sales", "Byproduct sales", sales),
)


def _load(workbook, work_dir: Path, demo_days: int):
    """The scenario to start with, and the name the page shows for it."""
    from reagentplan.scenario import load_scenario

    if workbook is None:
        from reagentplan.demo.build_demo import build_demo_workbook

        path = build_demo_workbook(work_dir / "demo_station.xlsx", horizon_days=demo_days)
        return load_scenario(path), "the demo station"
    if isinstance(workbook, (bytes, bytearray)):
        return load_scenario(bytes(workbook)), "the given workbook"
    return load_scenario(workbook), Path(workbook).name


def build_layout(run, meta: dict, scenario_id: str, plan_id: str, study=None,
                 record_overview=None):
    """The page, already filled with the startup plan (no round trip on first load);
    ``study`` is a ``(study.csv frame, study.json)`` pair to show in the study tab; with
    ``record_overview`` (a `reagentplan.record.overview.Overview`), a record tab."""
    from .views import record as record_view

    scn = run.plan.scenario
    all_tabs = TABS + ((("record", "Record & changes", record_view),) if record_overview is not None else ())
    tabs = [dcc.Tab(label=label, value=value, className="rp-tab", selected_className="rp-tab--selected",
                    children=view.layout(), id=f"tab-{value}")
            for value, label, view in all_tabs]
    tabs.append(dcc.Tab(label="Studies", value="study", className="rp-tab", id="tab-study",
                        selected_className="rp-tab--selected",
                        children=study_view.layout(*(study or (None, None)))))
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
            controls.layout(scn.scrubber.removal_pct, scn.dates, meta.get("source", ""),
                            scn.scrubber.removal_range),
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


def create_app(workbook_bytes_or_path=None, *, settings: PlanSettings | None = None,
               demo_days: int = 365, password: str | None = None,
               run=None, work_dir: str | os.PathLike | None = None,
               origins: tuple[str, ...] | None = None,
               throttle: LoginThrottle | None = None, cache_bytes: int = CACHE_BYTES,
               study_dir: str | os.PathLike | None = None, db: str | None = None,
               as_of=None, background: bool = False,
               plan_cache: str | os.PathLike | bool | None = None,
               on_ready: Callable[[SimpleNamespace], None] | None = None, **plan_changes) -> Dash:
    """Plan the scenario and build the app around the result.

    Parameters
    ----------
    workbook_bytes_or_path : a scenario workbook (path or bytes); ``None`` for the demo
        station, built into the app's private folder with ``demo_days`` days.
    settings, plan_changes : the `reagentplan.settings.PlanSettings` (default
        `reagentplan.settings.PLAN`) and changes to its fields (``futures=0``...), as
        `run_plan` takes them, for the startup plan and every re-plan.
    password : when given, every request must carry it (HTTP basic auth), with failed
        attempts slowed and locked out per address (``throttle``, a `LoginThrottle`).
        Without one, only loopback host names are answered.
    origins : other origins whose pages may post to the dashboard (a proxy's public
        ``https://name``); default: the environment variable ``REAGENTPLAN_DASHBOARD_ORIGINS``
        (comma-separated).  The dashboard's own origin is always accepted.
    run : an already planned `PlanRun` to start from instead (its scenario is used).
    work_dir : folder for the app's caches; a fresh temporary one (removed at exit)
        when not given.
    cache_bytes : most bytes of plans kept on disk (`CACHE_BYTES`); the oldest re-plans
        are dropped first, the startup plan is kept in memory.
    study_dir : a folder written by `reagentplan study`, shown in the Studies tab.
    db, as_of : the operations record (a database URL): the startup plan starts from its
        state at the end of ``as_of`` (default: the day of the newest recorded survey,
        arrival or shipment; not stored as a version), and a record tab shows
        the plan version in force, surveys, recorded movements against the plan, what
        changed since the last plan and takes uploads of actuals.
    background : return at once and make the startup plan in a thread; until it is
        ready the page shows what is being done (`dashboard.views.startup`) and then
        reloads into the views.  ``app.reagentplan.ready`` tells when; a given workbook
        is still read (and refused when bad) before this returns.
    plan_cache : keep the startup plan on disk by the fingerprint of its inputs and read
        it back on the next start with the same inputs (`reagentplan.plancache`): a
        folder, or True for the user cache folder (`reagentplan.plancache.cache_dir`);
        None or False: no disk cache.
    on_ready : called with ``app.reagentplan`` once the startup plan is ready (in the
        planning thread when ``background``).

    Raises
    ------
    reagentplan.errors.ScenarioError
        The workbook is bad (the CLI prints the report and exits with 2).
    ValueError
        ``study_dir`` holds no study.csv.
    """
    import diskcache
    import flask
    from dash import DiskcacheManager

    from reagentplan.plancache import PlanProgress

    if work_dir is None:
        work = Path(tempfile.mkdtemp(prefix="reagentplan-dashboard-"))
        atexit.register(shutil.rmtree, work, True)
    else:
        work = Path(work_dir)
        work.mkdir(parents=True, exist_ok=True)
    options = settings_of(settings, **plan_changes)
    study = None
    if study_dir is not None:
        from reagentplan.study.results import read_study_table

        study = read_study_table(study_dir)
    loaded = None
    if workbook_bytes_or_path is not None and run is None:
        loaded = _load(workbook_bytes_or_path, work, demo_days)  # a bad workbook is refused now
    record_source = people = None
    if db is not None:
        from .record_callbacks import RecordSource

        record_source = RecordSource(db, None)  # filled by the startup plan
        people = _people(db)
    progress = PlanProgress()
    start = _Startup(workbook_bytes_or_path, loaded, work, demo_days, options, run, db, as_of,
                     record_source, progress,
                     None if plan_cache in (None, False) else plan_cache)

    store = PlanStore(str(work / "plans"), size_limit=cache_bytes)
    server = flask.Flask("reagentplan.dashboard")
    if origins is None:
        origins = tuple(o.strip() for o in os.environ.get(ORIGINS_ENV, "").split(",") if o.strip())
    # each is put in front of the others: they run body limit, password (or the
    # record's people), origin
    install_origin_check(server, loopback_only=not (password or people), origins=origins,
                         scripts=people is not None)
    guard = None
    if people is None and password:
        guard = install_basic_auth(server, password, throttle)

    manager = DiskcacheManager(diskcache.Cache(str(work / "jobs"), size_limit=JOBS_BYTES))
    # with the startup page first, the views' components appear only after a reload
    app = Dash(__name__, server=server, serve_locally=True, title="reagentplan · station logistics",
               update_title=None, background_callback_manager=manager, include_assets_files=False,
               enable_mcp=False, suppress_callback_exceptions=background)
    prefix = app.config.requests_pathname_prefix or "/"
    app.index_string = INDEX_STRING.replace(
        "PLOTLY_JS_URL", f"{prefix}_dash-component-suites/plotly/package_data/plotly.min.js")
    if people is not None:  # the record has users: each person signs in as themselves
        from .api import register_api
        from .people import install_people_auth

        guard = install_people_auth(app, people, throttle)
        register_api(app, record_source, people)
    install_body_limit(server, MAX_REQUEST_BYTES)
    install_headers(server)
    app.reagentplan = SimpleNamespace(store=store, options=options, scenario_id=None,
                                      plan_id=None, work_dir=work, startup_seconds=None,
                                      warnings=(), throttle=guard, origins=origins,
                                      record=record_source, progress=progress, ready=False,
                                      from_cache=False, plan_meta=None, people=people)
    page: list = []

    def finish() -> None:
        scenario, run_, meta = start.run()
        scenario_id = store.put("scenario", scenario, {"source": meta["source"]}, pin=True)
        plan_id = store.put("run", run_, meta, pin=True)
        page.append(build_layout(run_, meta, scenario_id, plan_id, study,
                                 record_source.overview() if record_source is not None else None))
        ns = app.reagentplan
        ns.scenario_id, ns.plan_id, ns.startup_seconds = scenario_id, plan_id, meta["seconds"]
        ns.warnings = tuple(getattr(scenario, "warnings", ()))
        ns.from_cache, ns.plan_meta = bool(meta.get("from_cache")), meta
        if on_ready is not None:
            on_ready(ns)
        ns.ready = True  # the page shows the views from now on

    callbacks.register(app, store, options, manager)
    study_view.register(app)
    if record_source is not None:
        from .record_callbacks import register_record

        register_record(app, record_source)
    if not background:
        try:
            finish()
        finally:
            progress.finish()
        app.layout = page[0]
        return app

    from .views import startup as startup_view

    what = loaded[1] if loaded is not None else "the demo station"

    def layout():
        return page[0] if app.reagentplan.ready else startup_view.layout(progress.snapshot(), what)

    app.layout = layout
    startup_view.register(app, progress)

    def work_thread() -> None:
        try:
            finish()
            progress.finish()
        except BaseException as exc:  # shown on the page and on the console
            from reagentplan.errors import ScenarioError

            text = exc.report() if isinstance(exc, ScenarioError) else f"{type(exc).__name__}: {exc}"
            progress.finish(text)
            print(f"The first plan could not be made: {text}", file=sys.stderr)

    threading.Thread(target=work_thread, daemon=True, name="reagentplan-startup-plan").start()
    return app


def _people(db: str):
    """The record's users as the dashboard checks them, or None when it has none (the
    dashboard then asks for no sign-in, or for the shared password)."""
    from reagentplan.record.db import connect
    from reagentplan.record.users import has_users

    engine = connect(db)
    try:
        if not has_users(engine):
            return None
    finally:
        engine.dispose()
    from .people import People

    return People(db)


class _Startup:
    """The startup plan: the scenario (the given workbook, the demo station, or the
    record's state), planned or read back from the plan cache, saying each step."""

    def __init__(self, workbook, loaded, work: Path, demo_days: int, options: PlanSettings, run,
                 db, as_of, record_source, progress, plan_cache):
        self.workbook, self.loaded, self.work, self.demo_days = workbook, loaded, work, demo_days
        self.options, self.given_run, self.db, self.as_of = options, run, db, as_of
        self.record_source, self.progress, self.plan_cache = record_source, progress, plan_cache

    def _scenario(self):
        if self.loaded is None:
            self.progress.say("Building the demo station workbook…")
            self.loaded = _load(None, self.work, self.demo_days)
        return self.loaded

    def _source_bytes(self):
        """What the plan is made from, for its fingerprint: the workbook's bytes, or the
        demo's parameters (the demo is built by this package's code)."""
        if self.workbook is None:
            return f"demo station, {self.demo_days} days"
        if isinstance(self.workbook, (bytes, bytearray)):
            return bytes(self.workbook)
        return Path(self.workbook).read_bytes()

    def run(self):
        """``(scenario, run, meta)``: meta as the header shows it."""
        from reagentplan import plancache

        say = self.progress.say
        t0 = time.perf_counter()
        if self.given_run is not None:
            run = self.given_run
            scenario = run.plan.scenario
            if self.record_source is not None:
                self._fill_record(run, self.loaded[0] if self.loaded else scenario)
            return scenario, run, {"source": scenario.source_name or "the given plan",
                                   "whatif": "as the workbook says",
                                   "made": time.strftime("%H:%M:%S"),
                                   "seconds": time.perf_counter() - t0}
        scenario, source = self._scenario()
        settings = dataclasses.asdict(self.options)
        directory = None if self.plan_cache is True else self.plan_cache
        if self.db is None:
            key = plancache.plan_key(self._source_bytes(), settings)
            run, made = plancache.cached(
                key, lambda: plancache.plan_in_steps(scenario, self.options, say=say),
                directory=directory, progress=self.progress, use=self.plan_cache is not None)
        else:
            run, made, source = self._from_record(scenario, source, settings, directory)
            scenario = run.plan.scenario  # what-if re-plans start from the record's state too
        meta = {"source": source, "whatif": "as the workbook says", "made": made["made"],
                "seconds": made["seconds"], "from_cache": made["from_cache"]}
        return scenario, run, meta

    def _from_record(self, scenario, source, settings, directory):
        from reagentplan import plancache
        from reagentplan.pipeline import run_plan_from_record
        from reagentplan.record.asof import latest_fact_day, load_record
        from reagentplan.record.db import connect

        say = self.progress.say
        wb_path = self.workbook if isinstance(self.workbook, (str, os.PathLike)) \
            else self.work / "demo_station.xlsx"
        say("Reading the operations record…")
        engine = connect(self.db)
        try:
            record = load_record(engine)
            as_of = self.as_of
            if as_of is None:  # what is true now: the day of the newest recorded fact
                as_of = latest_fact_day(record)
            key = plancache.plan_key(self._source_bytes(), settings, as_of=as_of,
                                     last_import_id=record.last_import_id)

            def make():
                say(f"Planning from the record's state at the end of {as_of} "
                    f"({self.options.futures} futures)…")
                return run_plan_from_record(wb_path, engine, as_of, scenario=scenario, store=False,
                                            **settings)

            run, made = plancache.cached(key, make, directory=directory, progress=self.progress,
                                         use=self.plan_cache is not None)
        finally:
            engine.dispose()
        self._fill_record(run, scenario)
        return run, made, f"{source} from the record as of {run.summary_extra.get('as_of')}"

    def _fill_record(self, run, scenario) -> None:
        """The record tab's station and the last day an upload may carry."""
        import datetime as _dt

        as_of = run.summary_extra.get("as_of")
        planned_as_of = _dt.date.fromisoformat(str(as_of)) if as_of else _dt.date.today()
        # uploads may carry facts up to today, or up to the as-of day or the day before the
        # workbook's start when those are later (a workbook planned ahead of the calendar)
        self.record_source.scenario = scenario
        self.record_source.today = max(planned_as_of, scenario.plant.start_date - _dt.timedelta(days=1),
                                       _dt.date.today())


def make_server(app: Dash, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT, *,
                threads: int = SERVER_THREADS, trusted_proxy: str | None = None):
    """A waitress server for ``app`` bound to ``host``:``port`` (0 = a free port), not
    yet running: call ``.run()`` (blocks), stop it with `stop_server`.  Its address is
    ``server.effective_host``, ``server.effective_port``.

    ``trusted_proxy``: the address of a TLS-terminating proxy in front; its
    ``X-Forwarded-For/-Host/-Proto`` headers are then believed (and only its), so the
    login throttle sees the client's address and the origin check the public host.
    """
    from waitress import create_server

    kwargs = {}
    if trusted_proxy:
        kwargs = {"trusted_proxy": trusted_proxy, "trusted_proxy_count": 1,
                  "trusted_proxy_headers": "x-forwarded-for x-forwarded-host x-forwarded-proto",
                  "clear_untrusted_proxy_headers": True}
    return create_server(app.server, host=host, port=port, threads=threads,
                         max_request_body_size=MAX_REQUEST_BYTES, expose_tracebacks=False,
                         ident="reagentplan", connection_limit=200, channel_timeout=120, **kwargs)


def stop_server(server) -> None:
    """Stop a server made by `make_server` that is running in another thread."""
    from waitress import wasyncore

    socket_map = server.map if hasattr(server, "map") else server._map
    triggers = [d for d in socket_map.values() if hasattr(d, "pull_trigger")]
    trigger = getattr(server, "trigger", None) or (triggers[0] if triggers else None)
    server.task_dispatcher.shutdown()
    if trigger is not None:
        # closed from inside the server's own loop, which then ends (no socket closed
        # under a running select)
        try:
            trigger.pull_trigger(lambda: wasyncore.close_all(socket_map))
        except OSError:
            # the trigger's pipe is closed already: the loop has ended or is ending (a
            # teardown race seen once under load); close whatever is left from here
            wasyncore.close_all(socket_map)
    else:  # pragma: no cover - every waitress server has a trigger
        wasyncore.close_all(socket_map)


def serve(app: Dash, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT, *,
          threads: int = SERVER_THREADS, trusted_proxy: str | None = None) -> None:
    """Serve ``app`` with waitress until interrupted.  A SIGTERM stops it like Ctrl+C,
    so the app's temporary folder is removed."""
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, lambda *_: sys.exit(0))
    server = make_server(app, host, port, threads=threads, trusted_proxy=trusted_proxy)
    try:
        server.run()
    finally:
        stop_server(server)
