"""Engines for the record: a URL (``--db``) or ``REAGENTPLAN_DB``; SQLite as the
embedded default (WAL journal, a busy timeout, foreign keys on, writers serialised with
``BEGIN IMMEDIATE``), PostgreSQL through psycopg 3.  ``upgrade`` brings a database to
the current schema with the Alembic migrations shipped in this package.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from pathlib import Path

import sqlalchemy as sa
from sqlalchemy import event
from sqlalchemy.engine import Connection, Engine

from ..errors import Problem, ScenarioError

ENV_VAR = "REAGENTPLAN_DB"
#: How long a writer waits for another one on SQLite [s].
BUSY_TIMEOUT_S = 60.0
MIGRATIONS = Path(__file__).with_name("migrations")


class RecordError(ScenarioError):
    """Bad input to the record (a file of facts, a database URL, a plan id)."""

    def __init__(self, problems, title: str = "The record"):
        super().__init__(problems, title)


def resolve_url(url: str | None) -> str:
    """The database URL: ``url``, else ``REAGENTPLAN_DB``; a bare path means SQLite."""
    url = url or os.environ.get(ENV_VAR)
    if not url:
        raise RecordError(Problem(None, None, "--db", "no database given",
                                  f"--db URL (sqlite:///station.db or postgresql+psycopg://user@host/db) "
                                  f"or the environment variable {ENV_VAR}"), "The command")
    if "://" not in url:
        url = "sqlite:///" + str(Path(url))
    return url


def _sqlite_pragmas(dbapi_connection, _record) -> None:
    dbapi_connection.isolation_level = None  # SQLAlchemy emits BEGIN itself (below)
    cur = dbapi_connection.cursor()
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute(f"PRAGMA busy_timeout={int(BUSY_TIMEOUT_S * 1000)}")
    cur.execute("PRAGMA foreign_keys=ON")
    cur.close()


def _sqlite_begin(conn: Connection) -> None:
    # take the write lock at the start, so two writers queue on the busy timeout instead
    # of one failing when it upgrades a read lock
    conn.exec_driver_sql("BEGIN IMMEDIATE")


def connect(url: str | None = None, *, check: bool = True) -> Engine:
    """An engine for ``url`` (or ``REAGENTPLAN_DB``).  ``check`` opens it once and
    raises `RecordError` with a plain message when it cannot be opened."""
    url = resolve_url(url)
    try:
        parsed = sa.engine.make_url(url)
    except sa.exc.ArgumentError:
        raise RecordError(Problem(None, None, "--db", f"'{url}' is not a database URL",
                                  "sqlite:///path/to/station.db or postgresql+psycopg://user@host/db"),
                          "The command") from None
    if parsed.get_backend_name() == "sqlite":
        db = parsed.database
        if db and db != ":memory:" and not Path(db).parent.exists():
            raise RecordError(Problem(None, None, "--db", f"the folder of {db} does not exist",
                                      "a SQLite file in an existing folder"), "The command")
        engine = sa.create_engine(parsed, connect_args={"timeout": BUSY_TIMEOUT_S})
        event.listen(engine, "connect", _sqlite_pragmas)
        event.listen(engine, "begin", _sqlite_begin)
    elif parsed.get_backend_name() == "postgresql":
        if parsed.drivername == "postgresql":
            parsed = parsed.set(drivername="postgresql+psycopg")
        engine = sa.create_engine(parsed, pool_pre_ping=True)
    else:
        raise RecordError(Problem(None, None, "--db", f"the database kind '{parsed.get_backend_name()}'",
                                  "sqlite:// or postgresql+psycopg://"), "The command")
    if check:
        try:
            with engine.connect() as conn:
                conn.exec_driver_sql("SELECT 1")
        except (sa.exc.OperationalError, sa.exc.DatabaseError, sa.exc.InterfaceError) as exc:
            engine.dispose()
            reason = str(getattr(exc, "orig", exc)).strip().splitlines()[0]
            raise RecordError(Problem(None, None, "--db", f"the database {parsed.render_as_string(hide_password=True)} "
                                      f"could not be opened ({reason})",
                                      "a reachable database (check the path, host, user and password)"),
                              "The command") from None
    return engine


def alembic_config(engine: Engine):
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS))
    cfg.attributes["engine"] = engine
    return cfg


def upgrade(engine: Engine, revision: str = "head") -> tuple[str | None, str | None]:
    """Bring the database to ``revision`` (the newest by default).  Returns the
    revisions before and after."""
    from alembic import command

    before = current_revision(engine)
    command.upgrade(alembic_config(engine), revision)
    return before, current_revision(engine)


def current_revision(engine: Engine) -> str | None:
    from alembic.runtime.migration import MigrationContext

    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def head_revision() -> str:
    from alembic.script import ScriptDirectory

    return ScriptDirectory(str(MIGRATIONS)).get_current_head()


def require_current(engine: Engine) -> None:
    """Raise `RecordError` unless the database is at the newest schema."""
    rev, head = current_revision(engine), head_revision()
    if rev != head:
        found = "an empty database" if rev is None else f"schema revision {rev}"
        raise RecordError(Problem(None, None, "--db", found,
                                  f"schema revision {head}: run `reagentplan db upgrade --db URL` first"),
                          "The database")


@contextlib.contextmanager
def write_transaction(engine: Engine, lock_key: int = 0x7265636F) -> Iterator[Connection]:
    """One transaction for a whole write; concurrent writers queue (SQLite: BEGIN
    IMMEDIATE; PostgreSQL: a transaction-scoped advisory lock)."""
    with engine.begin() as conn:
        if conn.dialect.name == "postgresql":
            conn.execute(sa.text("SELECT pg_advisory_xact_lock(:k)"), {"k": lock_key})
        yield conn
