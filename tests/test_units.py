"""Unit conversions against NIST SP 811 (Appendix B) values, through pint."""

import pytest

from reagentplan.units import KG_PER_GJ_TO_LB_PER_MMBTU, VARIANTS, conversion_factor


def test_short_ton_is_nist_value():
    """NIST SP 811 B.9: 1 ton (short, 2000 lb) = 907.184 74 kg."""
    assert conversion_factor("short_ton", "kg") == pytest.approx(907.18474, rel=1e-12)
    assert VARIANTS["capacity_t"].factor == pytest.approx(0.90718474, rel=1e-12)


def test_btu_is_international_table_value():
    """NIST SP 811 B.9: 1 Btu_IT = 1.055 055 852 62 E+03 J."""
    assert conversion_factor("Btu_it", "J") == pytest.approx(1055.05585262, rel=1e-12)


def test_heat_rate_and_heating_value():
    """10,000 Btu/kWh = 10.550 558 GJ/MWh; 1 Btu/lb = 2.326 kJ/kg exactly (NIST SP 811)."""
    assert 10000 * VARIANTS["heat_rate_gj_per_mwh"].factor == pytest.approx(10.5505585262, rel=1e-10)
    assert VARIANTS["hhv_mj_per_kg"].factor == pytest.approx(2.326e-3, rel=1e-12)


def test_emission_rate_lb_per_mmbtu():
    """1 lb/MMBtu = 0.453 592 37 kg / 1.055 055 852 62 GJ = 0.429 923 kg/GJ (NIST SP 811)."""
    expected = 0.45359237 / 1.05505585262
    assert VARIANTS["so2_limit_kg_per_gj"].factor == pytest.approx(expected, rel=1e-10)
    assert KG_PER_GJ_TO_LB_PER_MMBTU == pytest.approx(1 / expected, rel=1e-10)


def test_price_per_short_ton():
    """$10 per short ton is $11.023 per tonne (1 t = 1.102 311 3 short ton, NIST SP 811)."""
    assert 10 * VARIANTS["price_per_t"].factor == pytest.approx(11.0231131, rel=1e-8)
