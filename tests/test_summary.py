"""The console's cost split: cash and the workbook's penalty weights add up to the total
the plan is judged by, and only penalty items count as penalties."""

from __future__ import annotations

import pytest

from reagentplan.summary import PENALTY_ITEMS, cost_split, describe_breach


def test_cash_and_penalty_weights_add_up_to_the_total():
    costs = {"limestone_purchase": 1000.0, "freight": 200.0, "byproduct_sales": -300.0,
             "landfill": 50.0, "contract_penalty": 25.0, "end_stock_value": -75.0,
             "shortage_penalty": 400.0, "overflow_penalty": 100.0, "empty_penalty": 0.0}
    cash, penalty = cost_split(costs)
    assert penalty == pytest.approx(500.0)
    # a take-or-pay shortfall is paid at the contract's rate: cash, not a weight
    assert cash == pytest.approx(1000 + 200 - 300 + 50 + 25 - 75)
    assert cash + penalty == pytest.approx(sum(costs.values()))
    assert "contract_penalty" not in PENALTY_ITEMS


def test_a_permit_breach_reads_in_tonnes_of_so2():
    text = describe_breach({"store": "so2_permit", "kind": "over the SO2 permit limit",
                            "first_date": "2027-01-01", "last_date": "2027-01-09",
                            "tonnes": 12.34, "cause": "removal too low"})
    assert text.startswith("so2_permit: over the SO2 permit limit 2027-01-01 to 2027-01-09")
    assert "12.3 t SO2 over the limit" in text
