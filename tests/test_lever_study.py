"""The study's ``--vary`` reaches the new workbook values through the loader: the
scrubber's removal range and the allowances sheet's prices."""

from __future__ import annotations

import datetime as dt
import io

import pytest

from helpers import START, minimal_sheets, workbook_bytes
from reagentplan.errors import ScenarioError
from reagentplan.study.grid import build_grid
from reagentplan.workbook import read_raw


def raw(with_range=True):
    s = minimal_sheets(days=10)
    if with_range:
        s["scrubber"] += [["removal_min_pct", 95], ["removal_max_pct", 99]]
    s["allowances"] = [["date", "holding_t", "allocated_t", "buy_price_per_t", "sell_price_per_t",
                        "max_trade_t_per_month"], [START - dt.timedelta(days=1), 500, None, 400, 380, None]]
    return read_raw(io.BytesIO(workbook_bytes(s)))


def test_vary_the_lowest_removal():
    grid = build_grid(raw(), ["scrubber.removal_min_pct=93,96"])
    assert [c.scenario.scrubber.removal_range for c in grid.cases] == [(93.0, 99.0), (96.0, 99.0)]


def test_vary_a_bound_into_a_clash_is_refused_with_the_loader_message():
    with pytest.raises(ScenarioError) as info:
        build_grid(raw(), ["scrubber.removal_min_pct=99.5"])
    assert any("removal_min_pct = 99.5 is above removal_max_pct = 99" in str(p)
               for p in info.value.problems)


def test_vary_a_bound_the_workbook_leaves_out_needs_its_pair():
    with pytest.raises(ScenarioError) as info:
        build_grid(raw(with_range=False), ["scrubber.removal_max_pct=99"])
    assert any("without removal_min_pct" in str(p) for p in info.value.problems)


def test_vary_the_allowance_price_of_a_row():
    day = (START - dt.timedelta(days=1)).isoformat()
    grid = build_grid(raw(), [f"allowances[{day}].buy_price_per_t=450,600"])
    prices = [c.scenario.allowance_days()["buy_price_per_t"].iloc[0] for c in grid.cases]
    assert prices == [450.0, 600.0]
