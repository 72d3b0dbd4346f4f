"""The operations record: what actually happened at the station (stock surveys,
arrivals, shipments, orders, generation and lab results) and the plans made from it.

- `models`: the SQLAlchemy 2 schema; `migrations/`: its Alembic history.
- `db`: engines from a URL (SQLite with WAL, busy timeout and foreign keys; PostgreSQL
  through psycopg 3) and ``upgrade``.
- `sheets`, `importer`: recording a file of facts, validated like the scenario workbook.
- `asof`: the state on a date (opening stock, month-to-date, firm orders, history) and
  its application to a `Scenario`.
- `versions`: plan versions and the diff of two; `review`: plan against book against
  survey.
- `calibrate`: the balance's factors fitted to the surveys (``reagentplan calibrate``,
  ``plan --calibrated``).
"""

from .db import RecordError, connect, upgrade

__all__ = ["RecordError", "connect", "upgrade"]
