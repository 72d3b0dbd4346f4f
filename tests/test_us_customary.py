"""The same scenario in metric and in US customary columns gives the same balance."""

from __future__ import annotations

import numpy as np
import pytest

from helpers import clone, write_workbook
from reagentplan.balance import balance_frame
from reagentplan.scenario import load_scenario

# NIST SP 811 Appendix B factors, typed here on purpose: the loader converts with pint,
# so this checks the two against each other.
ST = 0.90718474                      # t per short ton
BTU_J = 1055.05585262                # J per Btu (International Table)
LB = 0.45359237                      # kg per lb
US = {
    "capacity_t": ("capacity_st", 1 / ST), "safety_t": ("safety_st", 1 / ST),
    "initial_t": ("initial_st", 1 / ST), "load_t": ("load_st", 1 / ST),
    "min_t_per_month": ("min_st_per_month", 1 / ST), "max_t_per_month": ("max_st_per_month", 1 / ST),
    "max_t_per_day": ("max_st_per_day", 1 / ST), "airspace_t": ("airspace_st", 1 / ST),
    "price_per_t": ("price_per_st", ST), "cost_per_t": ("cost_per_st", ST),
    "heat_rate_gj_per_mwh": ("heat_rate_btu_per_kwh", 1e9 / BTU_J / 1e3),
    "hhv_mj_per_kg": ("hhv_btu_per_lb", 1e6 / BTU_J * LB),
    "so2_limit_kg_per_gj": ("so2_limit_lb_per_mmbtu", BTU_J * 1e6 / 1e9 / LB),
}


def to_us(sheets):
    out = clone(sheets)
    for name, rows in out.items():
        if rows[0][:2] == ["key", "value"]:
            for r in rows[1:]:
                if r[0] in US:
                    r[0], f = US[r[0]][0], US[r[0]][1]
                    r[1] = r[1] * f if r[1] is not None else None
            continue
        for j, col in enumerate(list(rows[0])):
            if col in US:
                rows[0][j], f = US[col]
                for r in rows[1:]:
                    if isinstance(r[j], (int, float)):
                        r[j] = r[j] * f
    return out


def test_metric_and_us_columns_give_the_same_balance(tmp_path, sheets):
    metric = load_scenario(write_workbook(sheets, tmp_path / "metric.xlsx"))
    us_sheets = to_us(sheets)
    assert us_sheets["units"][0][2] == "heat_rate_btu_per_kwh"
    us = load_scenario(write_workbook(us_sheets, tmp_path / "us.xlsx"))
    a, b = balance_frame(metric), balance_frame(us)
    for col in a.columns[1:]:
        if a[col].dtype == bool:
            assert (a[col] == b[col]).all()
        else:
            np.testing.assert_allclose(b[col], a[col], rtol=1e-3, err_msg=col)
    assert us.suppliers[0].price_per_t == pytest.approx(metric.suppliers[0].price_per_t, rel=1e-3)
    assert us.plant.so2_limit_kg_per_gj == pytest.approx(0.1, rel=1e-3)
