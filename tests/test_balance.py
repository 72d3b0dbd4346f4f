"""The mass balance against published factors, a hand-worked example and conservation."""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest

from helpers import minimal_sheets, set_value, workbook_bytes, write_workbook
from reagentplan import chemistry as chem
from reagentplan.balance import (BalanceParams, Drivers, balance_frame, mass_balance,
                                 scenario_drivers)
from reagentplan.scenario import load_scenario

LB_PER_SHORT_TON = 2000.0


def params(**changes) -> BalanceParams:
    base = BalanceParams(
        boiler="pc", so2_conversion=0.95, fly_ash_share=0.8, fly_ash_loi=0.0, removal=0.97,
        ca_s_ratio=1.03, caco3=0.94, oxidation=1.0, gypsum_moisture=0.10, esp_efficiency=1.0,
        injection_removal=0.0, injection_ca_s_ratio=2.5, prescrubber_hcl_removal=0.0,
        gypsum_chloride_ppm=50.0, so2_limit_kg_per_gj=None, so2_limit_avg_days=30)
    return dataclasses.replace(base, **changes)


def drivers(coal_t=1000.0, sulfur=2.0, ash=10.0, hhv=25.0, cl=0.0, gas_share=0.0, shape=(1, 1)):
    coal_heat = np.full(shape, coal_t * hhv)
    heat = coal_heat / (1 - gas_share)
    return Drivers(generation_mwh=heat / 10.0, heat_input_gj=heat, coal_heat_gj=coal_heat,
                   sulfur_pct=np.full(shape, sulfur), ash_pct=np.full(shape, ash),
                   hhv_mj_per_kg=np.full(shape, hhv), chlorine_pct=np.full(shape, cl))


@pytest.mark.parametrize("sulfur", [0.5, 1.0, 2.0, 3.5])
def test_ap42_bituminous_factor(sulfur):
    """AP-42 Table 1.1-3: uncontrolled SOx from pulverised bituminous coal is 38·S lb per
    short ton of coal (S in %), with about 95 % of the fuel sulfur leaving as SO2."""
    r = mass_balance(drivers(coal_t=1.0, sulfur=sulfur), params(removal=0.0))
    lb_per_short_ton = r["so2_formed_t"][0, 0] * LB_PER_SHORT_TON  # t SO2 per t coal, scaled
    assert lb_per_short_ton == pytest.approx(38 * sulfur, rel=0.01)


def test_ap42_subbituminous_factor():
    """AP-42 Table 1.1-3: 35·S lb/short ton for subbituminous coal, whose alkaline ash keeps
    more sulfur; that corresponds to a conversion of 35 / 38 × 95 % ≈ 87.5 %."""
    r = mass_balance(drivers(coal_t=1.0, sulfur=0.4), params(removal=0.0, so2_conversion=0.875))
    assert r["so2_formed_t"][0, 0] * LB_PER_SHORT_TON == pytest.approx(35 * 0.4, rel=0.01)


def test_hand_worked_example():
    """1,000 t of 2 % S coal, 95 % to SO2, 97 % removal, Ca/S 1.03, 94 % CaCO3, full
    oxidation, 10 % cake moisture, no chlorine.  IUPAC abridged weights: S 32.06,
    SO2 64.058, CaCO3 100.086, CaSO4·2H2O 172.164 g/mol.

    - sulfur: 1000 × 0.02 = 20 t
    - SO2 formed: 20 × 0.95 × 64.058 / 32.06 = 37.9633 t
    - SO2 removed: 37.9633 × 0.97 = 36.8244 t = 0.574860 Mmol; emitted 1.1389 t
    - CaCO3 fed: 0.574860 × 1.03 × 100.086 = 59.262 t; limestone 59.262 / 0.94 = 63.045 t
    - gypsum: 0.574860 × 172.164 = 98.970 t; excess CaCO3 0.574860 × 0.03 × 100.086
      = 1.7261 t; inerts 63.045 − 59.262 = 3.7827 t; dry cake 104.479 t
    - purity 98.970 / 104.479 = 94.73 %; wet cake 104.479 / 0.9 = 116.09 t
    - ash 100 t: fly 80 t, bottom 20 t (LOI 0, precipitator 100 %).
    """
    r = {k: v[0, 0] for k, v in mass_balance(drivers(), params()).items()}
    assert r["coal_t"] == pytest.approx(1000.0)
    assert r["so2_formed_t"] == pytest.approx(37.9633, rel=5e-4)
    assert r["so2_removed_t"] == pytest.approx(36.8244, rel=5e-4)
    assert r["so2_emitted_t"] == pytest.approx(1.1389, rel=5e-4)
    assert r["limestone_t"] == pytest.approx(63.045, rel=5e-4)
    assert r["gypsum_dry_t"] == pytest.approx(104.479, rel=5e-4)
    assert r["gypsum_purity_pct"] == pytest.approx(94.73, abs=0.02)
    assert r["gypsum_wet_t"] == pytest.approx(116.09, rel=5e-4)
    assert r["fly_ash_t"] == pytest.approx(80.0)
    assert r["bottom_ash_t"] == pytest.approx(20.0)


