"""The command line as a user meets it: exit codes, messages, files written or not."""

from __future__ import annotations

import subprocess
import sys

import pandas as pd
import pytest
from openpyxl import load_workbook

from helpers import START, minimal_sheets, set_value, write_workbook
from reagentplan.cli import main


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "reagentplan.cli", *args],
                          capture_output=True, text=True, timeout=300)


def test_check_sound_workbook(minimal_path, capsys):
    assert main(["check", str(minimal_path)]) == 0
    assert "sound" in capsys.readouterr().out


def test_bad_input_exit_2_no_traceback_no_output(tmp_path):
    s = minimal_sheets()
    set_value(s, "scrubber", "removal_pct", None, 120)
    path = write_workbook(s, tmp_path / "bad.xlsx")
    out = tmp_path / "out"
    r = run("balance", str(path), "--out", str(out))
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert "sheet 'scrubber', row 2, column 'value (removal_pct)': found 120" in r.stderr
    assert not out.exists()
    assert not any(p.name.startswith(".out") for p in tmp_path.iterdir())


def test_not_a_workbook_exit_2(tmp_path):
    p = tmp_path / "x.xlsx"
    p.write_text("hello")
    r = run("check", str(p))
    assert r.returncode == 2 and "not an .xlsx workbook" in r.stderr and "Traceback" not in r.stderr


def test_failed_run_keeps_previous_output(tmp_path, minimal_path):
    out = tmp_path / "out"
    assert main(["balance", str(minimal_path), "--out", str(out)]) == 0
    before = (out / "balance.csv").read_bytes()
    bad = minimal_sheets()
    set_value(bad, "units", 0, "capacity_mw", "big")
    assert main(["balance", str(write_workbook(bad, tmp_path / "bad.xlsx")), "--out", str(out)]) == 2
    assert (out / "balance.csv").read_bytes() == before


def test_template_filled_in_matches_hand_calculation(tmp_path):
    """The blank template, filled as a user would, balances to the hand-worked example
    of test_balance.test_hand_worked_example (1,000 t/day of 2 % S coal): limestone
    63.045 t/day and wet gypsum 116.09 t/day."""
    tpl = tmp_path / "blank.xlsx"
    assert main(["template", str(tpl)]) == 0
    wb = load_workbook(tpl)
    src = minimal_sheets(days=5)
    for name in ("plant", "scrubber"):
        ws = wb[name]
        given = {r[0]: r[1] for r in src[name][1:]}
        for row in ws.iter_rows(min_row=2):
            if row[0].value in given:
                row[1].value = given[row[0].value]
    for name in ("units", "generation", "coal_sources", "coal_blend", "storage", "suppliers",
                 "buyers", "disposal"):
        ws = wb[name]
        header = [c.value for c in ws[1]]
        for r in src[name][1:]:
            rec = dict(zip(src[name][0], r))
            ws.append([rec.get(h) for h in header])
    for name in ("firm_orders", "generation_history", "coal_quality_history"):
        del wb[name]  # optional sheets left out
    filled = tmp_path / "filled.xlsx"
    wb.save(filled)
    out = tmp_path / "out"
    assert main(["balance", str(filled), "--out", str(out)]) == 0
    bal = pd.read_csv(out / "balance.csv", parse_dates=["date"])
    assert len(bal) == 5 and bal["date"].iloc[0].date() == START
    assert bal["limestone_t"].iloc[0] == pytest.approx(63.045, rel=5e-4)
    assert bal["gypsum_wet_t"].iloc[0] == pytest.approx(116.09, rel=5e-4)
    assert bal["so2_emitted_t"].iloc[0] == pytest.approx(1.1389, rel=5e-4)


def test_template_has_notes_dropdowns_and_example_rows(tmp_path):
    path = tmp_path / "t.xlsx"
    main(["template", str(path)])
    wb = load_workbook(path)
    for name in ("plant", "units", "generation", "coal_sources", "coal_blend", "scrubber",
                 "storage", "suppliers", "buyers", "disposal", "notes"):
        assert name in wb.sheetnames
    sup = wb["suppliers"]
    assert [c.value for c in sup[1]][:3] == ["supplier", "mode", "load_t"]
    assert sup["A2"].value.startswith("#")
    assert sup["A1"].comment is not None
    formulas = [dv.formula1 for dv in sup.data_validations.dataValidation]
    assert '"rail,truck"' in formulas


