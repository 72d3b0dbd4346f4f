"""The record's database: migrations on SQLite and a real PostgreSQL server, the
SQLite settings, an older schema upgraded with its data, and clear refusals."""

from __future__ import annotations

import datetime as dt

import sqlalchemy as sa

from reagentplan.cli import main
from reagentplan.record.db import connect, current_revision, head_revision, upgrade
from reagentplan.record.models import Base


def test_upgrade_from_empty_matches_models(db_url):
    engine = connect(db_url)
    assert current_revision(engine) is None
    before, after = upgrade(engine)
    assert (before, after) == (None, head_revision())
    from alembic.autogenerate import compare_metadata
    from alembic.migration import MigrationContext

    with engine.connect() as conn:
        diffs = compare_metadata(MigrationContext.configure(conn), Base.metadata)
    assert diffs == []  # the migrations build exactly the models' schema
    engine.dispose()


def test_sqlite_pragmas(tmp_path):
    engine = connect(f"sqlite:///{tmp_path / 's.db'}")
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() >= 1000
    engine.dispose()


def test_older_schema_upgraded_with_data_intact(db_url):
    """A database at revision 0001 (facts only) gains the plan tables; its facts stay."""
    engine = connect(db_url)
    upgrade(engine, "0001")
    with engine.begin() as conn:
        conn.execute(sa.text(
            "INSERT INTO imports (id, file_name, file_sha256, recorded_at, recorded_by, added, replaced) "
            "VALUES (1, 'old.xlsx', 'x', :t, 'someone', 1, 0)"), {"t": dt.datetime(2030, 1, 2)})
        conn.execute(sa.text(
            "INSERT INTO stock_surveys (date, store, level_t, method, import_id) "
            "VALUES (:d, 'limestone', 1234.5, 'survey', 1)"), {"d": dt.date(2030, 1, 1)})
    assert current_revision(engine) == "0001"
    assert not sa.inspect(engine).has_table("plan_versions")
    assert main(["db", "upgrade", "--db", db_url]) == 0
    assert current_revision(engine) == head_revision()
    assert sa.inspect(engine).has_table("plan_versions")
    with engine.connect() as conn:
        row = conn.execute(sa.text("SELECT date, store, level_t FROM stock_surveys")).one()
    assert (str(row[0])[:10], row[1], row[2]) == ("2030-01-01", "limestone", 1234.5)
    engine.dispose()


def test_unreachable_database_is_a_clear_refusal(tmp_path, capsys):
    assert main(["db", "upgrade", "--db", f"sqlite:///{tmp_path / 'no' / 'such' / 'x.db'}"]) == 2
    err = capsys.readouterr().err
    assert "does not exist" in err and "Traceback" not in err
    assert main(["db", "upgrade", "--db", "postgresql+psycopg://nobody@127.0.0.1:1/none"]) == 2
    err = capsys.readouterr().err
    assert "could not be opened" in err and "Traceback" not in err


def test_no_database_given(monkeypatch, capsys):
    monkeypatch.delenv("REAGENTPLAN_DB", raising=False)
    assert main(["db", "upgrade"]) == 2
    assert "REAGENTPLAN_DB" in capsys.readouterr().err


def test_shipped_old_schema_file_is_upgraded_and_used(tmp_path, capsys):
    """tests/fixtures/record_rev0001.db was made by schema revision 0001 (facts only):
    `db upgrade` adds the plan tables, keeps its facts, and the record plans from them."""
    import shutil
    from pathlib import Path

    from record_data import scenario_path

    db = tmp_path / "old.db"
    shutil.copy(Path(__file__).with_name("fixtures") / "record_rev0001.db", db)
    url = f"sqlite:///{db}"
    engine = connect(url)
    assert current_revision(engine) == "0001"
    engine.dispose()
    assert main(["record", str(tmp_path / "x.csv"), "--db", url]) == 2  # not upgraded yet
    assert "db upgrade" in capsys.readouterr().err
    assert main(["db", "upgrade", "--db", url]) == 0
    assert f"from revision 0001 to revision {head_revision()}" in capsys.readouterr().out
    engine = connect(url)
    with engine.connect() as conn:
        rows = conn.execute(sa.text("SELECT store, level_t FROM stock_surveys ORDER BY store")).all()
        who = conn.execute(sa.text("SELECT recorded_by FROM imports")).scalar()
    engine.dispose()
    assert [tuple(r) for r in rows] == [("gypsum", 900.0), ("limestone", 2500.0)] and who == "coordinator"
    wb = scenario_path(tmp_path)
    out = tmp_path / "plan"
    assert main(["plan", str(wb), "--db", url, "--as-of", "2030-03-03", "--out", str(out),
                 "--futures", "0"]) in (0, 1)
    import json

    summary = json.loads((out / "summary.json").read_text())
    assert summary["opening_stock"]["limestone"]["survey_date"] == "2030-02-25"
    assert summary["plan_id"] == 1
