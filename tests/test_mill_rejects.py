"""Mill (pulveriser) rejects: the template and loader, the balance, the daily haul, its
cost and breaches, and the input errors.

Molar masses are the IUPAC standard atomic weights through `reagentplan.chemistry`
(the `periodictable` package); the SO2 conversion check is AP-42 Section 1.1 (about
95 % of the fuel sulfur burned leaves as SO2).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from helpers import START, minimal_sheets, set_value, workbook_bytes, write_workbook
from reagentplan import chemistry as chem
from reagentplan.balance import (BALANCE_COLUMNS, BalanceParams, Drivers, balance_frame,
                                 mass_balance, scenario_drivers)
from reagentplan.cli import main
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

REJECT_COLUMNS = ["mill_rejects_pct", "rejects_sulfur_share_pct"]


def with_rejects(s: dict, rejects: dict[str, tuple[float, float]], sites=(("Mill Pit", 6.0, None, None),)):
    """Add the reject columns to ``coal_sources`` ({source: (rejects %, S share %)}) and
    ``mill_rejects`` rows (site, cost per t, max t/d, airspace t) to ``disposal``."""
    s["coal_sources"][0] = s["coal_sources"][0] + REJECT_COLUMNS
    for row in s["coal_sources"][1:]:
        row += list(rejects.get(row[0], (None, None)))
    s["disposal"] += [[site, "mill_rejects", cost, cap, air] for site, cost, cap, air in sites]
    return s


def hand_sheets(days=5, sites=(("Mill Pit", 6.0, None, None),)):
    """1,000 t/day of coal at 3 % S and 10 % ash; the mills reject 2 % of it, carrying
    20 % of the sulfur."""
    s = minimal_sheets(days=days)
    set_value(s, "coal_sources", 0, "sulfur_pct", 3.0)
    return with_rejects(s, {"Coal A": (2.0, 20.0)}, sites)


# ------------------------------------------------------------------ template, loader, balance


def test_hand_worked_example_through_template_loader_and_balance(tmp_path):
    """The blank template, filled as a user would, with 1,000 t/day of coal at 3 % S and
    10 % ash, 2 % of it rejected by the mills carrying 20 % of the sulfur:

    - rejects: 1,000 × 2 % = 20 t; sulfur fed 1,000 × 3 % = 30 t
    - sulfur in rejects: 30 × 20 % = 6 t (the rejects are 30 % S, as if 56 % pyrite:
      within the 53.4 % S of pure FeS2, IUPAC weights, that the loader holds them to)
    - sulfur burned: 30 − 6 = 24 t
    - SO2 formed: 24 × 0.95 × M_SO2 / M_S = 24 × 0.95 × 64.058 / 32.06 = 45.556 t
      (AP-42 Section 1.1: about 95 % of the sulfur burned to SO2; IUPAC weights)
    - ash to the boiler: 100 − (20 − 6) = 86 t: fly ash 68.8 t, bottom ash 17.2 t (the
      80/20 split of pulverised coal, common practice, no source)
    """
    tpl = tmp_path / "blank.xlsx"
    assert main(["template", str(tpl)]) == 0
    wb = load_workbook(tpl)
    header = [c.value for c in wb["coal_sources"][1]]
    assert set(REJECT_COLUMNS) <= set(header)
    notes = {(r[0].value, r[1].value): r[2].value for r in wb["notes"].iter_rows(min_row=2)}
    assert "reject" in notes[("coal_sources", "mill_rejects_pct")]
    assert "Usual 0 to 1.5" in notes[("coal_sources", "mill_rejects_pct")]
    assert "mill_rejects" in notes[("disposal", "material")]
    src = hand_sheets()
    for name in ("plant", "scrubber"):
        given = {r[0]: r[1] for r in src[name][1:]}
        for row in wb[name].iter_rows(min_row=2):
            if row[0].value in given:
                row[1].value = given[row[0].value]
    for name in ("units", "generation", "coal_sources", "coal_blend", "storage", "suppliers",
                 "buyers", "disposal"):
        ws = wb[name]
        cols = [c.value for c in ws[1]]
        for r in src[name][1:]:
            rec = dict(zip(src[name][0], r))
            ws.append([rec.get(h) for h in cols])
    for name in ("firm_orders", "generation_history", "coal_quality_history"):
        del wb[name]
    filled = tmp_path / "filled.xlsx"
    wb.save(filled)
    out = tmp_path / "out"
    assert main(["balance", str(filled), "--out", str(out)]) == 0
    bal = pd.read_csv(out / "balance.csv")
    assert list(bal.columns[-2:]) == ["mill_rejects_t", "s_rejects_t"]
    day = bal.iloc[0]
    assert day["coal_t"] == pytest.approx(1000.0)
    assert day["mill_rejects_t"] == pytest.approx(20.0)
    assert day["s_rejects_t"] == pytest.approx(6.0)
    assert day["so2_formed_t"] == pytest.approx(24 * 0.95 * chem.SO2 / chem.S)
    assert day["so2_formed_t"] == pytest.approx(45.556, abs=5e-4)
    assert day["fly_ash_t"] == pytest.approx(68.8)
    assert day["bottom_ash_t"] == pytest.approx(17.2)


def test_no_reject_columns_is_todays_balance_bit_for_bit():
    """Without the columns (or with them empty) the balance is the one before rejects:
    every column equal to the bit, SO2 formed exactly coal × S × 0.95 × M_SO2 / M_S / 100
    (the AP-42 1.1 formula as the balance wrote it), ash exactly coal × ash %."""
    scn = load_scenario(workbook_bytes(minimal_sheets(days=6)))
    plain = balance_frame(scn)
    conversion = BalanceParams.from_scenario(scn).so2_conversion
    empty = balance_frame(load_scenario(workbook_bytes(with_rejects(minimal_sheets(days=6), {}, ()))))
    pd.testing.assert_frame_equal(plain, empty, check_exact=True)
    assert (plain["mill_rejects_t"] == 0).all() and (plain["s_rejects_t"] == 0).all()
    coal = plain["coal_t"].to_numpy()
    assert np.array_equal(plain["so2_formed_t"].to_numpy(),
                          coal * 2.0 * (conversion * chem.SO2 / chem.S / 100))
    assert np.array_equal(plain["bottom_ash_t"].to_numpy(), coal * 10.0 * 0.01 * (1 - 0.8))


def params(**changes) -> BalanceParams:
    base = BalanceParams(
        boiler="pc", so2_conversion=0.95, fly_ash_share=0.8, fly_ash_loi=0.04, removal=0.97,
        ca_s_ratio=1.03, caco3=0.94, oxidation=0.97, gypsum_moisture=0.10, esp_efficiency=0.995,
        injection_removal=0.0, injection_ca_s_ratio=2.5, prescrubber_hcl_removal=0.0,
        gypsum_chloride_ppm=50.0, so2_limit_kg_per_gj=None, so2_limit_avg_days=30)
    return dataclasses.replace(base, **changes)


@pytest.mark.parametrize("inj", [0.0, 0.3])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_sulfur_closes_with_rejects_on_random_inputs(inj, seed):
    """Sulfur fed = in rejects + emitted + in gypsum + in fly ash + in bottom ash, on
    random coal, rejects and shares over (futures × days); and the ash closes too: ash of
    the coal fed = ash to the boiler + the rejects' mineral matter (rejects − their S)."""
    rng = np.random.default_rng(seed)
    shape = (3, 40)
    coal_heat = rng.uniform(0, 40000, shape)
    d = Drivers(generation_mwh=coal_heat / 10, heat_input_gj=coal_heat, coal_heat_gj=coal_heat,
                sulfur_pct=rng.uniform(0.3, 5.0, shape), ash_pct=rng.uniform(5, 30, shape),
                hhv_mj_per_kg=rng.uniform(18, 30, shape), chlorine_pct=rng.uniform(0, 0.2, shape),
                mill_rejects_pct=rng.uniform(0, 2, shape),
                rejects_sulfur_share_pct=rng.uniform(0, 30, shape))
    r = mass_balance(d, params(injection_removal=inj))
    out = (r["s_rejects_t"] + r["s_emitted_t"] + r["s_gypsum_t"] + r["s_fly_ash_t"]
           + r["s_bottom_ash_t"])
    np.testing.assert_allclose(out, r["s_in_t"], rtol=1e-12)
    assert (r["s_rejects_t"] > 0).any()
    np.testing.assert_allclose(r["s_rejects_t"], r["s_in_t"] * d.rejects_sulfur_share_pct / 100,
                               rtol=1e-12)
    np.testing.assert_allclose(r["mill_rejects_t"], r["coal_t"] * d.mill_rejects_pct / 100, rtol=1e-12)
    # ash: the 80/20 split of what reaches the boiler (no LOI on bottom ash)
    boiler_ash = r["bottom_ash_t"] / 0.2
    np.testing.assert_allclose(boiler_ash + r["mill_rejects_t"] - r["s_rejects_t"],
                               r["coal_t"] * d.ash_pct / 100, rtol=1e-9)


