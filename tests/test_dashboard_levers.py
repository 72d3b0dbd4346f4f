"""The what-if panel's removal range and allowance price: the controls, their reading
into `apply_whatif` arguments, and a re-plan that carries them into the scenario."""

from __future__ import annotations

import json

import pytest

from helpers import START, minimal_sheets, workbook_bytes
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario
from reagentplan.settings import PlanSettings

from reagentplan.dashboard import callbacks
from reagentplan.dashboard.store import PlanStore, valid_id
from reagentplan.dashboard.views import controls as C


def sheets(lo=None, hi=None):
    s = minimal_sheets(days=14)
    if lo is not None:
        s["scrubber"] = [r for r in s["scrubber"] if r[0] != "removal_pct"]
        s["scrubber"] += [["removal_min_pct", lo], ["removal_max_pct", hi]]
    return s


@pytest.fixture(scope="module")
def fixed():
    return load_scenario(workbook_bytes(sheets()))


@pytest.fixture(scope="module")
def ranged():
    return load_scenario(workbook_bytes(sheets(95, 99)))


@pytest.fixture
def store(tmp_path):
    s = PlanStore(str(tmp_path / "plans"))
    yield s
    s.close()


def find(component, ident):
    """The component of a Dash layout tree with this id."""
    if getattr(component, "id", None) == ident:
        return component
    children = getattr(component, "children", None)
    for child in children if isinstance(children, (list, tuple)) else [children]:
        if child is not None and not isinstance(child, str):
            hit = find(child, ident)
            if hit is not None:
                return hit
    return None


def labels(component) -> list[str]:
    out = []
    if type(component).__name__ == "Label":
        out.append(component.children)
    children = getattr(component, "children", None)
    for child in children if isinstance(children, (list, tuple)) else [children]:
        if child is not None and not isinstance(child, str):
            out += labels(child)
    return out


def test_controls_show_the_range_and_an_empty_price(fixed, ranged):
    page = C.layout(fixed.scrubber.removal_pct, fixed.dates, "w.xlsx", fixed.scrubber.removal_range)
    assert find(page, C.REMOVAL_RANGE).value == [97.0, 97.0]  # a fixed removal: one value
    price = find(page, C.ALLOWANCE_PRICE)
    assert price.value is None and price.type == "number" and price.min == 0
    page = C.layout(ranged.scrubber.removal_pct, ranged.dates, "w.xlsx", ranged.scrubber.removal_range)
    assert find(page, C.REMOVAL_RANGE).value == [95.0, 99.0]
    words = " ".join(labels(page))
    assert "SO2 removal the plan may choose" in words and "SO2 allowance price" in words
    # the old three-argument call still works
    assert find(C.layout(97.0, fixed.dates, "w.xlsx"), C.REMOVAL_RANGE).value == [97.0, 97.0]


def test_untouched_levers_change_nothing(fixed, ranged):
    for scn, rng in ((fixed, [97.0, 97.0]), (ranged, [95.0, 99.0])):
        kw = callbacks.whatif_kwargs(scn, 100, 100, scn.scrubber.removal_pct, [], [0, 1], rng, None)
        assert kw == {"load_factor": 1.0, "sulfur_scale": 1.0, "removal_pct": None,
                      "rail_outage": None}
        assert callbacks.whatif_kwargs(scn, 100, 100, None, [], [0, 1], rng, "")["removal_pct"] is None


def test_moved_range_and_typed_price_become_arguments(fixed, ranged):
    kw = callbacks.whatif_kwargs(fixed, 100, 100, 97.0, [], [0, 1], [99.0, 95.5], "415")
    assert kw["removal_range"] == (95.5, 99.0) and kw["allowance_price"] == 415.0
    kw = callbacks.whatif_kwargs(ranged, 100, 100, 97.0, [], [0, 1], [96.0, 99.0], 0)
    assert kw["removal_range"] == (96.0, 99.0) and kw["allowance_price"] == 0.0


def test_scenario_controls_reset_the_range_and_the_price(ranged, store):
    sid = store.put("scenario", ranged, {"source": "w.xlsx"})
    out = callbacks.scenario_controls(store, sid)
    assert out[0] == 97.0 and out[5] == [95.0, 99.0] and out[6] is None


def test_replan_carries_the_range_and_price_into_the_planned_scenario(fixed, store):
    sid = store.put("scenario", fixed, {"source": "w.xlsx"})
    pid, message, cls = callbacks.replan(store, PlanSettings(futures=0, time_limit=20), sid,
                                         100, 100, 97.0, [], [0, 1],
                                         removal_range=[95.0, 99.0], allowance_price=420)
    assert valid_id(pid) and cls == "rp-msg good", message
    assert "SO2 removal chosen from 95 to 99 %" in message and "allowances at 420 per t" in message
    scn = store.get("run", pid).value.plan.scenario
    assert scn.scrubber.removal_range == (95.0, 99.0) and scn.scrubber.removal_pct == 97.0
    days = scn.allowance_days()
    assert (days["buy_price_per_t"] == 420).all() and scn.allowance_opening_t == 0.0
    assert days.index[0].date() == START


def test_replan_with_a_removal_outside_the_range_says_why(ranged, store):
    sid = store.put("scenario", ranged, {"source": "w.xlsx"})
    pid, message, cls = callbacks.replan(store, PlanSettings(futures=0), sid, 100, 100, 90.0, [],
                                         [0, 1], removal_range=[95.0, 99.0])
    assert cls == "rp-msg bad" and "outside the workbook's removal range 95 to 99 %" in message


def test_the_page_wires_the_new_controls(tmp_path, fixed):
    from reagentplan.dashboard.app import create_app

    run = run_plan(fixed, futures=0, time_limit=20)
    app = create_app(run=run, work_dir=tmp_path / "app")
    client = app.server.test_client()
    deps = json.loads(client.get("/_dash-dependencies").get_data(as_text=True))
    replan = [d for d in deps if "plan-id.data" in d["output"] and d["inputs"][0]["id"] == C.REPLAN]
    assert replan, "no re-plan callback"
    states = [(s["id"], s["property"]) for s in replan[0]["state"]]
    assert (C.REMOVAL_RANGE, "value") in states and (C.ALLOWANCE_PRICE, "value") in states
    layout = client.get("/_dash-layout").get_data(as_text=True)
    assert f'"id": "{C.REMOVAL_RANGE}"' in layout or f'"id":"{C.REMOVAL_RANGE}"' in layout
