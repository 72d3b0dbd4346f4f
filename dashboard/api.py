"""The dashboard's HTTP interface for the station's other systems (a weighbridge, a
historian), served only when the record has users (`dashboard.people` checks who is
asking and their role before these run):

- ``POST /api/v1/record``: a multipart upload, field ``file`` (an ``.xlsx`` with record
  sheets, or a ``.csv`` named after one), recorded exactly as ``reagentplan record`` and
  the record tab record it (`reagentplan.record.importer.record_files`: the same
  validation, conflicts and all-or-nothing write).  200 with the counts per sheet; 409
  with each conflict; 422 with each problem (sheet, row, column, found, expected); 413
  over `MAX_UPLOAD_BYTES`; 403 for a viewer; 401 without credentials; 503 while the
  dashboard's first plan is still being made (the station's names are not known yet).  Field
  ``replace=1`` replaces recorded values (kept in the audit trail), as ``--replace``.
- ``GET /api/v1/plans/latest``: the plan in force (its ``summary.json``), 404 without one.
- ``GET /api/v1/users``: names and roles (an admin only).
- ``GET /api/v1/openapi.json``: the OpenAPI 3.1 description of the above.

Answers are JSON; no error shows a traceback.
"""

from __future__ import annotations

import json

from reagentplan import __version__

from .views import controls as C

#: Largest file taken [bytes] (the record tab's limit).
MAX_UPLOAD_BYTES = C.MAX_UPLOAD_BYTES
PREFIX = "/api/v1"


def _json(payload, status: int = 200, headers: dict | None = None):
    from flask import Response

    return Response(json.dumps(payload, default=str, indent=1), status,
                    {"Content-Type": "application/json", "Cache-Control": "no-store", **(headers or {})})


def _problems(exc) -> list[dict]:
    return [{"sheet": p.sheet, "row": p.row, "column": p.column, "found": p.found,
             "expected": p.expected, "message": str(p)} for p in exc.problems]


def record_upload(source, name: str, data: bytes, *, replace: bool, who: str | None):
    """``(status, payload)`` for one uploaded file, through `record_files`."""
    from reagentplan.errors import ScenarioError
    from reagentplan.record.importer import RecordConflict, record_files

    engine = source.engine()
    try:
        result = record_files(engine, [(name, data)], scenario=source.scenario, replace=replace,
                              today=source.today, who=who)
    except RecordConflict as exc:
        return 409, {"error": "conflict", "message": f"{name}: {exc.report()}\nNothing was recorded.",
                     "conflicts": _problems(exc)}
    except ScenarioError as exc:
        return 422, {"error": "invalid", "message": f"{name}: {exc.report()}\nNothing was recorded.",
                     "problems": _problems(exc)}
    finally:
        engine.dispose()
    return 200, {"file": name, "import_id": result.import_id, "changed": result.changed,
                 "recorded_by": who,
                 "sheets": {k: {"added": c.added, "unchanged": c.unchanged, "replaced": c.replaced}
                            for k, c in result.counts.items()},
                 "warnings": list(result.warnings)}


def register_api(app, source, people) -> None:
    """Add the interface's routes to the Dash ``app``'s Flask server.  ``source`` is the
    record tab's `RecordSource`, ``people`` the `dashboard.people.People`."""
    from flask import request
    from werkzeug.exceptions import HTTPException

    from .callbacks import _clean_name
    from .people import current_name

    server = app.server

    def post_record():
        upload = request.files.get("file")
        if upload is None:
            return _json({"error": "invalid", "message": "No file: send the file as the multipart "
                          "form field 'file' (curl -F file=@arrivals.csv).", "problems": [
                              {"sheet": None, "row": None, "column": "file", "found": "no field 'file'",
                               "expected": "a multipart/form-data field 'file' with an .xlsx or a .csv"}]}, 422)
        name = _clean_name(upload.filename)
        if not name.lower().endswith((".xlsx", ".csv")):
            return _json({"error": "invalid", "message": f"{name}: not an .xlsx or a .csv. Nothing was "
                          "recorded.", "problems": [{"sheet": None, "row": None, "column": "file",
                                                     "found": f"a file named '{name}'",
                                                     "expected": "an .xlsx with record sheets or a .csv "
                                                                 "named after one (arrivals.csv)"}]}, 422)
        data = upload.stream.read(MAX_UPLOAD_BYTES + 1)
        if len(data) > MAX_UPLOAD_BYTES:
            return _json({"error": "too_large", "message": f"{name} is over {MAX_UPLOAD_BYTES // 2**20} MB; "
                          "record it with `reagentplan record`. Nothing was recorded."}, 413)
        if source.scenario is None:  # the first plan is still being made: names cannot be checked yet
            return _json({"error": "not_ready", "message": "The dashboard is still making its first plan; "
                          "try again in a minute. Nothing was recorded."}, 503, {"Retry-After": "30"})
        replace = (request.form.get("replace") or "").strip().lower() in ("1", "true", "yes")
        status, payload = record_upload(source, name, data, replace=replace, who=current_name())
        return _json(payload, status)

    def latest_plan():
        from reagentplan.record.versions import latest_summary

        engine = source.engine()
        try:
            summary = latest_summary(engine)
        finally:
            engine.dispose()
        if summary is None:
            return _json({"error": "not_found", "message": "No plan version in the record yet: run "
                          "`reagentplan plan WORKBOOK --db URL --as-of DATE`."}, 404)
        return _json(summary)

    def users():
        from reagentplan.record.users import list_users

        return _json([{"name": u["name"], "role": u["role"]} for u in list_users(people.engine)])

    def openapi():
        return _json(openapi_document())

    server.add_url_rule(f"{PREFIX}/record", "api_record", post_record, methods=["POST"])
    server.add_url_rule(f"{PREFIX}/plans/latest", "api_plans_latest", latest_plan, methods=["GET"])
    server.add_url_rule(f"{PREFIX}/users", "api_users", users, methods=["GET"])
    server.add_url_rule(f"{PREFIX}/openapi.json", "api_openapi", openapi, methods=["GET"])

    @server.errorhandler(HTTPException)
    def _http_error(exc):  # JSON for the interface, Flask's own page elsewhere
        if not request.path.startswith("/api/"):
            return exc
        code = exc.code or 500
        what = {413: "too_large", 404: "not_found", 405: "method_not_allowed"}.get(code, "bad_request")
        return _json({"error": what, "message": f"{exc.name}: {exc.description} Nothing was recorded."
                      if request.method == "POST" else f"{exc.name}: {exc.description}"}, code)

    @server.errorhandler(Exception)
    def _server_error(exc):  # never a traceback; the database said no, or a fault here
        import sys

        print(f"reagentplan dashboard: {request.method} {request.path} failed: "
              f"{type(exc).__name__}: {exc}", file=sys.stderr)
        if request.path.startswith("/api/"):
            return _json({"error": "server_error", "message": "The server could not do this "
                          f"({type(exc).__name__}); nothing was recorded. Try again later."}, 500)
        return "The server could not answer this request.\n", 500


