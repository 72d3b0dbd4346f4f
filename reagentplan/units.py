"""Unit systems: metric (canonical, SI-based) and US customary column variants.

Every conversion factor comes from the `pint` unit registry, whose definitions follow
NIST SP 811 (tonne = 1000 kg, short ton = 2000 lb, lb = 0.45359237 kg, International
Table Btu = 1055.05585262 J).  No factor is typed by hand here.

References
----------
NIST Special Publication 811 (2008), *Guide for the Use of the International System of
Units*, Appendix B.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import pint

#: The project's single unit registry.  ``MMBtu`` is the US utility million Btu
#: (International Table Btu), as used for heat-input emission limits.
ureg = pint.UnitRegistry()
ureg.define("MMBtu_it = 1e6 * Btu_it")


@dataclass(frozen=True)
class Variant:
    """A US customary column accepted in place of a metric one.

    Attributes
    ----------
    metric : str
        Canonical (metric) column or key name, e.g. ``capacity_t``.
    us : str
        The accepted US customary name, e.g. ``capacity_st``.
    us_unit, metric_unit : str
        pint unit expressions of the two columns.
    """

    metric: str
    us: str
    us_unit: str
    metric_unit: str

    @property
    def factor(self) -> float:
        """Multiply a US value by this to get the metric value [metric/US]."""
        return conversion_factor(self.us_unit, self.metric_unit)


@lru_cache(maxsize=None)
def conversion_factor(from_unit: str, to_unit: str) -> float:
    """Factor converting a value in ``from_unit`` to ``to_unit`` [to/from], via pint."""
    return float(ureg.Quantity(1.0, from_unit).to(to_unit).magnitude)


def _mass(stem_metric: str, stem_us: str, per: str = "") -> Variant:
    unit_m, unit_us = ("tonne", "short_ton")
    if per:
        unit_m, unit_us = f"tonne/{per}", f"short_ton/{per}"
    return Variant(stem_metric, stem_us, unit_us, unit_m)


def _price(metric: str, us: str) -> Variant:
    # money per tonne <- money per short ton
    return Variant(metric, us, "1/short_ton", "1/tonne")


#: Every metric/US pair the workbook accepts, keyed by the metric name.
VARIANTS: dict[str, Variant] = {
    v.metric: v
    for v in [
        Variant("heat_rate_gj_per_mwh", "heat_rate_btu_per_kwh", "Btu_it/kWh", "GJ/MWh"),
        Variant("hhv_mj_per_kg", "hhv_btu_per_lb", "Btu_it/lb", "MJ/kg"),
        Variant("so2_limit_kg_per_gj", "so2_limit_lb_per_mmbtu", "lb/MMBtu_it", "kg/GJ"),
        _mass("capacity_t", "capacity_st"),
        _mass("safety_t", "safety_st"),
        _mass("initial_t", "initial_st"),
        _mass("load_t", "load_st"),
        _mass("min_t_per_month", "min_st_per_month"),
        _mass("max_t_per_month", "max_st_per_month"),
        _mass("max_t_per_day", "max_st_per_day"),
        _mass("airspace_t", "airspace_st"),
        _mass("tonnes", "short_tons"),
        _mass("level_t", "level_st"),
        _price("price_per_t", "price_per_st"),
        _price("cost_per_t", "cost_per_st"),
        _price("shortage_penalty_per_t", "shortage_penalty_per_st"),
        _price("overflow_penalty_per_t", "overflow_penalty_per_st"),
        # SO2 emission allowances: tonnes (short tons) of SO2 and money per tonne of SO2
        _mass("holding_t", "holding_st"),
        _mass("allocated_t", "allocated_st"),
        _mass("max_trade_t_per_month", "max_trade_st_per_month"),
        _price("buy_price_per_t", "buy_price_per_st"),
        _price("sell_price_per_t", "sell_price_per_st"),
    ]
}

#: Reverse look-up: US name -> variant.
BY_US_NAME: dict[str, Variant] = {v.us: v for v in VARIANTS.values()}

#: Display factor: kg/GJ -> lb/MMBtu [lb/MMBtu per kg/GJ].
KG_PER_GJ_TO_LB_PER_MMBTU = conversion_factor("kg/GJ", "lb/MMBtu_it")
