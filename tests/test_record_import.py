"""Recording facts: idempotence, conflicts refused whole, --replace with its audit
trail, and bad input on every sheet (sheet, row, column, found, expected; exit 2;
nothing written).  Run on SQLite and on a real PostgreSQL server."""

from __future__ import annotations

import datetime as dt

import pytest
import sqlalchemy as sa

from reagentplan.cli import main
from reagentplan.record.db import connect

from record_data import day, record_sheets, scenario_path, write_record

TODAY = "2030-03-03"  # the day before the minimal workbook's start


def counts(url: str) -> dict[str, int]:
    engine = connect(url)
    names = ["imports", "stock_surveys", "arrivals", "shipments", "orders", "generation_history",
             "coal_quality_history", "replaced_values"]
    with engine.connect() as conn:
        out = {n: conn.execute(sa.text(f"SELECT COUNT(*) FROM {n}")).scalar() for n in names}
    engine.dispose()
    return out


@pytest.fixture
def db(db_url):
    assert main(["db", "upgrade", "--db", db_url]) == 0
    return db_url


def record(db, path, *extra):
    return main(["record", str(path), "--db", db, "--as-of", TODAY, *extra])


def test_record_then_again_changes_nothing(db, tmp_path, capsys):
    wb = scenario_path(tmp_path)
    path = write_record(record_sheets(), tmp_path / "week.xlsx")
    assert record(db, path, "--scenario", str(wb)) == 0
    out = capsys.readouterr().out
    assert "arrivals: 2 added, 0 unchanged" in out and "generation_history: 7 added" in out
    first = counts(db)
    assert first["imports"] == 1 and first["arrivals"] == 2 and first["generation_history"] == 7
    assert record(db, path, "--scenario", str(wb)) == 0
    out = capsys.readouterr().out
    assert "Nothing new" in out and "arrivals: 0 added, 2 unchanged" in out
    assert counts(db) == first
    # each fact remembers its file and when
    engine = connect(db)
    with engine.connect() as conn:
        name, when = conn.execute(sa.text(
            "SELECT i.file_name, i.recorded_at FROM arrivals a JOIN imports i ON a.import_id = i.id "
            "WHERE a.ticket = 'T-1001'")).one()
    engine.dispose()
    assert name == "week.xlsx" and when is not None


def test_conflict_is_named_and_refused_whole_then_replaced_with_audit(db, tmp_path, capsys):
    sheets = record_sheets()
    assert record(db, write_record(sheets, tmp_path / "a.xlsx")) == 0
    before = counts(db)
    sheets["arrivals"][1][3] = 975.0          # T-1001 re-weighed
    sheets["arrivals"].append([day(6), "Quarry Q", 1, 990.0, "T-1003", 94.0])  # a new one too
    changed = write_record(sheets, tmp_path / "b.xlsx")
    capsys.readouterr()
    assert record(db, changed) == 2
    err = capsys.readouterr().err
    assert "sheet 'arrivals', row 2, column 'tonnes'" in err
    assert "supplier Quarry Q, ticket T-1001" in err and "985.5" in err and "975" in err
    assert "--replace" in err and "Traceback" not in err
    assert counts(db) == before  # not even the new T-1003
    assert record(db, changed, "--replace") == 0
    out = capsys.readouterr().out
    assert "arrivals: 1 added, 1 unchanged, 1 replaced" in out
    engine = connect(db)
    with engine.connect() as conn:
        tonnes = conn.execute(sa.text("SELECT tonnes FROM arrivals WHERE ticket='T-1001'")).scalar()
        audit = conn.execute(sa.text(
            "SELECT r.sheet, r.\"column\", r.old_value, r.new_value, i.file_name, i.recorded_by "
            "FROM replaced_values r JOIN imports i ON r.import_id = i.id")).all()
    engine.dispose()
    assert tonnes == 975.0
    assert [tuple(a[:5]) for a in audit] == [("arrivals", "tonnes", "985.5", "975.0", "b.xlsx")]
    assert audit[0][5]


def test_csv_and_us_customary_columns(db, tmp_path, capsys):
    (tmp_path / "stock_surveys.csv").write_text(
        "date,store,level_st,method\n2030-02-25,limestone,1102.31,survey\n", encoding="utf-8")
    assert record(db, tmp_path / "stock_surveys.csv") == 0
    engine = connect(db)
    with engine.connect() as conn:
        level = conn.execute(sa.text("SELECT level_t FROM stock_surveys")).scalar()
    engine.dispose()
    # 1 short ton = 0.90718474 t exactly (NIST SP 811, through pint)
    assert level == pytest.approx(1102.31 * 0.90718474, rel=1e-12)
    (tmp_path / "arrival.csv").write_text("date,supplier\n", encoding="utf-8")
    assert record(db, tmp_path / "arrival.csv") == 2
    assert "did you mean 'arrivals'" in capsys.readouterr().err