def test_removal_range_95_to_99_accepted_and_monotone():
    """Common practice, no source: wet limestone scrubbers remove 95-99 % of SO2."""
    emitted = [mass_balance(drivers(), params(removal=x))["so2_emitted_t"][0, 0]
               for x in (0.95, 0.97, 0.99)]
    assert emitted[0] > emitted[1] > emitted[2] > 0


def test_ash_split_80_20_for_pulverised_coal():
    """Common practice, no source: about 80 % of pulverised-coal ash leaves as fly ash."""
    r = mass_balance(drivers(ash=12.0), params())
    assert r["fly_ash_t"][0, 0] / (r["fly_ash_t"][0, 0] + r["bottom_ash_t"][0, 0]) == pytest.approx(0.8)


@pytest.mark.parametrize("boiler", ["pc", "cfb"])
@pytest.mark.parametrize("inj", [0.0, 0.3])
def test_sulfur_is_conserved(boiler, inj):
    """Sulfur in = emitted + in gypsum + in fly ash + in bottom ash (every path)."""
    p = params(boiler=boiler, injection_removal=inj if boiler == "pc" else 0.0,
               oxidation=0.97, esp_efficiency=0.995, fly_ash_loi=0.04,
               ca_s_ratio=2.5 if boiler == "cfb" else 1.03, fly_ash_share=0.6 if boiler == "cfb" else 0.8)
    rng = np.random.default_rng(1)
    d = drivers(shape=(3, 50))
    d = dataclasses.replace(d, sulfur_pct=rng.uniform(0.3, 4.0, (3, 50)))
    r = mass_balance(d, p)
    out = r["s_emitted_t"] + r["s_gypsum_t"] + r["s_fly_ash_t"] + r["s_bottom_ash_t"]
    np.testing.assert_allclose(out, r["s_in_t"], rtol=1e-12)


def test_limestone_covers_hcl():
    """CaCO3 + 2 HCl -> CaCl2 + H2O + CO2: 0.1 % Cl in 1,000 t coal is 1 t Cl = 1.028 t HCl,
    needing 1.028 / 36.46 / 2 × 100.09 = 1.411 t CaCO3 (IUPAC weights)."""
    base = mass_balance(drivers(cl=0.0), params(caco3=1.0))["limestone_t"][0, 0]
    with_cl = mass_balance(drivers(cl=0.1), params(caco3=1.0))["limestone_t"][0, 0]
    assert with_cl - base == pytest.approx(1.0 / chem.CL / 2 * chem.CACO3, rel=1e-9)
    assert with_cl - base == pytest.approx(1.411, rel=1e-3)
    pre = mass_balance(drivers(cl=0.1), params(caco3=1.0, prescrubber_hcl_removal=1.0))
    assert pre["limestone_t"][0, 0] == pytest.approx(base)


def test_injection_raises_fly_ash_so3_and_uses_limestone():
    """Sorbent solids join the fly ash: its SO3 rises and may exceed ASTM C618's 5.0 %
    maximum SO3 for class F fly ash."""
    plain = mass_balance(drivers(), params(so2_conversion=1.0))
    inj = mass_balance(drivers(), params(so2_conversion=1.0, injection_removal=0.4))
    assert plain["fly_ash_so3_pct"][0, 0] == pytest.approx(0.0)
    assert inj["fly_ash_so3_pct"][0, 0] > 5.0
    assert inj["limestone_injection_t"][0, 0] > 0
    assert inj["fly_ash_t"][0, 0] > plain["fly_ash_t"][0, 0]
    assert inj["gypsum_dry_t"][0, 0] < plain["gypsum_dry_t"][0, 0]