def test_demo_runs(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--futures", "100", "--time-limit", "30"]) == 0
    for name in ("demo_station.xlsx", "balance.csv", "movements.csv", "inventory.csv", "risk.csv",
                 "summary.json", "forecast.csv", "plan.xlsx"):
        assert (out / name).exists(), name
    text = capsys.readouterr().out
    assert "cost of the reorder-point policy" in text and "Caution" in text
    assert "limestone trains / trucks booked" in text
    # the weekly loop through the invented record: eight weeks, each re-planned
    assert "Weekly loop" in text and "week 8 as of" in text and "late train" in text
    assert (out / "weekly" / "record.db").exists()
    assert (out / "weekly" / "orders_changed_week_8.csv").exists()


def test_a_plan_over_the_permit_exits_1_and_names_it(tmp_path, capsys):
    """Every store within its limits but the stack over a 0.065 kg/GJ permit at 60 %
    removal: the plan is not sound, and says why (exit 1, a so2_permit breach)."""
    import json

    s = minimal_sheets(days=10)
    set_value(s, "plant", "so2_limit_kg_per_gj", None, 0.065)
    set_value(s, "scrubber", "removal_pct", None, 60)
    path = write_workbook(s, tmp_path / "w.xlsx")
    out = tmp_path / "out"
    assert main(["plan", str(path), "--out", str(out), "--futures", "0"]) == 1
    summary = json.loads((out / "summary.json").read_text())
    permit = [b for b in summary["breaches"] if b["store"] == "so2_permit"]
    assert len(permit) == 1 and permit[0]["tonnes"] > 0
    assert "so2_permit: over the SO2 permit limit" in capsys.readouterr().out


def _late_sulfur_station(tmp_path):
    """30 days at the fixed 97 % removal against a 0.03 kg/GJ permit (3-day average):
    0.5 % S coal (about 0.014 kg/GJ emitted) for 20 days, then 2 % S coal (about 0.046
    kg/GJ): the permit is broken from about day 20 on."""
    import datetime as dt

    from helpers import START

    s = minimal_sheets(days=30)
    set_value(s, "plant", "so2_limit_kg_per_gj", None, 0.03)
    s["coal_blend"] = [["date", "source", "share_pct"], [START, "Coal B", 100],
                       [START + dt.timedelta(days=20), "Coal A", 100]]
    return write_workbook(s, tmp_path / "w.xlsx"), START + dt.timedelta(days=20)


def test_a_breach_in_the_outlook_is_listed_but_does_not_exit_1(tmp_path, capsys):
    """With a 14-day firm window the permit breach from day 20 is in the outlook: listed
    in summary.json as ``window: outlook``, said on the console to be re-planned, exit 0.
    With a 28-day firm window the same breach is firm: exit 1."""
    import datetime as dt
    import json

    path, start_high = _late_sulfur_station(tmp_path)
    out = tmp_path / "out"
    assert main(["plan", str(path), "--out", str(out), "--futures", "0", "--firm-days", "14"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    permit = [b for b in summary["breaches"] if b["store"] == "so2_permit"]
    assert permit and all(b["window"] == "outlook" for b in permit), permit
    assert permit[0]["first_date"] >= f"{start_high:%Y-%m-%d}"
    assert all(b["window"] in ("firm", "outlook") for b in summary["breaches"])
    text = capsys.readouterr().out
    assert "in the outlook beyond the firm window" in text and "re-planned" in text
    assert "no limit broken in the firm window" in text
    out2 = tmp_path / "out2"
    assert main(["plan", str(path), "--out", str(out2), "--futures", "0", "--firm-days", "28"]) == 1
    summary = json.loads((out2 / "summary.json").read_text())
    permit = [b for b in summary["breaches"] if b["store"] == "so2_permit"]
    assert permit and all(b["window"] == "firm" for b in permit), permit
    assert "limit(s) broken in the firm window" in capsys.readouterr().out


def test_breach_windows_split_at_the_end_of_the_firm_window():
    """A breach starting before day ``firm_days`` is firm (even if it runs on), one starting
    on or after it is outlook; only firm ones count for the exit code."""
    import pandas as pd

    from reagentplan.schedule.causes import firm_breaches, mark_windows

    dates = pd.date_range("2030-01-01", periods=30)
    b = mark_windows([{"first_date": "2030-01-14", "last_date": "2030-01-20"},
                      {"first_date": "2030-01-15", "last_date": "2030-01-16"},
                      {"first_date": None}], dates, 14)
    assert [x["window"] for x in b] == ["firm", "outlook", "firm"]
    assert firm_breaches(b) == [b[0], b[2]]
    assert firm_breaches([{"store": "gypsum"}]) == [{"store": "gypsum"}]


def test_a_reader_that_closes_the_pipe_ends_the_command_quietly(minimal_path):
    """``reagentplan check WORKBOOK | head -1``: the reader is gone before the command
    writes (closed here at once, while the child is still starting); the command ends
    with Python's exit code for a broken pipe (1) and says nothing on stderr, rather
    than "Could not read or write a file" or "Exception ignored ... BrokenPipeError"."""
    proc = subprocess.Popen([sys.executable, "-m", "reagentplan", "check", str(minimal_path)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # the reader goes away, as head does after its line
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 1
    assert err == "", err


def test_check_piped_to_head_through_a_shell(minimal_path):
    """The same through a real shell pipe: one line out, nothing on stderr (whether head
    left before or after the command's last write)."""
    r = subprocess.run(f'"{sys.executable}" -m reagentplan check "{minimal_path}" | head -1',
                       shell=True, capture_output=True, text=True, timeout=120)
    assert "sound" in r.stdout and len(r.stdout.splitlines()) == 1
    assert r.stderr == "", r.stderr


def test_every_command_declares_the_shared_options_from_the_settings():
    """--time-limit, --firm-days, --risk-level, --futures and --solver default to the
    settings each command plans with (reagentplan.settings), not to numbers of their own."""
    from reagentplan.cli import build_parser
    from reagentplan.settings import PLAN, STUDY, WEEKLY_PLAN

    sub = next(a for a in build_parser()._actions if a.dest == "command").choices
    for name, base in (("plan", PLAN), ("study", STUDY), ("rehearse", WEEKLY_PLAN), ("dashboard", PLAN),
                       ("demo", PLAN)):
        defaults = {a.dest: a.default for a in sub[name]._actions}
        assert defaults["time_limit"] == base.time_limit, name
        if "firm_days" in defaults:
            assert defaults["firm_days"] == base.firm_days, name
        if "risk_level" in defaults:
            assert defaults["risk_level"] == pytest.approx(100 * base.risk_level), name
        if "solver" in defaults:
            assert defaults["solver"] == base.solver, name
    assert {a.dest: a.default for a in sub["rehearse"]._actions}["plan_futures"] == WEEKLY_PLAN.futures
    assert {a.dest: a.default for a in sub["study"]._actions}["futures"] == STUDY.futures