BAD = [
    # (sheet, data row index, column, new value, words expected in the message)
    ("stock_surveys", 0, "store", "limestnoe", ["row 2", "column 'store'", "did you mean 'limestone'"]),
    ("stock_surveys", 0, "level_t", -5, ["row 2", "column 'level_t'", "at least 0"]),
    ("stock_surveys", 1, "date", dt.date(2030, 3, 9), ["row 3", "column 'date'", "in the future"]),
    ("arrivals", 0, "supplier", "Quarry W", ["row 2", "column 'supplier'", "did you mean 'Quarry Q'"]),
    ("arrivals", 1, "tonnes", -1000, ["row 3", "column 'tonnes'", "at least 0.001"]),
    ("arrivals", 0, "loads", 3, ["row 2", "column 'tonnes'", "1500 to 3300 t for 3 load(s) of 1000 t"]),
    ("arrivals", 0, "date", dt.date(2030, 4, 1), ["row 2", "in the future"]),
    ("shipments", 0, "party", "Bored Co", ["row 2", "column 'party'", "did you mean 'Board Co'"]),
    ("shipments", 0, "loads", 1, ["row 2", "column 'tonnes'", "for 1 load(s) of 25 t"]),
    ("shipments", 1, "tonnes", -3, ["row 3", "column 'tonnes'"]),
    ("shipments", 0, "material", "gipsum", ["row 2", "column 'material'", "did you mean 'gypsum'"]),
    ("orders", 0, "supplier", "Quary Q", ["row 2", "did you mean 'Quarry Q'"]),
    ("orders", 0, "status", "booked?", ["row 2", "column 'status'", "booked, cancelled"]),
    ("orders", 1, "loads", 0, ["row 3", "column 'loads'", "from 1 to 10000"]),
    ("generation_history", 2, "unit", "U2", ["row 4", "column 'unit'", "unknown unit 'U2'"]),
    ("generation_history", 0, "mwh", 9999, ["row 2", "column 'mwh'", "at most 4800 MWh"]),
    ("generation_history", 3, "date", dt.date(2031, 1, 1), ["row 5", "in the future"]),
    ("coal_quality_history", 0, "source", "Coal Z", ["row 2", "column 'source'", "unknown source"]),
    ("coal_quality_history", 1, "sulfur_pct", 120, ["row 3", "column 'sulfur_pct'", "from 0 to 100"]),
]


@pytest.mark.parametrize("sheet,row,column,value,words", BAD,
                         ids=[f"{b[0]}-{b[2]}-{i}" for i, b in enumerate(BAD)])
def test_bad_input_names_the_place_and_writes_nothing(sheet, row, column, value, words, tmp_path,
                                                      capsys):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    sheets = record_sheets()
    j = sheets[sheet][0].index(column)
    sheets[sheet][1 + row][j] = value
    path = write_record(sheets, tmp_path / "bad.xlsx")
    before = counts(url)
    capsys.readouterr()
    assert record(url, path, "--scenario", str(scenario_path(tmp_path))) == 2
    err = capsys.readouterr().err
    assert f"sheet '{sheet}'" in err and "Traceback" not in err
    for w in words:
        assert w in err, (w, err)
    assert counts(url) == before


@pytest.mark.parametrize("sheet", ["stock_surveys", "arrivals", "shipments", "orders",
                                   "generation_history", "coal_quality_history"])
def test_duplicate_keys_within_a_file(sheet, tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    assert main(["db", "upgrade", "--db", url]) == 0
    sheets = record_sheets()
    sheets[sheet].append(list(sheets[sheet][1]))
    n = len(sheets[sheet])
    capsys.readouterr()
    assert record(url, write_record(sheets, tmp_path / "dup.xlsx")) == 2
    err = capsys.readouterr().err
    assert f"sheet '{sheet}', row {n}" in err and "a duplicate of row 2" in err
    assert counts(url)["imports"] == 0


def test_survey_above_capacity_is_recorded_and_flagged(db, tmp_path, capsys):
    sheets = {"stock_surveys": [["date", "store", "level_t"], [day(1), "limestone", 5200]]}
    assert record(db, write_record(sheets, tmp_path / "s.xlsx"), "--scenario",
                  str(scenario_path(tmp_path))) == 0
    out = capsys.readouterr().out
    assert "above the capacity 5000 t" in out and "row 2" in out
    assert counts(db)["stock_surveys"] == 1


def test_a_lab_result_typed_as_a_fraction_is_recorded_with_a_warning(db, tmp_path, capsys):
    """The same usual ranges as the workbook (`reagentplan.schema.PLAUSIBLE`): sulfur
    0.021 % where 2.1 % was meant is possible, so it is recorded, and flagged."""
    sheets = {"coal_quality_history": [["date", "source", "sulfur_pct", "ash_pct", "hhv_mj_per_kg"],
                                       [day(1), "Coal A", 0.021, 10.2, 24.8]]}
    assert record(db, write_record(sheets, tmp_path / "lab.xlsx")) == 0
    out = capsys.readouterr().out
    assert "warning:" in out and "sheet 'coal_quality_history', row 2, column 'sulfur_pct'" in out
    assert counts(db)["coal_quality_history"] == 1


def test_unknown_sheet_and_unknown_column(db, tmp_path, capsys):
    sheets = record_sheets()
    sheets["arivals"] = sheets.pop("arrivals")
    sheets["shipments"][0][4] = "tons"
    assert record(db, write_record(sheets, tmp_path / "x.xlsx")) == 2
    err = capsys.readouterr().err
    assert "sheet 'arivals'" in err and "did you mean 'arrivals'" in err
    assert counts(db)["imports"] == 0
    del sheets["arivals"]
    assert record(db, write_record(sheets, tmp_path / "y.xlsx")) == 2
    err = capsys.readouterr().err
    assert "sheet 'shipments', row 1, column 'tons'" in err and "did you mean 'tonnes'" in err


def test_record_needs_an_upgraded_database(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'fresh.db'}"
    assert record(url, write_record(record_sheets(), tmp_path / "a.xlsx")) == 2
    assert "db upgrade" in capsys.readouterr().err