def test_rejects_blend_by_mass_and_their_sulfur_by_sulfur(tmp_path):
    """Half Coal A (3 % S, 2 % rejects carrying 20 % of its S) and half Coal B (0.5 % S,
    no rejects) from the third day: rejects 1 % of the blend; sulfur in rejects
    0.5 × 3 × 0.2 = 0.3 % of the blend, i.e. 0.3 / 1.75 = 17.14 % of the blend's
    sulfur; at 1,000 t/day 10 t of rejects carrying 3 t of sulfur."""
    s = minimal_sheets(days=4)
    set_value(s, "coal_sources", 0, "sulfur_pct", 3.0)
    s["coal_blend"] += [[START + dt.timedelta(days=2), "Coal A", 50],
                        [START + dt.timedelta(days=2), "Coal B", 50]]
    with_rejects(s, {"Coal A": (2.0, 20.0)})
    scn = load_scenario(workbook_bytes(s))
    d = scenario_drivers(scn)
    np.testing.assert_allclose(d.mill_rejects_pct[0], [2.0, 2.0, 1.0, 1.0])
    np.testing.assert_allclose(d.rejects_sulfur_share_pct[0], [20.0, 20.0, 30 / 1.75, 30 / 1.75])
    frame = balance_frame(scn)
    coal = frame["coal_t"].to_numpy()
    np.testing.assert_allclose(frame["mill_rejects_t"], coal * [0.02, 0.02, 0.01, 0.01])
    np.testing.assert_allclose(frame["s_rejects_t"], coal * [0.006, 0.006, 0.003, 0.003])


