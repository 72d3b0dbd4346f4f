"""Limestone quality: from the stone's CaCO3 to the tonnes the scrubber needs and to the
gypsum's purity, and the well-mixed silo that carries the quality from the deliveries to
the scrubber."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from molmass import Formula

from reagentplan.balance import (caco3_for_so2_t, gypsum_solids_t, limestone_for_so2_t,
                                 silo_replay, stone_for_caco3_t)


def M(formula: str) -> float:
    """Molar mass [g/mol] from IUPAC standard atomic weights, through `molmass` (an
    independent library: the code under test uses `periodictable`)."""
    return Formula(formula).mass


def test_worked_example_stone_and_gypsum():
    """1,000 t of SO2 removed at Ca/S 1.03 (IUPAC molar masses, via molmass):

    - SO2 removed: 1,000 t / 64.064 t/Mmol = 15.6094 Mmol.
    - CaCO3 fed: 15.6094 × 1.03 × 100.086 t/Mmol = 1,609.1 t.
    - Stone: 1,609.1 / 0.96 = 1,676.2 t of 96 % stone; 1,609.1 / 0.90 = 1,787.9 t of 90 %.
    - Gypsum at 99 % oxidation, no fly ash in the cake:
      CaSO4·2H2O 15.6094 × 0.99 × 172.17 = 2,660.6 t; CaSO3·½H2O 15.6094 × 0.01 × 129.15
      = 20.2 t; unreacted CaCO3 15.6094 × 0.03 × 100.086 = 46.9 t; stone inerts
      1,676.2 − 1,609.1 = 67.0 t (96 %) or 1,787.9 − 1,609.1 = 178.8 t (90 %).
    - Dry cake 2,794.7 t, purity 2,660.6 / 2,794.7 = 95.2 % with the 96 % stone;
      2,906.4 t, purity 91.5 % with the 90 % stone: under a board plant's 94 % limit
      (94-95 % wallboard purity: common practice, no source).
    """
    so2 = 1000.0
    mol = so2 / M("SO2")
    assert mol == pytest.approx(15.6094, rel=1e-4)
    caco3 = mol * 1.03 * M("CaCO3")
    assert caco3 == pytest.approx(1609.1, abs=0.1)
    assert caco3_for_so2_t(so2, 1.03) == pytest.approx(caco3, rel=2e-4)
    for purity, stone_expected, inerts_expected, cake_purity in ((0.96, 1676.2, 67.0, 95.20),
                                                                  (0.90, 1787.9, 178.8, 91.54)):
        stone = limestone_for_so2_t(so2, 1.03, purity)
        assert stone == pytest.approx(stone_expected, abs=0.3)
        assert stone_for_caco3_t(caco3, purity) == pytest.approx(stone, rel=2e-4)
        gyp, sulfite, unreacted, inerts, fly = gypsum_solids_t(so2, 0.99, 1.03, stone, purity, 0.0)
        assert gyp == pytest.approx(mol * 0.99 * M("CaSO4(H2O)2"), rel=2e-4)
        assert gyp == pytest.approx(2660.6, abs=0.6)
        assert sulfite == pytest.approx(mol * 0.01 * (M("CaSO3") + M("H2O") / 2), rel=2e-4)
        assert sulfite == pytest.approx(20.2, abs=0.05)
        assert unreacted == pytest.approx(46.9, abs=0.05)
        assert inerts == pytest.approx(inerts_expected, abs=0.1)
        dry = gyp + sulfite + unreacted + inerts + fly
        assert 100 * gyp / dry == pytest.approx(cake_purity, abs=0.01)


@settings(max_examples=60, deadline=None)
@given(so2=st.floats(1, 5000), ca_s=st.floats(1.0, 1.2), low=st.floats(0.6, 0.99),
       rise=st.floats(0.001, 0.3))
def test_more_caco3_never_needs_more_stone_or_lowers_purity(so2, ca_s, low, rise):
    """Raising the stone's CaCO3 never raises the tonnes needed, nor lowers the purity."""
    high = min(low + rise, 1.0)
    a, b = limestone_for_so2_t(so2, ca_s, low), limestone_for_so2_t(so2, ca_s, high)
    assert b <= a + 1e-9
    pa = gypsum_solids_t(so2, 0.99, ca_s, a, low, 1.0)
    pb = gypsum_solids_t(so2, 0.99, ca_s, b, high, 1.0)
    assert pb[0] / sum(pb) >= pa[0] / sum(pa) - 1e-12


