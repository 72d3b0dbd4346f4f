"""Property: a mutated good workbook is either accepted or rejected with ScenarioError,
never with any other exception; and an accepted one always balances."""

from __future__ import annotations

import datetime as dt
import os

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers import clone, minimal_sheets, workbook_bytes
from reagentplan.balance import balance_frame
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

BASE = minimal_sheets(days=6)

values = st.one_of(
    st.none(),
    st.integers(-10**7, 10**7),
    st.floats(-1e9, 1e9, allow_nan=False, allow_infinity=False),
    st.text(max_size=12),
    st.sampled_from(["Mon-Fri", "Nov-Mar", "rail", "gypsum", "U1", "Coal A", "#x", "nan", "inf",
                     "2030-03-05", "1e400", "-0", "Sun-Sat", "100%"]),
    st.dates(dt.date(1990, 1, 1), dt.date(2040, 1, 1)),
    st.booleans(),
)


@st.composite
def mutated(draw):
    sheets = clone(BASE)
    for _ in range(draw(st.integers(1, 3))):
        name = draw(st.sampled_from(sorted(sheets)))
        rows = sheets[name]
        kind = draw(st.sampled_from(["cell", "cell", "cell", "header", "drop_row", "dup_row",
                                     "drop_sheet", "add_col"]))
        if kind == "cell" and len(rows) > 1:
            i = draw(st.integers(1, len(rows) - 1))
            j = draw(st.integers(0, len(rows[i]) - 1))
            rows[i][j] = draw(values)
        elif kind == "header":
            j = draw(st.integers(0, len(rows[0]) - 1))
            rows[0][j] = draw(st.one_of(st.text(max_size=15), st.sampled_from(
                ["capacity_st", "load_st", "hhv_btu_per_lb", "price_per_st", "note", None])))
        elif kind == "drop_row" and len(rows) > 1:
            del rows[draw(st.integers(1, len(rows) - 1))]
        elif kind == "dup_row" and len(rows) > 1:
            rows.append(list(rows[draw(st.integers(1, len(rows) - 1))]))
        elif kind == "drop_sheet":
            del sheets[name]
        elif kind == "add_col":
            rows[0].append(draw(st.text(max_size=10)))
            for r in rows[1:]:
                r.append(draw(values))
    return sheets


@settings(max_examples=int(os.environ.get("FUZZ_EXAMPLES", "120")), deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated())
def test_mutated_workbook_accepted_or_clear_error(sheets):
    try:
        data = workbook_bytes(sheets)
    except Exception:  # openpyxl refuses to write some values (e.g. control characters)
        return
    try:
        scenario = load_scenario(data)
    except ScenarioError as exc:
        assert exc.problems
        assert all(p.expected for p in exc.problems)
        return
    frame = balance_frame(scenario)
    assert len(frame) == scenario.plant.horizon_days