_PROBLEM = {"type": "object", "properties": {
    "sheet": {"type": ["string", "null"]}, "row": {"type": ["integer", "null"]},
    "column": {"type": ["string", "null"]}, "found": {"type": "string"},
    "expected": {"type": "string"}, "message": {"type": "string"}}}
_ERROR = {"type": "object", "required": ["error", "message"], "properties": {
    "error": {"type": "string"}, "message": {"type": "string"}}}


def _err(description: str, extra: dict | None = None) -> dict:
    schema = _ERROR if extra is None else {"allOf": [_ERROR, {"type": "object", "properties": extra}]}
    return {"description": description, "content": {"application/json": {"schema": schema}}}


def openapi_document() -> dict:
    """The OpenAPI 3.1 description of the interface."""
    auth = {"401": _err("No credentials, or a wrong name or password"),
            "429": _err("Too many failed sign-ins from this address or for this person")}
    return {
        "openapi": "3.1.0",
        "info": {"title": "reagentplan record interface", "version": __version__,
                 "description": "Send the station's facts (arrivals, shipments, surveys, orders, "
                                "generation, lab results) to the operations record, and read the "
                                "plan in force. Sign in with a person's name and password (HTTP "
                                "Basic); `reagentplan users add` makes them."},
        "servers": [{"url": "/"}],
        "security": [{"basic": []}],
        "components": {"securitySchemes": {"basic": {"type": "http", "scheme": "basic"}},
                       "schemas": {"Problem": _PROBLEM}},
        "paths": {
            f"{PREFIX}/record": {"post": {
                "summary": "Record a file of facts (all of it or nothing)",
                "description": "Exactly as `reagentplan record FILE`: the same validation, conflict "
                               "rules and all-or-nothing write. A coordinator or an admin.",
                "requestBody": {"required": True, "content": {"multipart/form-data": {"schema": {
                    "type": "object", "required": ["file"], "properties": {
                        "file": {"type": "string", "format": "binary",
                                 "description": "an .xlsx with record sheets, or a .csv named after "
                                                "one (arrivals.csv)"},
                        "replace": {"type": "string", "enum": ["0", "1"],
                                    "description": "1: replace values already recorded (the old ones "
                                                   "are kept in the audit trail)"}}}}}},
                "responses": {
                    "200": {"description": "Recorded (or nothing new): rows added and unchanged per sheet",
                            "content": {"application/json": {"schema": {"type": "object", "properties": {
                                "file": {"type": "string"}, "import_id": {"type": ["integer", "null"]},
                                "changed": {"type": "boolean"}, "recorded_by": {"type": "string"},
                                "sheets": {"type": "object", "additionalProperties": {
                                    "type": "object", "properties": {
                                        "added": {"type": "integer"}, "unchanged": {"type": "integer"},
                                        "replaced": {"type": "integer"}}}},
                                "warnings": {"type": "array", "items": {"type": "string"}}}}}}},
                    "403": _err("The person's role may not record facts (a viewer)"),
                    "409": _err("Keys already recorded with other values; nothing written",
                                {"conflicts": {"type": "array", "items": {"$ref": "#/components/schemas/Problem"}}}),
                    "413": _err("The file is over 10 MB"),
                    "503": _err("The dashboard is still making its first plan; try again later"),
                    "422": _err("The file is not valid; nothing written",
                                {"problems": {"type": "array", "items": {"$ref": "#/components/schemas/Problem"}}}),
                    **auth}}},
            f"{PREFIX}/plans/latest": {"get": {
                "summary": "The plan in force (its summary.json)",
                "responses": {"200": {"description": "The newest plan version's summary, with plan_id, "
                                                     "created_at and created_by",
                                      "content": {"application/json": {"schema": {"type": "object"}}}},
                              "404": _err("No plan version in the record yet"), **auth}}},
            f"{PREFIX}/users": {"get": {
                "summary": "Users and their roles (an admin only)",
                "responses": {"200": {"description": "name and role of each user",
                                      "content": {"application/json": {"schema": {"type": "array", "items": {
                                          "type": "object", "properties": {"name": {"type": "string"},
                                                                           "role": {"type": "string"}}}}}}},
                              "403": _err("Not an admin"), **auth}}},
            f"{PREFIX}/openapi.json": {"get": {
                "summary": "This description",
                "responses": {"200": {"description": "OpenAPI 3.1",
                                      "content": {"application/json": {"schema": {"type": "object"}}}},
                              **auth}}},
        },
    }
