"""``reagentplan db upgrade``: the operations record's database."""

from __future__ import annotations

from .common import EXIT_OK
from .options import add_db


def register(sub) -> None:
    p = sub.add_parser("db", help="the operations record's database")
    dbsub = p.add_subparsers(dest="db_command", required=True, metavar="ACTION")
    q = dbsub.add_parser("upgrade", help="create the record's tables or bring them to the newest schema")
    add_db(q)
    q.set_defaults(func=upgrade)


def upgrade(args) -> int:
    from ..record.db import connect
    from ..record.db import upgrade as upgrade_db

    engine = connect(args.db)
    before, after = upgrade_db(engine)
    if before == after:
        print(f"The database is already at the newest schema (revision {after}).")
    else:
        print(f"Upgraded the database from {'an empty one' if before is None else 'revision ' + before} "
              f"to revision {after}.")
    engine.dispose()
    return EXIT_OK
