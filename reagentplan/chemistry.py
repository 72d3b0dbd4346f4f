"""Molar masses and the stoichiometry of limestone flue-gas desulfurisation.

Molar masses are computed from the IUPAC standard atomic weights as tabulated by the
`periodictable` library; nothing is typed by hand.

Reactions (wet limestone forced oxidation; furnace sorbent injection)::

    CaCO3 + SO2 + 1/2 O2 + 2 H2O -> CaSO4.2H2O + CO2      (gypsum)
    CaCO3 + SO2 + 1/2 H2O        -> CaSO3.1/2H2O + CO2    (unoxidised sulfite)
    CaCO3 + 2 HCl                -> CaCl2 + H2O + CO2     (chloride purge)
    CaCO3 -> CaO + CO2;  CaO + SO2 + 1/2 O2 -> CaSO4      (in the furnace or bed)

References
----------
IUPAC Commission on Isotopic Abundances and Atomic Weights, *Standard atomic weights of
the elements* (as shipped by the `periodictable` package).
Srivastava, R. K. and Jozewicz, W. (2001), "Flue gas desulfurization: the state of the
art", J. Air & Waste Manage. Assoc. 51:1676-1688 (reaction scheme).
"""

from __future__ import annotations

from functools import lru_cache

import periodictable


@lru_cache(maxsize=None)
def molar_mass(formula: str) -> float:
    """Molar mass of a chemical formula [g/mol = kg/kmol = t/Mmol].

    ``formula`` uses `periodictable` syntax, e.g. ``"CaSO4(H2O)2"`` for gypsum.
    """
    return float(periodictable.formula(formula).mass)


S = molar_mass("S")
SO2 = molar_mass("SO2")
SO3 = molar_mass("SO3")
CACO3 = molar_mass("CaCO3")
CAO = molar_mass("CaO")
CASO4 = molar_mass("CaSO4")
GYPSUM = molar_mass("CaSO4(H2O)2")
HEMIHYDRATE_SULFITE = molar_mass("CaSO3(H2O)0.5")
CL = molar_mass("Cl")
HCL = molar_mass("HCl")
C = molar_mass("C")
PYRITE = molar_mass("FeS2")
#: Sulfur's mass share of pyrite FeS2 [-]: the most sulfur mill rejects can carry per tonne.
PYRITE_S_SHARE = 2 * S / PYRITE