def test_futures_carry_the_rejects():
    """With no spread in the sulfur (sulfur_sd_pct 0, no history) the sampled futures
    burn the sheet's coal, so their SO2 and rejects equal the deterministic balance's."""
    from reagentplan.forecast.futures import sample_futures

    s = hand_sheets(days=6)
    set_value(s, "coal_sources", 0, "sulfur_sd_pct", 0.0)
    scn = load_scenario(workbook_bytes(s))
    frame = balance_frame(scn)
    f = sample_futures(scn, 3, seed=1, keep=("so2_formed_t", "mill_rejects_t", "s_rejects_t"))
    for k in ("so2_formed_t", "mill_rejects_t", "s_rejects_t"):
        np.testing.assert_allclose(f[k], np.broadcast_to(frame[k].to_numpy(), (3, 6)), rtol=1e-5)
    assert "mill_rejects_t" in BALANCE_COLUMNS and "s_rejects_t" in BALANCE_COLUMNS


# ------------------------------------------------------------------ input errors


def problems_of(s) -> list[str]:
    with pytest.raises(ScenarioError) as e:
        load_scenario(workbook_bytes(s))
    return [str(p) for p in e.value.problems]


def test_rejects_without_a_mill_rejects_site_is_an_input_error(tmp_path, capsys):
    """Coal with rejects and no ``disposal`` row for ``mill_rejects``: exit 2, and the
    message names the sheet, the column and the coal_sources row that rejects."""
    s = hand_sheets(sites=())
    path = write_workbook(s, tmp_path / "no_site.xlsx")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "sheet 'disposal', column 'material': no row for 'mill_rejects'" in err
    assert "coal_sources row(s) 2" in err
    assert "a row with material 'mill_rejects'" in err


