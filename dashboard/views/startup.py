"""The page shown while the first plan is made: what is being done, step by step, with
the seconds each step has taken, polled from the server once a second; the page reloads
itself into the three views when the plan is ready.

The plan is made by the library (`reagentplan.plancache`); this module only draws its
`PlanProgress` and wires the poll.
"""

from __future__ import annotations

from dash import Input, Output, dcc, html

from reagentplan import CAUTION, __version__

POLL = "startup-poll"
STEPS = "startup-steps"
READY = "startup-ready"
#: How often the page asks how far the plan is [ms].
POLL_MS = 1000

RELOAD_JS = """
function(ready) {
    if (ready) { window.location.reload(); }
    return window.dash_clientside.no_update;
}
"""


def steps(snapshot: dict) -> list:
    """The steps so far, the last one running (or how it ended)."""
    items = []
    rows = snapshot["steps"]
    for k, (text, at) in enumerate(rows):
        last = k == len(rows) - 1
        ends = snapshot["seconds"] if last else rows[k + 1][1]
        running = last and not snapshot["done"]
        items.append(html.Li([
            html.Span("▸ " if running else "✓ ", className="rp-step-mark"),
            html.Span(text),
            html.Span(f"  {ends - at:.0f} s" + (" so far" if running else ""), className="rp-sub",
                      style={"color": "#5f6b70", "marginLeft": "8px"})],
            className="rp-step running" if running else "rp-step"))
    if snapshot["error"]:
        items.append(html.Li(f"The first plan could not be made: {snapshot['error']}",
                             className="rp-msg bad"))
    elif snapshot["done"]:
        items.append(html.Li("The plan is ready; opening it…", className="rp-msg good"))
    return items


def layout(snapshot: dict, what: str) -> html.Div:
    """The whole page while ``what`` (the station's name for the page) is planned."""
    return html.Div(className="rp-page", id="startup-page", children=[
        html.Header(className="rp-header", children=[
            html.Div(className="rp-brand", children=[
                html.Div("reagentplan · limestone, gypsum and ash", className="rp-sub",
                         style={"color": "#d9a441", "letterSpacing": ".6px", "marginTop": 0}),
                html.Div(f"Making the first plan of {what}", className="rp-name"),
                html.Div("The views open here as soon as it is ready; a plan already made from "
                         "the same inputs is read back in a moment.", className="rp-sub"),
            ]),
        ]),
        html.Div(CAUTION, className="rp-caution"),
        html.Div(className="rp-card", style={"margin": "18px", "padding": "12px 18px",
                                              "maxWidth": "760px"}, children=[
            html.H4("What is being done"),
            html.Ul(steps(snapshot), id=STEPS, style={"lineHeight": "1.9", "paddingLeft": "8px",
                                                       "listStyle": "none"}),
        ]),
        dcc.Interval(id=POLL, interval=POLL_MS),
        dcc.Store(id=READY, data=False),
        html.Div(f"reagentplan {__version__} · everything on this page is served from this "
                 "machine; nothing is fetched from elsewhere.", className="rp-foot"),
    ])


def register(app, progress) -> None:
    """Wire the poll to ``progress`` (a `reagentplan.plancache.PlanProgress`): the steps,
    and a reload once the views are ready (``app.reagentplan.ready``)."""

    @app.callback(Output(STEPS, "children"), Output(READY, "data"), Input(POLL, "n_intervals"))
    def _poll(_n):
        snap = progress.snapshot()
        return steps(snap), bool(getattr(app.reagentplan, "ready", False))

    app.clientside_callback(RELOAD_JS, Output(POLL, "disabled"), Input(READY, "data"),
                            prevent_initial_call=True)
