"""``reagentplan dashboard [WORKBOOK]``: serve the web dashboard."""

from __future__ import annotations

import os
import sys

from .. import CAUTION
from ..settings import PLAN
from .common import EXIT_BAD_INPUT, EXIT_OK, warn
from .options import (add_as_of, add_db, add_firm_days, add_futures, add_seed, add_time_limit,
                      plan_settings)


def register(sub) -> None:
    p = sub.add_parser("dashboard", help="serve the web dashboard (127.0.0.1 unless told otherwise)")
    p.add_argument("workbook", nargs="?", default=None,
                   help="scenario workbook (default: the demo station)")
    p.add_argument("--host", default="127.0.0.1",
                   help="address to bind (default %(default)s); any other needs the environment "
                        "variable REAGENTPLAN_DASHBOARD_PASSWORD")
    p.add_argument("--port", type=int, default=8050, help="port (default %(default)s)")
    add_futures(p, PLAN.futures)
    add_seed(p, PLAN)
    add_time_limit(p, PLAN)
    add_firm_days(p, PLAN)
    p.add_argument("--demo-days", type=int, default=365,
                   help="days of the demo station when no workbook is given (default %(default)s)")
    p.add_argument("--trusted-proxy", default=None, metavar="ADDRESS",
                   help="address of a TLS-terminating proxy in front of the dashboard; only its "
                        "X-Forwarded-For/-Host/-Proto headers are believed")
    p.add_argument("--study", default=None, metavar="DIR",
                   help="a folder written by 'reagentplan study' (of a station or of a fleet), shown in the "
                        "Studies tab")
    add_db(p)
    add_as_of(p, "with --db: plan from the record's state at the end of DATE (default: the "
                 "day of the newest recorded survey, arrival or shipment) and show the "
                 "record tab")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..dashboard.security import DashboardRefused, is_loopback, password_for

    db = args.db or os.environ.get("REAGENTPLAN_DB")
    people = db is not None and _has_users(db)
    try:
        password = None if people else password_for(args.host, os.environ)
    except DashboardRefused as exc:
        print(exc, file=sys.stderr)
        return EXIT_BAD_INPUT
    if not 0 <= args.port <= 65535:
        print(f"--port {args.port}: expected a port from 0 to 65535.", file=sys.stderr)
        return EXIT_BAD_INPUT
    from ..dashboard.app import create_app, serve
    from .fleet import is_fleet

    if args.workbook and is_fleet(args.workbook):
        from ..dashboard.fleet import create_fleet_app

        print(f"Planning the fleet of {args.workbook} ({plan_settings(args, PLAN).futures} futures per station)...")
        try:
            app = create_fleet_app(args.workbook, settings=plan_settings(args, PLAN), password=password,
                                   study_dir=args.study)
        except ValueError as exc:
            print(f"--study: {exc}", file=sys.stderr)
            return EXIT_BAD_INPUT
        print(f"Fleet dashboard on http://{args.host}:{args.port}/"
              + (" (password required)" if password else "") + "; Ctrl+C stops it.")
        print(f"Caution: {CAUTION}")
        serve(app, args.host, args.port, trusted_proxy=args.trusted_proxy)
        return EXIT_OK
    from ..plancache import cache_dir

    settings = plan_settings(args, PLAN)
    what = args.workbook or "the demo station"
    print(f"Serving at once; the page shows the first plan of {what} ({settings.futures} futures) "
          f"as it is made. Plans are kept in {cache_dir()} (set REAGENTPLAN_CACHE to move it).")
    if db is None and args.as_of is not None:
        from ..record.db import resolve_url

        resolve_url(None)  # says that --as-of needs a database
    try:
        app = create_app(args.workbook, settings=settings, demo_days=args.demo_days, password=password,
                         study_dir=args.study, db=db, as_of=args.as_of, background=True, plan_cache=True,
                         on_ready=_ready)
    except ValueError as exc:
        print(f"--study: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    print(f"Dashboard on http://{args.host}:{args.port}/"
          + (" (everyone signs in as a user of the record)" if people else
             " (password required)" if password else "") + "; Ctrl+C stops it.")
    if people and os.environ.get("REAGENTPLAN_DASHBOARD_PASSWORD"):
        print("The record has users: REAGENTPLAN_DASHBOARD_PASSWORD is not used.")
    if not is_loopback(args.host):
        print("Other machines can reach it: serve it behind a TLS-terminating proxy "
              "(passwords travel with the sign-in and with every script's request).")
    print(f"Caution: {CAUTION}")
    serve(app, args.host, args.port, trusted_proxy=args.trusted_proxy)
    return EXIT_OK


def _has_users(db: str) -> bool:
    """True when the record at ``db`` has users (the dashboard then asks everyone to
    sign in as themselves)."""
    from ..record.db import connect
    from ..record.users import has_users

    engine = connect(db)
    try:
        return has_users(engine)
    finally:
        engine.dispose()


def _ready(info) -> None:
    """Said on the console when the dashboard's first plan is ready."""
    how = "read back from the plan cache" if info.from_cache else f"made in {info.startup_seconds:.0f} s"
    print(f"The first plan is ready ({how}).", flush=True)
    warn(info)
