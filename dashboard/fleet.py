"""The fleet dashboard (``reagentplan dashboard FLEET.xlsx``): a fleet view (each pooled
contract month by month with every station's share, the shared car sets' arrivals by
day, every station's stores at a glance) and, behind a station picker, the station's
own views (deliveries and orders, stores and risk, byproduct sales) of its part of the
fleet plan and, when any station has an operations record (a ``db`` in the fleet's
``stations`` sheet), a read-only record tab: the picked station's record
(`reagentplan.record.overview`, as the station dashboard's record tab shows it), or a line
saying plainly that the picked station has none.  With ``study_dir`` (``--study DIR``) a
Studies tab shows that study.  The fleet is planned and every record read once when the
app is made (`reagentplan.fleet`, `reagentplan.record`); the callback only selects the
station's plan and record and hands them to the views."""

from __future__ import annotations

import math
import os
from pathlib import Path

import flask
from dash import Dash, Input, Output, dcc, html

from reagentplan import CAUTION, __version__

from . import fleet_figures
from .security import install_basic_auth, install_body_limit, install_headers, install_origin_check
from .style import INDEX_STRING
from .views import coordinator, plant, record, sales
from .views import study as study_view
from .views.common import GRAPH_CONFIG, card, fmt_money

STATION_VIEWS = (("coordinator", "Deliveries & orders", coordinator), ("plant", "Stores & risk", plant),
                 ("sales", "Byproduct sales", sales))
PICKER = "fleet-station"
#: the record tab's body: the picked station's record, or the line saying it has none
RECORD = "fleet-record"
MAX_REQUEST_BYTES = 1024 * 1024


def _tonnes(x: float) -> str:
    """Whole tonnes; rounded first, so that a solver's -1e-9 t shows as 0, not -0."""
    return "–" if math.isnan(x) else f"{round(x):,d}" if math.isfinite(x) else str(x)


def _stores_table(stores) -> html.Table:
    cols = ["station", "store", "opening_t", "lowest_t", "highest_t", "end_t", "safety_t", "capacity_t",
            "days_below_safety", "days_over_capacity"]
    head = html.Tr([html.Th(c.replace("_", " ")) for c in cols])
    rows = [html.Tr([html.Td(_tonnes(r[c]) if isinstance(r[c], float) else str(r[c]).replace("_", " "))
                     for c in cols],
                    className="rp-row-warn" if r["days_below_safety"] or r["days_over_capacity"] else None)
            for r in stores.to_dict("records")]
    return html.Table([html.Thead(head), html.Tbody(rows)], className="rp-table", id="fleet-stores")


def fleet_view(summary: dict, frames: dict) -> html.Div:
    """The fleet tab: pooled contracts, car sets, stores at a glance, where the room went."""
    cur = summary["currency"]
    graphs = [card(dcc.Graph(id=f"fleet-pool-{i}", figure=fleet_figures.pooled_figure(frames["Pooled contracts"], c),
                             config=GRAPH_CONFIG, className="rp-graph"), wide=True)
              for i, c in enumerate(summary["shared_contracts"])]
    graphs += [card(dcc.Graph(id=f"fleet-cars-{i}", figure=fleet_figures.cars_figure(frames["Car sets"], t),
                              config=GRAPH_CONFIG, className="rp-graph"), wide=True)
               for i, t in enumerate(summary["shared_train_sets"])]
    room = frames["Pooled room"]
    room_rows = [html.Li(f"{r['contract']}: {r['station']} {r['tonnes']:,.0f} t (hand split {r['hand_split_tonnes']:,.0f} t)")
                 for r in room.to_dict("records")]
    saving = summary["baseline_total_cost"] - summary["total_cost"]
    return html.Div(className="rp-view", id="fleet-view", children=[
        html.P(f"The fleet plan costs {fmt_money(summary['total_cost'], cur)} against the hand split's "
               f"{fmt_money(summary['baseline_total_cost'], cur)} (saving {fmt_money(saving, cur)}); "
               f"{len(summary['breaches'])} limit(s) broken.", className="rp-view-intro", id="fleet-intro"),
        html.Div(className="rp-grid", children=[
            *graphs,
            card(_stores_table(frames["Stores"]), wide=True, title="Every station's stores at a glance"),
            card(html.Ul(room_rows, id="fleet-room"), title="Where the pooled room went"),
        ]),
    ])


def station_records(fleet) -> dict:
    """Each station's record overview (`reagentplan.record.overview.overview`), or None for
    a station without a ``db``; read once, when the app is made.

    Raises
    ------
    reagentplan.errors.ScenarioError
        A station's record cannot be opened; the problem names the ``stations`` sheet's row
        and its ``db`` column.
    """
    from reagentplan.errors import Problem, ScenarioError
    from reagentplan.record.db import RecordError

    from .record_callbacks import RecordSource

    out = {}
    for s in fleet.stations:
        if not s.db:
            out[s.station] = None
            continue
        try:
            out[s.station] = RecordSource(s.db, s.scenario).overview()
        except RecordError as exc:
            raise ScenarioError([Problem("stations", s.row, "db", f"station '{s.station}': {p.found}", p.expected)
                                 for p in exc.problems], "The fleet workbook") from None
    return out


def no_record(station: str) -> html.Div:
    """What the record tab says for a station without an operations record."""
    return html.Div(className="rp-view", id="fleet-record-none", children=[
        html.P(f"{station} has no operations record: the fleet workbook's stations sheet gives it no db. "
               "Give it one (sqlite:///... or postgresql+psycopg://...) to see its surveys, recorded "
               "movements against the plan and its plan versions here.", className="rp-view-intro"),
    ])


