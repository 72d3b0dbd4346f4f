"""The daily mass balance of the boiler, the sorbent injection and the scrubber.

Every function is a pure, element-wise function of numpy arrays, so one call handles a
single day, a year, or (futures × days) at once.  Shares are fractions (0-1) inside this
module; the scenario's percentages are converted once, in `BalanceParams.from_scenario`.

References
----------
US EPA, AP-42 *Compilation of Air Pollutant Emission Factors*, 5th ed., Section 1.1
"Bituminous and Subbituminous Coal Combustion" (1998): fuel sulfur conversion to SO2
(about 95 % for bituminous coal; the rest is retained in the ash), Table 1.1-3.
Srivastava, R. K. and Jozewicz, W. (2001), "Flue gas desulfurization: the state of the
art", J. Air & Waste Manage. Assoc. 51:1676-1688: limestone forced-oxidation chemistry,
Ca/S stoichiometry, by-product composition.
ASTM C618-19, *Standard Specification for Coal Fly Ash and Raw or Calcined Natural
Pozzolan for Use in Concrete*: SO3 and LOI reporting of fly ash.
Abel, W. T., Zulkoski, M., Brady, G. A. and Eckerd, J. W. (1973), *Removing pyrite from
coal by dry-separation methods*, US Bureau of Mines RI 7732: pyrite liberated by
pulverising is coarse and dense and can be rejected from pulverised coal; mill rejects
are that stream (rock and coarse pyrite), never burned.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from . import chemistry as chem
from .scenario import Scenario
from .timeseries.generation import median_generation
from .units import KG_PER_GJ_TO_LB_PER_MMBTU

# --------------------------------------------------------------------------- inputs


@dataclass(frozen=True)
class Drivers:
    """Daily drivers of the balance; each array broadcasts to (futures, days).

    Attributes
    ----------
    generation_mwh : net generation [MWh]
    heat_input_gj : total heat input, coal and gas [GJ]
    coal_heat_gj : heat input from coal [GJ]
    sulfur_pct, ash_pct, chlorine_pct : blended coal, as received [%]
    hhv_mj_per_kg : blended coal higher heating value, as received [MJ/kg]
    mill_rejects_pct : blended share of the coal fed that the mills reject [%]; 0 = none
    rejects_sulfur_share_pct : blended share of the coal's sulfur leaving in the rejects [%]
    """

    generation_mwh: np.ndarray
    heat_input_gj: np.ndarray
    coal_heat_gj: np.ndarray
    sulfur_pct: np.ndarray
    ash_pct: np.ndarray
    hhv_mj_per_kg: np.ndarray
    chlorine_pct: np.ndarray
    mill_rejects_pct: np.ndarray | float = 0.0
    rejects_sulfur_share_pct: np.ndarray | float = 0.0


@dataclass(frozen=True)
class BalanceParams:
    """Plant and scrubber constants as fractions [-] and ratios [mol/mol].

    Each may be a scalar or an array broadcastable to (futures, days) (a value changed
    for some days); ``boiler`` and ``so2_limit_avg_days`` are always scalars.
    """

    boiler: str
    so2_conversion: float
    fly_ash_share: float
    fly_ash_loi: float
    removal: float
    ca_s_ratio: float
    caco3: float
    oxidation: float
    gypsum_moisture: float
    esp_efficiency: float
    injection_removal: float
    injection_ca_s_ratio: float
    prescrubber_hcl_removal: float
    gypsum_chloride_ppm: float
    so2_limit_kg_per_gj: float | None
    so2_limit_avg_days: int

    @classmethod
    def from_scenario(cls, scenario: Scenario) -> "BalanceParams":
        """Constants of a scenario; keys changed by `period_settings` become (1, days)
        arrays, the rest stay scalars."""
        p = scenario.plant
        periods = scenario.period_settings
        changed = set() if periods is None else set(periods["key"])

        def value(key: str, scale: float = 0.01):
            if key in changed:
                return scenario.daily_setting(key)[None, :] * scale
            src = scenario.scrubber if hasattr(scenario.scrubber, key) else p
            return getattr(src, key) * scale

        return cls(
            boiler=p.boiler,
            so2_conversion=value("so2_conversion_pct"),
            fly_ash_share=p.fly_ash_share_pct / 100,
            fly_ash_loi=value("fly_ash_loi_pct"),
            removal=value("removal_pct"),
            ca_s_ratio=value("ca_s_ratio", 1.0),
            caco3=value("limestone_caco3_pct"),
            oxidation=value("oxidation_pct"),
            gypsum_moisture=value("gypsum_moisture_pct"),
            esp_efficiency=value("esp_efficiency_pct"),
            injection_removal=value("injection_removal_pct") if p.boiler == "pc" else 0.0,
            injection_ca_s_ratio=scenario.scrubber.injection_ca_s_ratio,
            prescrubber_hcl_removal=value("prescrubber_hcl_removal_pct"),
            gypsum_chloride_ppm=value("gypsum_chloride_ppm", 1.0),
            so2_limit_kg_per_gj=p.so2_limit_kg_per_gj,
            so2_limit_avg_days=p.so2_limit_avg_days,
        )


def scenario_drivers(scenario: Scenario) -> Drivers:
    """The deterministic drivers of a scenario, shape (1, days).

    Heat input per unit is generation [MWh] × net heat rate [GJ/MWh]; the gas share of
    each unit carries no sulfur or ash.  Coal quality is the blend of the day: shares are
    of as-received tonnes, so every property (including HHV per kg) mixes by mass.  The
    mill rejects [% of coal fed] mix by mass too; the share of sulfur in them [% of the
    coal's sulfur] mixes by the sulfur each source brings (a source of no sulfur adds
    none), so the blend's sulfur in rejects is the sum of the sources'.
    """
    gen = median_generation(scenario)  # (days × units) [MWh]: plan, else forecast median
    hr = np.array([u.heat_rate_gj_per_mwh for u in scenario.units])
    coal_frac = 1 - np.array([u.gas_heat_share_pct for u in scenario.units]) / 100
    g = gen.to_numpy(dtype=float)
    heat = g @ hr
    coal_heat = g @ (hr * coal_frac)
    shares = scenario.blend_matrix().to_numpy(dtype=float)  # (days × sources) [-]

    def blend(attr: str) -> np.ndarray:
        return shares @ np.array([getattr(s, attr) for s in scenario.coal_sources], dtype=float)

    return Drivers(
        generation_mwh=g.sum(axis=1)[None, :],
        heat_input_gj=heat[None, :],
        coal_heat_gj=coal_heat[None, :],
        sulfur_pct=blend("sulfur_pct")[None, :],
        ash_pct=blend("ash_pct")[None, :],
        hhv_mj_per_kg=blend("hhv_mj_per_kg")[None, :],
        chlorine_pct=blend("chlorine_pct")[None, :],
        mill_rejects_pct=blend("mill_rejects_pct")[None, :],
        rejects_sulfur_share_pct=rejects_sulfur_share_blend(
            shares, [s.sulfur_pct for s in scenario.coal_sources],
            [s.rejects_sulfur_share_pct for s in scenario.coal_sources])[None, :],
    )


def rejects_sulfur_share_blend(shares, sulfur_pct, share_pct):
    """Share of a blend's sulfur leaving in the mill rejects [%].

    ``shares`` (days × sources) [-] of as-received tonnes, each source's sulfur [%] and
    its share of that sulfur in the rejects [%]: the sulfur in rejects per tonne of blend
    over the blend's sulfur per tonne, 0 where the blend has no sulfur.
    """
    shares = np.asarray(shares, dtype=float)
    sulfur = shares @ np.asarray(sulfur_pct, dtype=float)
    in_rejects = shares @ (np.asarray(sulfur_pct, dtype=float) * np.asarray(share_pct, dtype=float))
    return np.divide(in_rejects, sulfur, out=np.zeros_like(sulfur), where=sulfur > 0)


# --------------------------------------------------------------------------- steps


def coal_burned_t(coal_heat_gj, hhv_mj_per_kg):
    """Coal fed to the mills [t] = coal heat input [GJ] / HHV as received [MJ/kg = GJ/t].

    The as-received HHV is that of the coal as delivered, mill rejects included; the
    rejects (rock, pyrite) carry negligible heating value, so the heat comes from the
    coal that is burned and this is the tonnage fed, rejects and all.
    """
    return coal_heat_gj / hhv_mj_per_kg


def mill_rejects_t(coal_fed_t, mill_rejects_pct):
    """Mill rejects [t] from coal fed [t] at a reject share [% of the coal fed].

    References
    ----------
    Abel et al. (1973), US Bureau of Mines RI 7732: coarse pyrite and rock separated from
    pulverised coal.  Typical shares: `reagentplan.schema.PLAUSIBLE` (from memory).
    """
    return coal_fed_t * mill_rejects_pct * 0.01


def sulfur_burned_pct(sulfur_pct, rejects_sulfur_share_pct):
    """Sulfur that reaches the burners [% of the coal fed]: the coal's sulfur [%] less the
    share [%] of it that leaves in the mill rejects."""
    return sulfur_pct * (1 - rejects_sulfur_share_pct * 0.01)


def boiler_ash_t(coal_fed_t, ash_pct, rejects_t, s_rejects_t):
    """Ash reaching the boiler [t]: the ash of the coal fed [t, at ash % as received] less
    the rejects' mineral matter, the rejects [t] less their sulfur [t].

    The rejects are taken as rock and pyrite that would have reported to the ash; their
    sulfur is counted apart (``s_rejects_t``).  The oxygen that iron takes up when pyrite
    is ashed in the laboratory (FeS2 to Fe2O3) is neglected: the ash removed is slightly
    understated, the ash to the boiler slightly overstated (common practice, no source).
    The loader keeps the rejects' mineral matter within the coal's ash.
    """
    return coal_fed_t * ash_pct * 0.01 - (rejects_t - s_rejects_t)


def so2_formed_t(coal_t, sulfur_pct, conversion):
    """SO2 leaving the boiler [t] from coal [t] of sulfur [%] at a conversion [-].

    References
    ----------
    AP-42 Section 1.1.3.2: most fuel sulfur is oxidised to SO2 (about 95 % for
    bituminous coal); the rest stays in the ash.
    """
    return coal_t * sulfur_pct * (conversion * chem.SO2 / chem.S / 100)


def hcl_formed_t(coal_t, chlorine_pct):
    """HCl in the flue gas [t], all coal chlorine [%] taken to leave as HCl.

    References
    ----------
    AP-42 Section 1.1.3.6: nearly all chlorine in coal is emitted as HCl.
    """
    return coal_t * chlorine_pct * (chem.HCL / chem.CL / 100)


def caco3_for_so2_t(so2_removed_t, ca_s_ratio):
    """CaCO3 fed [t] for SO2 removed [t] at Ca/S [mol CaCO3 / mol SO2 removed].

    Independent of the stone: the scrubber needs so many moles of CaCO3 per mole of SO2;
    the stone's purity only sets how many tonnes of stone carry them.

    References
    ----------
    Srivastava and Jozewicz (2001): CaCO3 + SO2 + 1/2 O2 + 2 H2O -> CaSO4.2H2O + CO2,
    fed at Ca/S (mol CaCO3 per mol SO2 removed) slightly above 1.
    """
    return so2_removed_t * (ca_s_ratio * chem.CACO3 / chem.SO2)


def stone_for_caco3_t(caco3_t, caco3):
    """Limestone [t, dry] carrying ``caco3_t`` of CaCO3 [t] at a CaCO3 content [-]."""
    return caco3_t / caco3


def limestone_for_so2_t(so2_removed_t, ca_s_ratio, caco3):
    """Limestone fed [t, dry] for SO2 removed [t] at Ca/S [mol/mol] and CaCO3 content [-]."""
    return stone_for_caco3_t(caco3_for_so2_t(so2_removed_t, ca_s_ratio), caco3)


def limestone_for_hcl_t(hcl_t, caco3):
    """Limestone [t, dry] neutralising HCl [t]: CaCO3 + 2 HCl -> CaCl2 + H2O + CO2."""
    return hcl_t * (chem.CACO3 / caco3 / chem.HCL / 2)


def spent_sorbent_t(so2_captured_t, ca_s_ratio, limestone_t, caco3):
    """Dry solids left by limestone that captured SO2 in a furnace, duct or bed [t].

    The captured SO2 leaves as CaSO4; the excess calcium calcines to CaO; the limestone's
    non-CaCO3 part stays as inerts.

    Returns
    -------
    (caso4_t, cao_t, inerts_t)
    """
    return (so2_captured_t * (chem.CASO4 / chem.SO2),
            so2_captured_t * ((ca_s_ratio - 1) * chem.CAO / chem.SO2), limestone_t * (1 - caco3))


def gypsum_solids_t(so2_removed_t, oxidation, ca_s_ratio, limestone_t, caco3, fly_ash_slip_t):
    """Dry solids of the scrubber's dewatered cake [t], by component.

    Gypsum CaSO4·2H2O from the oxidised share, CaSO3·½H2O from the rest, the unreacted
    excess CaCO3 (Ca/S − 1), the limestone's inerts and the fly ash that passed the
    precipitator.  Chlorides leave with the purge water, not the washed cake.

    Returns
    -------
    (gypsum_t, sulfite_t, caco3_t, inerts_t, fly_ash_t)
    """
    per = so2_removed_t / chem.SO2  # [Mmol]
    return (per * (oxidation * chem.GYPSUM), per * ((1 - oxidation) * chem.HEMIHYDRATE_SULFITE),
            per * ((ca_s_ratio - 1) * chem.CACO3), limestone_t * (1 - caco3), fly_ash_slip_t)


def wet_cake_t(dry_t, moisture):
    """Wet gypsum cake [t] from dry solids [t] at free moisture [-]."""
    return dry_t / (1 - moisture)


def fly_ash_with_carbon_t(noncarbon_t, loi):
    """Fly ash as collected [t]: mineral and sorbent solids [t] plus unburned carbon.

    LOI [-] is the carbon's share of the ash, so total = non-carbon / (1 − LOI).
    """
    return noncarbon_t / (1 - loi)


def trailing_sum(x, days: int):
    """Sum over the last ``days`` entries along the last axis (fewer at the start)."""
    c = np.cumsum(x, axis=-1)
    out = c.copy()
    out[..., days:] = c[..., days:] - c[..., :-days]
    return out


def _ratio(num, den):
    """num / den, NaN where den <= 0."""
    num, den = np.broadcast_arrays(np.asarray(num, dtype=float), np.asarray(den, dtype=float))
    out = np.full(num.shape, np.nan)
    np.divide(num, den, out=out, where=den > 0)
    return out


# --------------------------------------------------------------------------- balance


def mass_balance(d: Drivers, p: BalanceParams) -> dict[str, np.ndarray]:
    """The whole daily balance, element-wise over (futures, days).

    Returns a dict of arrays named as the columns of ``balance.csv``: masses [t], heat
    [GJ], rates [kg/GJ, lb/MMBtu, kg/MWh], contents [%] and the sulfur accounting
    ``s_in_t``, ``s_rejects_t``, ``s_emitted_t``, ``s_gypsum_t``, ``s_fly_ash_t``,
    ``s_bottom_ash_t`` [t S] that must close.

    ``coal_t`` is the coal fed to the mills; ``mill_rejects_t`` of it leaves the mills
    unburned with ``s_rejects_t`` of its sulfur and its mineral matter (`boiler_ash_t`);
    only the rest of the sulfur forms SO2.  Coal chlorine is taken to be burned whole.
    """
    coal = coal_burned_t(d.coal_heat_gj, d.hhv_mj_per_kg)
    rejects = mill_rejects_t(coal, d.mill_rejects_pct)
    s_in = coal * d.sulfur_pct * 0.01
    burned_pct = sulfur_burned_pct(d.sulfur_pct, d.rejects_sulfur_share_pct)
    s_burned = coal * burned_pct * 0.01
    s_rejects = s_in - s_burned
    so2_formed = so2_formed_t(coal, burned_pct, p.so2_conversion)
    s_retained = s_burned * (1 - p.so2_conversion)
    ash = boiler_ash_t(coal, d.ash_pct, rejects, s_rejects)
    zero = np.zeros_like(coal)

    if p.boiler == "cfb":
        captured = so2_formed * p.removal
        lime_bed = limestone_for_so2_t(captured, p.ca_s_ratio, p.caco3)
        sorbent = sum(spent_sorbent_t(captured, p.ca_s_ratio, lime_bed, p.caco3))
        fly_noncarbon = (ash + sorbent) * p.fly_ash_share
        bottom = (ash + sorbent) * (1 - p.fly_ash_share)
        s_captured = captured * chem.S / chem.SO2
        s_fly = s_retained * p.fly_ash_share + s_captured * p.fly_ash_share
        s_bottom = s_retained * (1 - p.fly_ash_share) + s_captured * (1 - p.fly_ash_share)
        so2_removed, so2_emitted = captured, so2_formed - captured
        lime_scrub, lime_inj, lime_hcl = lime_bed, zero, zero
        scrub_removed = zero
    else:
        inj_removed = so2_formed * p.injection_removal
        lime_inj = limestone_for_so2_t(inj_removed, p.injection_ca_s_ratio, p.caco3)
        inj_solids = sum(spent_sorbent_t(inj_removed, p.injection_ca_s_ratio, lime_inj, p.caco3))
        fly_noncarbon = ash * p.fly_ash_share + inj_solids
        bottom = ash * (1 - p.fly_ash_share)
        s_fly = s_retained * p.fly_ash_share + inj_removed * chem.S / chem.SO2
        s_bottom = s_retained * (1 - p.fly_ash_share)
        to_scrubber = so2_formed - inj_removed
        scrub_removed = to_scrubber * p.removal
        so2_removed = inj_removed + scrub_removed
        so2_emitted = to_scrubber - scrub_removed
        lime_scrub = limestone_for_so2_t(scrub_removed, p.ca_s_ratio, p.caco3)
        hcl = hcl_formed_t(coal, d.chlorine_pct) * (1 - p.prescrubber_hcl_removal)
        lime_hcl = limestone_for_hcl_t(hcl, p.caco3)

    fly_total = fly_ash_with_carbon_t(fly_noncarbon, p.fly_ash_loi)
    fly_collected = fly_total * p.esp_efficiency if p.boiler == "pc" else fly_total
    fly_slip = fly_total - fly_collected
    so3_pct = 100 * _ratio(s_fly / chem.S * chem.SO3, fly_total)
    s_fly_collected = s_fly * (fly_collected / np.where(fly_total > 0, fly_total, 1.0))

    if p.boiler == "cfb":
        gyp_parts = (zero,) * 5
    else:
        gyp_parts = gypsum_solids_t(scrub_removed, p.oxidation, p.ca_s_ratio,
                                    lime_scrub + lime_hcl, p.caco3, fly_slip)
    gyp_dry = sum(gyp_parts)
    gyp_wet = wet_cake_t(gyp_dry, p.gypsum_moisture) if p.boiler == "pc" else zero
    purity = 100 * _ratio(gyp_parts[0], gyp_dry)
    s_gypsum = scrub_removed * chem.S / chem.SO2 + (s_fly - s_fly_collected)

    heat = d.heat_input_gj
    emitted_kg = so2_emitted * 1000
    rate = _ratio(emitted_kg, heat)
    rolling = _ratio(trailing_sum(emitted_kg, p.so2_limit_avg_days),
                     trailing_sum(np.broadcast_to(heat, emitted_kg.shape), p.so2_limit_avg_days))
    limit = np.nan if p.so2_limit_kg_per_gj is None else p.so2_limit_kg_per_gj
    chloride = np.where(gyp_dry > 0, p.gypsum_chloride_ppm, np.nan)
    moisture = np.where(gyp_dry > 0, 100 * p.gypsum_moisture, np.nan)

    b = np.broadcast_arrays
    out = {
        "generation_mwh": d.generation_mwh,
        "coal_t": coal,
        "heat_input_gj": heat,
        "gas_heat_gj": heat - d.coal_heat_gj,
        "sulfur_pct": d.sulfur_pct,
        "so2_formed_t": so2_formed,
        "so2_removed_t": so2_removed,
        "so2_emitted_t": so2_emitted,
        "so2_kg_per_gj": rate,
        "limestone_t": lime_scrub + lime_inj + lime_hcl,
        "gypsum_wet_t": gyp_wet,
        "gypsum_purity_pct": purity,
        "fly_ash_t": fly_collected,
        "bottom_ash_t": bottom,
        "limestone_scrubber_t": lime_scrub,
        "limestone_hcl_t": lime_hcl,
        "limestone_injection_t": lime_inj,
        "gypsum_dry_t": gyp_dry,
        "gypsum_moisture_pct": moisture,
        "gypsum_chloride_ppm": chloride,
        "fly_ash_loi_pct": np.where(fly_total > 0, 100 * p.fly_ash_loi, np.nan),
        "fly_ash_so3_pct": so3_pct,
        "so2_lb_per_mmbtu": rate * KG_PER_GJ_TO_LB_PER_MMBTU,
        "so2_kg_per_mwh": _ratio(emitted_kg, d.generation_mwh),
        "so2_rolling_kg_per_gj": rolling,
        "so2_limit_kg_per_gj": np.full(np.shape(coal), limit),
        "s_in_t": s_in,
        "s_emitted_t": so2_emitted * chem.S / chem.SO2,
        "s_gypsum_t": s_gypsum,
        "s_fly_ash_t": s_fly_collected,
        "s_bottom_ash_t": s_bottom,
        "limestone_caco3_pct": 100 * p.caco3 + zero,
        "caco3_need_t": (lime_scrub + lime_inj + lime_hcl) * p.caco3,
        "gypsum_inerts_t": gyp_parts[3],
        "removal_pct": 100 * p.removal + zero,
        "mill_rejects_t": rejects,
        "s_rejects_t": s_rejects,
    }
    shape = np.broadcast_shapes(*(np.shape(v) for v in out.values()))
    return {k: np.broadcast_to(v, shape) for k, v in zip(out, b(*out.values()))}


# --------------------------------------------------------------------------- silo


def silo_replay(initial_t, initial_frac, arrivals_t, arrivals_comp_t, caco3_need_t):
    """Day-by-day replay of a well-mixed limestone silo.

    Each day the day's deliveries join the silo first and mix completely with what is
    there; the scrubber then draws stone of that mix, as many tonnes as carry the day's
    CaCO3 need.  Drawing does not change the mix, so the stone fed on a day and the stock
    left at its end have the same composition.

    Parameters
    ----------
    initial_t : stock at the start of the first day [t]
    initial_frac : its composition, one fraction per component, CaCO3 first [-]
    arrivals_t : stone delivered per day, shape (days,) [t]
    arrivals_comp_t : tonnes of each component delivered per day, shape (days, k) [t]
    caco3_need_t : CaCO3 the scrubber (and sorbent injection) needs per day [t]

    Returns
    -------
    dict with ``level_t`` (end of day [t]), ``frac`` (composition of the stone fed,
    (days, k) [-]), ``stone_t`` (stone drawn [t]) and ``unmet_caco3_t`` (CaCO3 the
    empty silo could not give [t]).  On a day the silo is empty after deliveries the
    composition of the last stone seen is carried forward.

    References
    ----------
    Haverly, C. A. (1978), "Studies of the behavior of recursion for the pooling
    problem", ACM SIGMAP Bulletin 25:19-28: a pool (here the silo) whose outflow has
    the quality of its mixed contents.
    """
    arrivals_t = np.asarray(arrivals_t, dtype=float)
    comp = np.asarray(arrivals_comp_t, dtype=float)
    need = np.asarray(caco3_need_t, dtype=float)
    n = len(need)
    frac0 = np.asarray(initial_frac, dtype=float)
    level = float(initial_t)
    mass = frac0 * level
    last = frac0.copy()
    out_level, out_frac = np.empty(n), np.empty((n, len(frac0)))
    stone, unmet = np.zeros(n), np.zeros(n)
    for d in range(n):
        level += arrivals_t[d]
        mass = mass + comp[d]
        if level > 1e-9 and mass[0] > 1e-12:
            last = mass / level
        if mass[0] >= need[d]:
            drawn = need[d] / last[0]
            stone[d] = drawn
            level -= drawn
            mass = mass - drawn * last
        else:
            stone[d] = level
            unmet[d] = need[d] - max(mass[0], 0.0)
            level, mass = 0.0, np.zeros_like(mass)
        out_level[d] = max(level, 0.0)
        out_frac[d] = last
    return {"level_t": out_level, "frac": out_frac, "stone_t": stone, "unmet_caco3_t": unmet}


#: Columns of ``balance.csv``: the contract's first, then the additions.
BALANCE_COLUMNS = (
    "date", "coal_t", "heat_input_gj", "so2_formed_t", "so2_removed_t", "so2_emitted_t",
    "so2_kg_per_gj", "limestone_t", "gypsum_wet_t", "gypsum_purity_pct", "fly_ash_t",
    "bottom_ash_t",
    "generation_mwh", "gas_heat_gj", "sulfur_pct", "limestone_scrubber_t", "limestone_hcl_t",
    "limestone_injection_t", "gypsum_dry_t", "gypsum_moisture_pct", "gypsum_chloride_ppm",
    "fly_ash_loi_pct", "fly_ash_so3_pct", "so2_lb_per_mmbtu", "so2_kg_per_mwh",
    "so2_rolling_kg_per_gj", "so2_limit_kg_per_gj", "so2_over_limit",
    "limestone_caco3_pct", "caco3_need_t", "gypsum_inerts_t",
    "removal_pct",
    "mill_rejects_t", "s_rejects_t",
)


def _per_day(values, scenario: Scenario, name: str) -> np.ndarray:
    """One value per horizon day as a (1, days) array [its unit]."""
    x = np.asarray(values, dtype=float)
    if x.shape != (scenario.plant.horizon_days,):
        raise ValueError(f"{name} needs one value per horizon day ({scenario.plant.horizon_days}), "
                         f"got shape {x.shape}")
    return x[None, :]


def balance_frame(scenario: Scenario, caco3_pct=None, removal_pct=None) -> pd.DataFrame:
    """The deterministic daily balance of a scenario, one row per planned day.

    Columns as `BALANCE_COLUMNS`; ``so2_over_limit`` is true where the rolling average
    [kg/GJ] is above the permit limit.  ``caco3_pct`` [%], one value per day, is the CaCO3
    of the stone fed (the silo's mix under a plan); without it the scrubber sheet's
    ``limestone_caco3_pct`` (with its period settings) holds.  ``removal_pct`` [%], one
    value per day, is the SO2 removal of the scrubber (for ``boiler = cfb`` the in-bed
    capture) chosen for that day; without it the scrubber sheet's ``removal_pct`` (its
    setpoint, with period settings) holds.  The column ``removal_pct`` is the removal
    used each day.
    """
    params = BalanceParams.from_scenario(scenario)
    if caco3_pct is not None:
        params = replace(params, caco3=_per_day(caco3_pct, scenario, "caco3_pct") / 100)
    if removal_pct is not None:
        # x 0.01 as `BalanceParams.from_scenario` scales, so the setpoint given back as an
        # array gives the same balance to the last bit
        params = replace(params, removal=_per_day(removal_pct, scenario, "removal_pct") * 0.01)
    res = mass_balance(scenario_drivers(scenario), params)
    frame = pd.DataFrame({k: v[0] for k, v in res.items()})
    frame.insert(0, "date", scenario.dates)
    # a relative millionth of slack: a plan that runs exactly at the limit is not over it
    frame["so2_over_limit"] = frame["so2_rolling_kg_per_gj"] > frame["so2_limit_kg_per_gj"] * (1 + 1e-6)
    return frame[list(BALANCE_COLUMNS)]


#: Balance quantities that move with the removal, each an affine function of it on a day
#: (purity, a ratio, is not; nor is the rolling average across days of different removal).
RESPONSE_COLUMNS = ("limestone_t", "caco3_need_t", "gypsum_wet_t", "gypsum_dry_t",
                    "so2_emitted_t", "so2_removed_t", "fly_ash_t", "bottom_ash_t")


def removal_response(scenario: Scenario, columns: tuple[str, ...] = RESPONSE_COLUMNS,
                     caco3_pct=None) -> pd.DataFrame:
    """How the day's balance moves with the scrubber's removal, as affine functions of it.

    For each day and each quantity q of `RESPONSE_COLUMNS`:
    q(r) = ``q`` + ``q_per_pct`` × (r − ``removal_pct``), r the removal [%].  ``q`` is the
    balance at the setpoint (the scrubber sheet's ``removal_pct`` with its period
    settings, as `balance_frame`), ``q_per_pct`` the slope [t per percentage point].

    Exact, not a finite-difference estimate: with everything else fixed the balance is
    affine in the removal (SO2 removed is the SO2 reaching the scrubber times the
    removal; the limestone, its CaCO3 and the cake's solids are linear in the SO2
    removed plus terms that do not depend on it), so two evaluations, at the setpoint and
    50 points away from it, give the line.  ``fly_ash_t`` and ``bottom_ash_t`` move only
    for ``boiler = cfb`` (the spent bed sorbent leaves with the ash); for ``pc`` their
    slope is 0.

    The slopes are at the scrubber sheet's stone (``limestone_caco3_pct``, with period
    settings): stone tonnes scale with 1 / CaCO3, so a caller with another stone scales
    ``limestone_t`` and its slope (``caco3_need_t`` is independent of the stone).

    ``columns`` are the balance columns to give (any of `BALANCE_COLUMNS`; one that does
    not move with the removal gets a slope of 0), ``caco3_pct`` [%] a stone per day as
    `balance_frame` takes it.

    Returns
    -------
    DataFrame with ``date``, ``removal_pct`` [%] and, for each quantity, ``q`` [t] and
    ``q_per_pct`` [t / %-point], one row per horizon day.
    """
    base = balance_frame(scenario, caco3_pct=caco3_pct)
    setpoint = base["removal_pct"].to_numpy(dtype=float)
    other = np.where(setpoint >= 50.0, setpoint - 50.0, setpoint + 50.0)  # inside 0-100
    moved = balance_frame(scenario, caco3_pct=caco3_pct, removal_pct=other)
    out = pd.DataFrame({"date": base["date"], "removal_pct": setpoint})
    for q in columns:
        at = base[q].to_numpy(dtype=float)
        out[q] = at
        out[f"{q}_per_pct"] = (at - moved[q].to_numpy(dtype=float)) / (setpoint - other)
    return out