def test_rejects_cannot_carry_more_sulfur_than_pyrite():
    """1 % rejects carrying 20 % of 3 % S would be 0.6 t of sulfur in 1 t of rejects
    (60 % S), above pure pyrite FeS2 at 2 × 32.06 / 119.97 = 53.45 % S (IUPAC weights):
    refused on the row and column; 1.2 % rejects carry it (50 % S)."""
    assert chem.PYRITE_S_SHARE == pytest.approx(0.5345, abs=1e-4)
    s = minimal_sheets()
    set_value(s, "coal_sources", 0, "sulfur_pct", 3.0)
    with_rejects(s, {"Coal A": (1.0, 20.0)})
    found = problems_of(s)
    assert len(found) == 1
    assert found[0].startswith("sheet 'coal_sources', row 2, column 'rejects_sulfur_share_pct'")
    assert "53.4 % sulfur" in found[0] and "at most 17.8 %" in found[0]
    set_value(s, "coal_sources", 0, "mill_rejects_pct", 1.2)
    load_scenario(workbook_bytes(s))


def test_rejects_mineral_matter_within_the_ash_and_none_for_a_fluidised_bed():
    """Rejects of 8 % with 0.6 % S carry 7.4 % of mineral matter: above Coal B's 6 % ash
    (refused); a fluidised bed has no pulverisers (refused); out-of-range shares are
    refused by the schema's hard range; 5 % rejects are possible but unusual (warned)."""
    s = with_rejects(minimal_sheets(), {"Coal B": (8.0, 0.0)})
    found = problems_of(s)
    assert any(p.startswith("sheet 'coal_sources', row 3, column 'mill_rejects_pct'")
               and "above the coal's ash of 6 %" in p for p in found)
    s = with_rejects(minimal_sheets(), {"Coal A": (0.5, 5.0)})
    set_value(s, "plant", "boiler", None, "cfb")
    s["storage"] = [r for r in s["storage"] if r[0] != "gypsum"]
    s["buyers"] = [r for r in s["buyers"] if r[1] != "gypsum"]
    s["disposal"] = [r for r in s["disposal"] if r[1] != "gypsum"]
    found = problems_of(s)
    assert any(p.startswith("sheet 'coal_sources', row 2, column 'mill_rejects_pct'")
               and "boiler = cfb" in p for p in found)
    s = with_rejects(minimal_sheets(), {"Coal A": (25.0, 120.0)})
    found = problems_of(s)
    assert any("column 'mill_rejects_pct': found 25" in p for p in found)
    assert any("column 'rejects_sulfur_share_pct': found 120" in p for p in found)
    scn = load_scenario(workbook_bytes(with_rejects(minimal_sheets(), {"Coal A": (5.0, 10.0)})))
    warned = [w for w in scn.warnings if w.column == "mill_rejects_pct"]
    assert len(warned) == 1 and warned[0].row == 2 and "from memory" in warned[0].source


# ------------------------------------------------------------------ haul, cost, breach

TWO_SITES = (("Dear Pit", 9.0, 5, 30), ("Cheap Pit", 5.0, 12, None))


def test_haul_cheapest_first_within_daily_limit_and_airspace():
    """20 t of rejects a day for 10 days (the hand-worked coal).  Cheap Pit ($5/t, 12 t/d)
    takes 12 t every day; Dear Pit ($9/t, 5 t/d, 30 t of airspace) takes 5 t on days
    0-5, then is full.  Cost 10 × 12 × 5 + 30 × 9 = $870.  Left over 3 t a day on days
    0-5 and 8 t a day after: the reject bins (2 days × 20 t = 40 t) hold 3, 6, ..., 18,
    26, 34 t, then overflow by 2 t on day 8 and 8 t on day 9: 10 t not hauled, one
    breach over those two days naming both limits and the full bins, 40 t waiting at
    the end.  No lane of the model is made."""
    from reagentplan.schedule.lanes import build_lanes
    from reagentplan.schedule.rejects import haul_rejects, rejects_breaches

    scn = load_scenario(workbook_bytes(hand_sheets(days=10, sites=TWO_SITES)))
    frame = balance_frame(scn)
    np.testing.assert_allclose(frame["mill_rejects_t"], 20.0)
    haul = haul_rejects(scn, frame["mill_rejects_t"])
    assert [d.site for d in haul.sites] == ["Cheap Pit", "Dear Pit"]
    np.testing.assert_allclose(haul.hauled_t["Cheap Pit"], 12.0)
    np.testing.assert_allclose(haul.hauled_t["Dear Pit"], [5] * 6 + [0] * 4, atol=1e-9)
    np.testing.assert_allclose(haul.unhauled_t, [0] * 8 + [2, 8], atol=1e-9)
    np.testing.assert_allclose(haul.waiting_t, [3, 6, 9, 12, 15, 18, 26, 34, 40, 40], atol=1e-9)
    assert haul.cost.sum() == pytest.approx(870.0)
    (b,) = rejects_breaches(haul, scn.dates)
    assert b["store"] == "mill_rejects" and b["tonnes"] == pytest.approx(10.0)
    assert (b["first_date"], b["last_date"]) == ("2030-03-12", "2030-03-13")
    assert "reject bins full" in b["cause"]
    assert "Cheap Pit at its daily limit of 12 t" in b["cause"]
    assert "airspace used up at Dear Pit" in b["cause"]
    assert not any(lane.material == "mill_rejects" for lane in build_lanes(scn, frame))


