from __future__ import annotations

import pytest

from helpers import minimal_sheets, write_workbook


@pytest.fixture
def sheets():
    return minimal_sheets()


@pytest.fixture
def minimal_path(tmp_path):
    return write_workbook(minimal_sheets(), tmp_path / "minimal.xlsx")


@pytest.fixture(scope="session")
def demo_path(tmp_path_factory):
    from reagentplan.demo.build_demo import build_demo_workbook

    return build_demo_workbook(tmp_path_factory.mktemp("demo") / "demo_station.xlsx")


# ---------------------------------------------------------------- the operations record


@pytest.fixture(scope="session")
def pg_server():
    """One throwaway PostgreSQL server for the session (tests/pg.py); skipped with the
    reason where no server can be started on this machine."""
    from pg import PgServer, find_bin

    if find_bin() is None:
        pytest.skip("PostgreSQL server binaries (initdb, pg_ctl) are not installed; "
                    "scripts/test installs Debian's 'postgresql' when run as root")
    server = PgServer()
    yield server
    server.stop()


@pytest.fixture(params=["sqlite", "postgresql"])
def db_url(request, tmp_path):
    """A fresh, empty database URL: a SQLite file, and a database on the session's
    throwaway PostgreSQL server."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'record.db'}"
    return request.getfixturevalue("pg_server").new_database()