def test_loi_carbon_is_added_to_fly_ash():
    """Fly ash as collected = mineral ash / (1 − LOI)."""
    r = mass_balance(drivers(ash=10.0), params(fly_ash_loi=0.05))
    assert r["fly_ash_t"][0, 0] == pytest.approx(80.0 / 0.95)


def test_cfb_makes_no_gypsum_and_bed_limestone_goes_to_ash():
    r = mass_balance(drivers(), params(boiler="cfb", ca_s_ratio=2.5, removal=0.9, fly_ash_share=0.6))
    assert r["gypsum_wet_t"][0, 0] == 0.0
    assert np.isnan(r["gypsum_purity_pct"][0, 0])
    mol = 37.9633 * 0.9 / chem.SO2
    assert r["limestone_t"][0, 0] == pytest.approx(mol * 2.5 * chem.CACO3 / 0.94, rel=1e-3)
    assert r["fly_ash_t"][0, 0] + r["bottom_ash_t"][0, 0] > 100.0


def test_gas_share_burns_less_coal():
    coal = mass_balance(drivers(gas_share=0.2), params())
    assert coal["gas_heat_gj"][0, 0] == pytest.approx(0.25 * 25000)


def test_emission_rate_units_and_rolling_average():
    """kg/GJ to lb/MMBtu by NIST SP 811 (through pint); the rolling average is total
    emitted over total heat input in the window."""
    d = drivers(shape=(1, 6))
    d = dataclasses.replace(d, sulfur_pct=np.array([[1.0, 1.0, 1.0, 3.0, 3.0, 3.0]]))
    r = mass_balance(d, params(so2_limit_kg_per_gj=0.1, so2_limit_avg_days=3))
    rate = r["so2_kg_per_gj"][0]
    assert r["so2_lb_per_mmbtu"][0, 0] == pytest.approx(rate[0] / (0.45359237 / 1.05505585262))
    assert r["so2_rolling_kg_per_gj"][0, 4] == pytest.approx((rate[2] + 2 * rate[3]) / 3)
    assert r["so2_rolling_kg_per_gj"][0, 0] == pytest.approx(rate[0])


def test_vectorised_equals_per_day_loop():
    """The (futures × days) call gives what a plain loop over scalars gives."""
    rng = np.random.default_rng(7)
    shape = (4, 20)
    d = Drivers(*(rng.uniform(lo, hi, shape) for lo, hi in
                  [(0, 5000), (0, 50000), (0, 40000), (0.3, 4), (4, 15), (18, 28), (0, 0.2),
                   (0, 2), (0, 30)]))
    p = params(oxidation=0.98, fly_ash_loi=0.03, esp_efficiency=0.99, injection_removal=0.1,
               so2_limit_avg_days=1)
    vec = mass_balance(d, p)
    for f in range(shape[0]):
        for t in range(shape[1]):
            one = Drivers(*(np.array([[getattr(d, k.name)[f, t]]]) for k in dataclasses.fields(d)))
            res = mass_balance(one, p)
            for key in ("limestone_t", "gypsum_wet_t", "fly_ash_t", "so2_emitted_t",
                        "mill_rejects_t", "s_rejects_t"):
                assert vec[key][f, t] == pytest.approx(res[key][0, 0], rel=1e-12)


def test_balance_from_workbook_blend_and_gas(tmp_path):
    """Blends mix by as-received tonnes; a unit's gas share carries no sulfur."""
    s = minimal_sheets(days=4)
    s["coal_blend"] += [[s["coal_blend"][1][0] + dt.timedelta(days=2), "Coal A", 50],
                        [s["coal_blend"][1][0] + dt.timedelta(days=2), "Coal B", 50]]
    set_value(s, "units", 0, "gas_heat_share_pct", 20)
    scn = load_scenario(write_workbook(s, tmp_path / "b.xlsx"))
    d = scenario_drivers(scn)
    np.testing.assert_allclose(d.sulfur_pct[0], [2.0, 2.0, 1.25, 1.25])
    np.testing.assert_allclose(d.hhv_mj_per_kg[0], [25.0, 25.0, 22.5, 22.5])
    frame = balance_frame(scn)
    assert frame["coal_t"].iloc[0] == pytest.approx(25000 * 0.8 / 25.0)
    assert list(frame.columns[:12]) == [
        "date", "coal_t", "heat_input_gj", "so2_formed_t", "so2_removed_t", "so2_emitted_t",
        "so2_kg_per_gj", "limestone_t", "gypsum_wet_t", "gypsum_purity_pct", "fly_ash_t",
        "bottom_ash_t"]