def test_a_closed_site_sends_the_rejects_to_the_next():
    """Cheap Pit closed on the second day (a lane closure): that day Dear Pit takes its
    5 t and 15 t wait in the bins (they hold 40 t); Cheap Pit takes them with the third
    day's 20 t.  No breach."""
    from reagentplan.schedule.rejects import haul_rejects, rejects_breaches

    s = hand_sheets(days=3, sites=(("Dear Pit", 9.0, 5, None), ("Cheap Pit", 5.0, None, None)))
    day = START + dt.timedelta(days=1)
    s["lane_closures"] = [["party", "mode", "first_date", "last_date"], ["Cheap Pit", None, day, day]]
    scn = load_scenario(workbook_bytes(s))
    haul = haul_rejects(scn, balance_frame(scn)["mill_rejects_t"])
    np.testing.assert_allclose(haul.hauled_t["Cheap Pit"], [20, 0, 35])
    np.testing.assert_allclose(haul.hauled_t["Dear Pit"], [0, 5, 0])
    np.testing.assert_allclose(haul.unhauled_t, 0.0, atol=1e-9)
    np.testing.assert_allclose(haul.waiting_t, [0, 15, 0], atol=1e-9)
    assert rejects_breaches(haul, scn.dates) == []


def test_a_site_closed_on_sundays_makes_no_breach():
    """The only rejects site is closed every Sunday (lane closures): Sunday's 20 t wait in
    the bins and go on Monday with Monday's (40 t that day), so four weeks of rejects
    make no breach and cost 27 × 20 × $6 hauled + 20 t waiting at the end; a closure of three days running (60 t made,
    bins of 40 t) still overflows by 20 t - 20 t is one breach naming the closure.
    Common practice, no source: reject bins sized for a weekend."""
    from reagentplan.schedule.rejects import haul_rejects, rejects_breaches, waiting_end_cost

    s = hand_sheets(days=28)
    sundays = [START + dt.timedelta(days=i) for i in range(28) if (START + dt.timedelta(days=i)).weekday() == 6]
    s["lane_closures"] = [["party", "mode", "first_date", "last_date"]] + [["Mill Pit", None, d, d] for d in sundays]
    scn = load_scenario(workbook_bytes(s))
    haul = haul_rejects(scn, balance_frame(scn)["mill_rejects_t"])
    hauled = haul.hauled_t["Mill Pit"]
    sunday = np.array([d.weekday() == 6 for d in scn.dates])
    monday = np.array([d.weekday() == 0 for d in scn.dates]) & (np.arange(28) > 0)
    assert hauled[sunday].sum() == 0 and np.allclose(hauled[monday], 40.0)
    assert haul.unhauled_t.sum() == 0 and rejects_breaches(haul, scn.dates) == []
    # the horizon ends on a Sunday: its 20 t wait, charged at the end at the site's $6/t
    assert haul.cost.sum() == pytest.approx(27 * 20 * 6.0) and haul.waiting_t[-1] == pytest.approx(20.0)
    assert waiting_end_cost(haul) == pytest.approx(120.0)

    s = hand_sheets(days=10)
    s["lane_closures"] = [["party", "mode", "first_date", "last_date"],
                          ["Mill Pit", None, START + dt.timedelta(days=2), START + dt.timedelta(days=4)]]
    scn = load_scenario(workbook_bytes(s))
    haul = haul_rejects(scn, balance_frame(scn)["mill_rejects_t"])
    np.testing.assert_allclose(haul.unhauled_t, [0, 0, 0, 0, 20, 0, 0, 0, 0, 0], atol=1e-9)
    (b,) = rejects_breaches(haul, scn.dates)
    assert "Mill Pit closed" in b["cause"] and b["tonnes"] == pytest.approx(20.0)


