"""Molar masses and stoichiometric ratios against independent references."""

import molmass
import pytest

from reagentplan import chemistry as chem


@pytest.mark.parametrize("formula, ours", [
    ("SO2", chem.SO2), ("CaCO3", chem.CACO3), ("CaSO4(H2O)2", chem.GYPSUM),
    ("CaSO4", chem.CASO4), ("CaO", chem.CAO), ("HCl", chem.HCL), ("SO3", chem.SO3),
])
def test_molar_masses_match_molmass_iupac(formula, ours):
    """IUPAC standard atomic weights, through the independent `molmass` library."""
    assert ours == pytest.approx(molmass.Formula(formula).mass, rel=2e-4)


def test_molar_masses_match_iupac_abridged_values():
    """IUPAC 2021 abridged standard atomic weights, from memory: S 32.06, O 15.999,
    Ca 40.078, C 12.011, H 1.008."""
    S, O, Ca, C, H = 32.06, 15.999, 40.078, 12.011, 1.008
    assert chem.SO2 == pytest.approx(S + 2 * O, rel=1e-4)
    assert chem.CACO3 == pytest.approx(Ca + C + 3 * O, rel=1e-4)
    assert chem.GYPSUM == pytest.approx(Ca + S + 4 * O + 2 * (2 * H + O), rel=1e-4)


def test_tonnes_of_limestone_and_gypsum_per_tonne_so2():
    """Common practice, no source: about 1.6 t CaCO3 and about 2.7 t gypsum per t of SO2
    removed at stoichiometry (Ca/S = 1, full oxidation)."""
    assert chem.CACO3 / chem.SO2 == pytest.approx(1.56, abs=0.05)
    assert chem.GYPSUM / chem.SO2 == pytest.approx(2.69, abs=0.05)