def record_panels(records: dict) -> dict:
    """The record tab's body per station: its record, read-only, or `no_record`."""
    return {name: record.filled(ov, uploads=False) if ov is not None else no_record(name)
            for name, ov in records.items()}


def fleet_layout(result, summary: dict, frames: dict, *, records: bool = False, study=None) -> html.Div:
    """The page: the fleet tab, the station's views behind the picker, its record tab when
    ``records`` (any station has one), the Studies tab when ``study`` (a
    ``(study.csv frame, study.json)`` pair) is given."""
    names = list(result.runs)
    tabs = [dcc.Tab(label="Fleet", value="fleet", className="rp-tab", selected_className="rp-tab--selected",
                    children=fleet_view(summary, frames), id="tab-fleet")]
    tabs += [dcc.Tab(label=label, value=value, className="rp-tab", selected_className="rp-tab--selected",
                     children=view.layout(), id=f"tab-{value}") for value, label, view in STATION_VIEWS]
    if records:
        tabs.append(dcc.Tab(label="Record & changes", value="record", className="rp-tab", id="tab-record",
                            selected_className="rp-tab--selected", children=html.Div(id=RECORD)))
    if study is not None:
        tabs.append(dcc.Tab(label="Studies", value="study", className="rp-tab", id="tab-study",
                            selected_className="rp-tab--selected", children=study_view.layout(*study)))
    return html.Div(className="rp-page", children=[
        html.Header(className="rp-header", children=[
            html.Div(className="rp-brand", children=[
                html.Div("reagentplan · a fleet of stations", className="rp-sub",
                         style={"color": "#d9a441", "letterSpacing": ".6px", "marginTop": 0}),
                html.Div(result.fleet.name, className="rp-name", id="header-title"),
                html.Div(f"{len(names)} stations · {result.status}", className="rp-sub", id="header-sub"),
            ]),
            html.Div(className="rp-kpis", style={"alignItems": "center"}, children=[
                html.Span("Station: "),
                dcc.RadioItems(id=PICKER, options=[{"label": n, "value": n} for n in names], value=names[0],
                               inline=True, className="rp-picker"),
            ]),
        ]),
        html.Div(CAUTION, className="rp-caution", id="caution"),
        html.Div(className="rp-body", children=[
            html.Main(className="rp-main", children=[
                dcc.Tabs(id="views", value="fleet", className="rp-tabs", children=tabs),
            ]),
        ]),
        html.Div(f"reagentplan {__version__} · everything on this page is served from this machine; "
                 "nothing is fetched from elsewhere.", className="rp-foot"),
    ])


def create_fleet_app(workbook: str | os.PathLike, *, settings=None, password: str | None = None,
                     result=None, origins: tuple[str, ...] = (),
                     study_dir: str | os.PathLike | None = None) -> Dash:
    """The fleet dashboard of ``workbook`` (planned here unless ``result`` is given).

    ``study_dir``: a folder written by `reagentplan study`, shown in a Studies tab.
    Every station with a ``db`` has its record read once, here, for the record tab.

    Raises
    ------
    reagentplan.errors.ScenarioError
        The fleet workbook is bad, or a station's record cannot be opened.
    ValueError
        ``study_dir`` holds no study.csv (checked before the fleet is planned).
    """
    from reagentplan.fleet import fleet_frames, fleet_summary, load_fleet, plan_fleet

    study = None
    if study_dir is not None:
        from reagentplan.study.results import read_study_table

        study = read_study_table(study_dir)
    if result is None:  # the records are read first: one that cannot be opened is refused at once
        fleet = load_fleet(Path(workbook))
        records = station_records(fleet)
        result = plan_fleet(fleet, settings)
    else:
        records = station_records(result.fleet)
    summary, frames = fleet_summary(result), fleet_frames(result)
    panels = record_panels(records) if any(ov is not None for ov in records.values()) else None
    server = flask.Flask("reagentplan.dashboard.fleet")
    install_origin_check(server, loopback_only=not password, origins=origins)
    if password:
        install_basic_auth(server, password)
    app = Dash(__name__, server=server, serve_locally=True, title="reagentplan · fleet", update_title=None,
               include_assets_files=False)
    prefix = app.config.requests_pathname_prefix or "/"
    app.index_string = INDEX_STRING.replace(
        "PLOTLY_JS_URL", f"{prefix}_dash-component-suites/plotly/package_data/plotly.min.js")
    install_body_limit(server, MAX_REQUEST_BYTES)
    install_headers(server)
    app.layout = fleet_layout(result, summary, frames, records=panels is not None, study=study)
    outputs = [(key, "figure" if key in view.FIGURE_OUTPUTS else "children")
               for _, _, view in STATION_VIEWS for key in view.OUTPUTS]
    if panels is not None:
        outputs.append((RECORD, "children"))

    @app.callback([Output(k, p) for k, p in outputs], Input(PICKER, "value"))
    def show_station(station):
        run = result.runs[station]
        contents = {}
        for _, _, view in STATION_VIEWS:
            contents.update(view.content(run))
        if panels is not None:
            contents[RECORD] = panels[station]
        return [contents[k] for k, _ in outputs]

    if study is not None:
        study_view.register(app)
    app.reagentplan_fleet = result
    app.reagentplan_records = records
    return app