def test_plan_and_baseline_pay_the_same_haul_and_report_the_breach(tmp_path):
    """Through ``reagentplan plan``: the cost line ``mill_rejects_disposal`` is $870 for
    the plan and the baseline alike (the hand-worked haul above), the 10 t the bins cannot
    hold is a breach (exit 1) charged at the overflow penalty, and plan.xlsx shows the haul on its
    Mill rejects, Daily balance and Costs sheets."""
    path = write_workbook(hand_sheets(days=10, sites=TWO_SITES), tmp_path / "rejects.xlsx")
    out = tmp_path / "out"
    assert main(["plan", str(path), "--out", str(out), "--futures", "0", "--time-limit", "20"]) == 1
    summary = json.loads((out / "summary.json").read_text())
    assert summary["costs"]["mill_rejects_disposal"] == pytest.approx(870.0)
    assert summary["baseline_costs"]["mill_rejects_disposal"] == pytest.approx(870.0)
    assert summary["costs"]["overflow_penalty"] >= 10 * 1000 - 1e-6
    (b,) = [b for b in summary["breaches"] if b["store"] == "mill_rejects"]
    assert b["tonnes"] == pytest.approx(10.0) and "daily limit" in b["cause"]
    bal = pd.read_csv(out / "balance.csv")
    np.testing.assert_allclose(bal["mill_rejects_t"], 20.0)
    mv = pd.read_csv(out / "movements.csv")
    assert "mill_rejects" not in set(mv["material"])
    wb = load_workbook(out / "plan.xlsx", read_only=True)
    costs = {r[0]: r[1] for r in wb["Costs"].iter_rows(min_row=5, values_only=True)}
    assert costs["mill rejects disposal"] == pytest.approx(870.0)
    daily = list(wb["Daily balance"].iter_rows(values_only=True))
    head = list(daily[0])
    assert daily[1][head.index("mill rejects [t]")] == pytest.approx(20.0)
    assert daily[1][head.index("mill rejects hauled [t]")] == pytest.approx(17.0)
    assert daily[1][head.index("mill rejects haul cost [USD]")] == pytest.approx(12 * 5 + 5 * 9)
    sheet = list(wb["Mill rejects"].iter_rows(min_row=4, values_only=True))
    assert list(sheet[0][:3]) == ["date", "rejects made [t]", "to Cheap Pit [t]"]
    assert sum(r[-1] for r in sheet[1:]) == pytest.approx(870.0)


def test_no_rejects_no_sheet_and_a_zero_cost_line(tmp_path):
    """A plan of coal without rejects: the cost line is 0, no breach names the rejects,
    and plan.xlsx has no Mill rejects sheet."""
    from reagentplan.output.plan_workbook import rejects_frame
    from reagentplan.schedule import make_plan

    scn = load_scenario(workbook_bytes(minimal_sheets(days=8)))
    r = make_plan(scn, firm_days=8, time_limit=10)
    assert r.evaluation.costs["mill_rejects_disposal"] == 0.0
    assert not any(b["store"] == "mill_rejects" for b in r.breaches)

    class Run:
        plan = r

    assert rejects_frame(Run) is None


def test_a_study_variant_gets_its_own_rejects_under_shared_drivers():
    """Drivers sampled from a scenario without rejects, run through a variant whose coal
    has them (as a study does): the variant's futures carry its rejects, 2 % of the coal
    fed, with 20 % of the sulfur; the base scenario's futures carry none."""
    from reagentplan.forecast.futures import futures_from_drivers, sample_drivers

    base = minimal_sheets(days=5)
    set_value(base, "coal_sources", 0, "sulfur_pct", 3.0)
    samples = sample_drivers(load_scenario(workbook_bytes(base)), 4, seed=2)
    keep = ("coal_t", "mill_rejects_t", "s_rejects_t")
    plain = futures_from_drivers(samples, load_scenario(workbook_bytes(base)), keep=keep)
    assert not plain["mill_rejects_t"].any()
    variant = futures_from_drivers(samples, load_scenario(workbook_bytes(hand_sheets(days=5))), keep=keep)
    np.testing.assert_allclose(variant["mill_rejects_t"], 0.02 * variant["coal_t"], rtol=1e-5)
    assert (variant["s_rejects_t"] > 0).all()