def _hand_mix(initial_t, initial_c, arrivals, need):
    """A second, plainer replay: CaCO3 and other tonnes tracked separately; deliveries
    first, then the day's CaCO3 drawn in the silo's own proportion."""
    caco3, other = initial_t * initial_c, initial_t * (1 - initial_c)
    out = []
    for (t, c), n in zip(arrivals, need):
        caco3 += t * c
        other += t * (1 - c)
        share = caco3 / (caco3 + other)
        drawn = n / share
        caco3 -= n
        other -= drawn - n
        out.append((caco3 + other, share, drawn))
    return out


def test_silo_mix_of_two_stones_by_hand():
    """10,000 t at 96 % in the silo; 5,000 t of 90 % stone arrives on day 1 (of 0-2);
    1,000 t of CaCO3 needed a day.  Day 0: 1,000 / 0.96 = 1,041.7 t drawn, 8,958.3 t left
    at 96 %.  Day 1: 8,958.3 t × 0.96 + 5,000 × 0.90 = 13,100 t CaCO3 in 13,958.3 t:
    93.85 %; 1,065.5 t drawn."""
    need = np.array([1000.0, 1000.0, 1000.0])
    arr = np.array([0.0, 5000.0, 0.0])
    comp = np.stack([arr * 0.90, arr * 0.0], axis=1)
    r = silo_replay(10000.0, [0.96, 0.0], arr, comp, need)
    assert r["stone_t"][0] == pytest.approx(1041.67, abs=0.01)
    assert r["frac"][1, 0] == pytest.approx(13100.0 / 13958.33, rel=2e-4)
    assert r["stone_t"][1] == pytest.approx(1000 / (13100.0 / 13958.33), rel=1e-6)
    assert r["frac"][2, 0] == pytest.approx(r["frac"][1, 0])  # drawing does not change the mix
    hand = _hand_mix(10000.0, 0.96, [(0, 0.9), (5000, 0.9), (0, 0.9)], need)
    for d, (level, share, drawn) in enumerate(hand):
        assert r["level_t"][d] == pytest.approx(level, rel=1e-9)
        assert r["frac"][d, 0] == pytest.approx(share, rel=1e-9)
        assert r["stone_t"][d] == pytest.approx(drawn, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_silo_replay_matches_a_plain_replay_and_conserves_caco3(data):
    n = data.draw(st.integers(3, 30))
    init = data.draw(st.floats(2000, 20000))
    c0 = data.draw(st.floats(0.8, 0.99))
    need = np.array(data.draw(st.lists(st.floats(10, 300), min_size=n, max_size=n)))
    tons = np.array(data.draw(st.lists(st.sampled_from([0.0, 0.0, 500.0, 2000.0]), min_size=n, max_size=n)))
    quality = np.array(data.draw(st.lists(st.floats(0.75, 0.99), min_size=n, max_size=n)))
    r = silo_replay(init, [c0], tons, (tons * quality)[:, None], need)
    hand = _hand_mix(init, c0, list(zip(tons, quality)), need)
    assert np.allclose(r["level_t"], [h[0] for h in hand], rtol=1e-9)
    assert np.allclose(r["frac"][:, 0], [h[1] for h in hand], rtol=1e-9)
    # CaCO3 in = CaCO3 drawn + CaCO3 left
    left = r["level_t"][-1] * r["frac"][-1, 0]
    assert init * c0 + (tons * quality).sum() == pytest.approx(need.sum() + left, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_single_stone_silo_is_the_plain_balance(data):
    """With one stone (initial stock and every delivery alike) the silo feeds that stone
    every day: the stone drawn is the balance's limestone at that CaCO3."""
    n = data.draw(st.integers(2, 20))
    c = data.draw(st.floats(0.7, 1.0))
    need = np.array(data.draw(st.lists(st.floats(1, 200), min_size=n, max_size=n)))
    tons = np.array(data.draw(st.lists(st.sampled_from([0.0, 1000.0]), min_size=n, max_size=n)))
    r = silo_replay(5000.0, [c], tons, (tons * c)[:, None], need)
    assert np.allclose(r["frac"][:, 0], c)
    assert np.allclose(r["stone_t"], need / c)
