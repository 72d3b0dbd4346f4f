"""The record tab's wiring: an upload goes through `reagentplan.record.importer.record_files`
(the `record` command's path: same validation, same conflict handling), then the tab is
drawn again from the record."""

from __future__ import annotations

import base64
import binascii
from dataclasses import dataclass

from dash import Input, Output, State, no_update
from dash.exceptions import PreventUpdate

from reagentplan.errors import ScenarioError

from .callbacks import _clean_name
from .views import controls as C
from .views import record as R


@dataclass
class RecordSource:
    """Where the tab reads from: a database URL, the station's scenario, and the day the
    dashboard plans as of (uploaded facts dated after it are refused, as `record`
    refuses facts after ``--as-of``)."""

    url: str
    scenario: object
    today: object = None

    def engine(self):
        from reagentplan.record.db import connect

        return connect(self.url)

    def overview(self):
        from reagentplan.record.overview import overview

        engine = self.engine()
        try:
            return overview(engine, self.scenario)
        finally:
            engine.dispose()


def record_upload(source: RecordSource, data: dict | None, replace: bool,
                  who: str | None = None) -> tuple[str, bool]:
    """Record an uploaded file: ``(message, ok)``; nothing is written when not ok.
    ``who`` is recorded as its maker (the signed-in person; default: the user the
    dashboard runs as)."""
    from reagentplan.record.importer import describe_import, record_files

    if not data or not data.get("contents"):
        raise PreventUpdate
    name = _clean_name(data.get("filename"))
    contents = data["contents"]
    _, _, b64 = contents.partition(",") if "," in contents else ("", "", contents)
    if len(b64) * 3 // 4 > C.MAX_UPLOAD_BYTES + 3:
        return f"{name} is too large for the dashboard; use `reagentplan record`.", False
    try:
        raw = base64.b64decode(b64, validate=True)
    except (binascii.Error, ValueError):
        return f"{name} could not be read (the upload was damaged); try again.", False
    engine = source.engine()
    try:
        result = record_files(engine, [(name, raw)], scenario=source.scenario, replace=replace,
                              today=source.today, who=who)
    except ScenarioError as exc:
        return f"{name}: {exc.report()}\nNothing was recorded.", False
    finally:
        engine.dispose()
    return f"{name}: {describe_import(result)}", True


def register_record(app, source: RecordSource) -> None:
    outputs = [Output(k, "figure" if k in R.FIGURE_OUTPUTS else "children") for k in R.OUTPUTS]

    @app.callback(Output(R.UPLOAD_MESSAGE, "children"), Output(R.UPLOAD_MESSAGE, "className"),
                  *outputs, Input(R.UPLOAD, "contents"), State(R.UPLOAD, "filename"),
                  State(R.REPLACE, "value"), prevent_initial_call=True)
    def _record(contents, filename, replace):
        from .people import current_name

        message, ok = record_upload(source, {"contents": contents, "filename": filename},
                                    "replace" in (replace or []), who=current_name())
        if not ok:
            return (message, "rp-msg bad", *([no_update] * len(R.OUTPUTS)))
        content = R.content(source.overview())
        return (message, "rp-msg good", *[content[k] for k in R.OUTPUTS])