def test_period_settings_change_purity_for_their_days(tmp_path):
    """An oxidation blower outage (oxidation 90 % for three days) lowers gypsum purity
    on those days only: sulfite replaces gypsum in the cake."""
    s = minimal_sheets(days=6)
    start = s["coal_blend"][1][0]
    s["period_settings"] = [["first_date", "last_date", "key", "value"],
                            [start + dt.timedelta(days=2), start + dt.timedelta(days=4), "oxidation_pct", 90]]
    frame = balance_frame(load_scenario(write_workbook(s, tmp_path / "p.xlsx")))
    purity = frame["gypsum_purity_pct"].to_numpy()
    assert purity[0] == pytest.approx(94.73, abs=0.02)
    assert (purity[2:5] < 90).all() and purity[5] == pytest.approx(purity[0])


def test_a_plan_over_the_permit_reports_it_as_a_breach():
    """A removal typed as a fraction (0.97 for 97 %) puts every day over a 0.065 kg/GJ
    limit: the breach names the permit, its dates and the SO2 over the limit, computed
    here by hand from the balance (emitted − limit × heat input)."""
    from reagentplan.schedule.permit import PERMIT, permit_breaches

    s = minimal_sheets(days=10)
    set_value(s, "plant", "so2_limit_kg_per_gj", None, 0.065)
    set_value(s, "scrubber", "removal_pct", None, 60)
    frame = balance_frame(load_scenario(workbook_bytes(s)))
    assert frame["so2_over_limit"].all()
    found = permit_breaches(frame, 60)
    assert len(found) == 1 and found[0]["store"] == PERMIT
    assert found[0]["first_date"] == f"{frame['date'].iloc[0]:%Y-%m-%d}"
    assert found[0]["last_date"] == f"{frame['date'].iloc[-1]:%Y-%m-%d}"
    by_hand = (frame["so2_emitted_t"] - 0.065 * frame["heat_input_gj"] / 1000).clip(lower=0).sum()
    assert found[0]["tonnes"] == pytest.approx(by_hand, abs=0.1)
    assert "60 % removal" in found[0]["cause"]
    set_value(s, "scrubber", "removal_pct", None, 99)
    set_value(s, "plant", "so2_limit_kg_per_gj", None, 5.0)
    assert permit_breaches(balance_frame(load_scenario(workbook_bytes(s)))) == []


def test_each_store_has_one_flow_column_of_the_balance():
    """The store -> balance column mapping is written once (`schema.STORE_FLOW_COLUMN`):
    every store has one, it is a column of the balance, and the plan, its evaluation,
    the record's as-of levels, the rehearsal's truth and the pipeline use that mapping."""
    from reagentplan import pipeline, schema
    from reagentplan.balance import BALANCE_COLUMNS
    from reagentplan.rehearse import truth
    from reagentplan.schedule import evaluate, plan

    assert tuple(schema.STORE_FLOW_COLUMN) == schema.STORES
    assert set(schema.STORE_FLOW_COLUMN.values()) <= set(BALANCE_COLUMNS)
    assert schema.STORE_FLOW_COLUMN["gypsum"] == "gypsum_wet_t"  # wet cake, as hauled
    assert plan.DEMAND_COLUMN == schema.STORE_FLOW_COLUMN
    assert evaluate.PRODUCTION == {s: schema.STORE_FLOW_COLUMN[s] for s in schema.BYPRODUCTS}
    assert pipeline.STORE_FLOWS is schema.STORE_FLOW_COLUMN
    assert truth.TRUE_FLOWS is schema.STORE_FLOW_COLUMN
