"""The scenario workbook's sheets and columns: one declarative table.

The loader (`reagentplan.workbook`) validates against it and the template writer draws
its headers, notes and drop-downs from it, so the two can never disagree.  Column names
are the canonical metric ones of the workbook contract; US customary variants come from
`reagentplan.units.VARIANTS`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

STORES = ("limestone", "gypsum", "fly_ash", "bottom_ash")
BYPRODUCTS = ("gypsum", "fly_ash", "bottom_ash")
#: The column of `reagentplan.balance.balance_frame` (and of the sampled futures) that is
#: each store's daily flow [t/d]: what the scrubber takes from the limestone store, what
#: the plant makes into the others (gypsum as wet cake).  The one place this is written.
STORE_FLOW_COLUMN = {"limestone": "limestone_t", "gypsum": "gypsum_wet_t", "fly_ash": "fly_ash_t",
                     "bottom_ash": "bottom_ash_t"}
#: Pulveriser (mill) rejects: hauled straight from the mills, no store of their own.
MILL_REJECTS = "mill_rejects"
#: Materials a disposal site may take: the stored byproducts and the mill rejects.
DISPOSAL_MATERIALS = BYPRODUCTS + (MILL_REJECTS,)
SUPPLIER_MODES = ("rail", "truck")
BUYER_MODES = ("rail", "truck", "barge")
BOILERS = ("pc", "cfb")

#: Names of sheets and columns that hold free notes; the loader ignores them.
NOTE_COLUMNS = ("note", "notes", "comment")
NOTE_SHEETS = ("notes", "readme")
#: Sheets read by one command, not by the scenario loader (`reagentplan rehearse`).
TOOL_SHEETS = ("rehearsal",)


@dataclass(frozen=True)
class Range:
    """What the trade considers possible and usual for one quantity.

    Attributes
    ----------
    hard : (lo, hi)
        Outside it the value is impossible and refused (``None`` = no bound).
    usual : (lo, hi)
        Outside it the value is possible but unusual: the run goes on, with a warning.
    source : str
        Where the range comes from (a standard, a handbook, or "common practice").
    by_boiler : ((boiler, (lo, hi)), ...)
        The usual range for a boiler type (``pc``, ``cfb``) where it differs from
        ``usual``; checked once the plant's boiler is known.
    what : str
        The quantity in words, for the warning ("SO2 removal of a wet scrubber").
    """

    hard: tuple[float | None, float | None]
    usual: tuple[float, float]
    source: str
    by_boiler: tuple[tuple[str, tuple[float, float]], ...] = ()
    what: str = ""

    def usual_for(self, boiler: str | None = None) -> tuple[float, float]:
        for name, rng in self.by_boiler:
            if name == boiler:
                return rng
        return self.usual


_CP = "common practice, no source"

#: The plausibility table: one row per quantity, keyed by the canonical (metric) column
#: or key name; every sheet's column of that name, the record's included, gets the same
#: check.  Percentages are 0-100 hard.  Sources name the standard or handbook; values
#: recalled without the document at hand say "from memory".
PLAUSIBLE: dict[str, Range] = {
    # plant
    "fly_ash_share_pct": Range((0, 100), (65, 90), "AP-42 1.1: about 80 % of the ash of a dry-bottom "
                               "pulverised-coal boiler leaves as fly ash (from memory); a fluidised "
                               "bed splits nearer 50/50, common practice", by_boiler=(("cfb", (30, 80)),),
                               what="share of ash leaving as fly ash"),
    "so2_conversion_pct": Range((0, 100), (75, 100), "AP-42 1.1 Table 1.1-3: uncontrolled SOx of 38·S "
                                "(bituminous), 35·S (subbituminous), 30·S (lignite) lb/ton, i.e. 95, 88 "
                                "and 75 % of 40·S", what="fuel sulfur leaving as SO2"),
    "fly_ash_loi_pct": Range((0, 99), (0, 12), "ASTM C618 limits LOI of fly ash for concrete to 6 %; "
                             "pulverised-coal ash runs 1-10 % (common practice)", what="LOI of the fly ash"),
    "so2_limit_kg_per_gj": Range((0, 50), (0.02, 1.3), "40 CFR 60 Subpart Da 1.2 lb/MMBtu = 0.52 kg/GJ, "
                                 "MATS 0.2 lb/MMBtu = 0.086 kg/GJ (from memory)", what="permit SO2 limit"),
    "so2_limit_margin_pct": Range((0, 50), (0, 20), "operators keep a few percent of the limit in hand "
                                  "against the monitor's and the estimate's error (common practice, no "
                                  "source)", what="compliance margin under the permit limit"),
    # scrubber (for cfb: the bed)
    "removal_pct": Range((0, 100), (90, 99.5), "wet limestone forced-oxidation scrubbers remove 95-99 % "
                         "(common practice, no source); a fluidised bed captures 70-98 % in the bed "
                         "(common practice)", by_boiler=(("cfb", (70, 98)),), what="SO2 removal"),
    "ca_s_ratio": Range((1, 5), (1.0, 1.1), "wet limestone scrubber 1.02-1.05, fluidised bed 2-3 mol/mol "
                        "(common practice, no source)", by_boiler=(("cfb", (1.5, 3.5)),),
                        what="Ca/S ratio"),
    "limestone_caco3_pct": Range((50, 100), (85, 99), "scrubber-grade limestone is 90-98 % CaCO3 "
                                 "(common practice, no source)", what="CaCO3 of the limestone"),
    "mgco3_pct": Range((0, 50), (0, 5), "scrubber-grade limestone carries a few per cent MgCO3 at "
                       "most; dolomitic stone far more (common practice, no source)",
                       what="MgCO3 of the limestone"),
    "oxidation_pct": Range((0, 100), (90, 100), "forced oxidation converts over 99 % of the sulfite "
                           "(common practice, no source)", what="sulfite oxidised"),
    "gypsum_moisture_pct": Range((0, 60), (5, 15), "vacuum-belt or centrifuge cake holds 8-12 % free "
                                 "moisture (common practice, no source)", what="free moisture of the cake"),
    "esp_efficiency_pct": Range((0, 100), (98, 100), "precipitators and fabric filters capture over 99 % "
                                "of fly ash (common practice, no source)", what="fly ash captured"),
    "injection_removal_pct": Range((0, 100), (0, 80), "dry sorbent injection removes up to 50-70 % "
                                   "(common practice, no source)", what="SO2 removed upstream"),
    "injection_ca_s_ratio": Range((1, 10), (1.5, 4.0), "furnace and duct sorbent injection runs at "
                                  "Ca/S 2-3 (common practice, no source)", what="Ca/S of the injection"),
    "prescrubber_hcl_removal_pct": Range((0, 100), (0, 100), _CP, what="HCl removed before the scrubber"),
    "gypsum_chloride_ppm": Range((0, 1e6), (0, 1000), "washed wallboard gypsum is held near 100 ppm "
                                 "chloride (common practice, no source)", what="chloride of the cake"),
    # units
    "capacity_mw": Range((1, 5000), (10, 1500), "coal units run from about 25 to 1,300 MW "
                         "(common practice, from memory)", what="unit capacity"),
    "heat_rate_gj_per_mwh": Range((5, 20), (8.5, 13.0), "coal units' net heat rates are about "
                                  "8,000-12,500 Btu/kWh, 8.5-13 GJ/MWh (common practice, from memory)",
                                  what="net heat rate"),
    "gas_heat_share_pct": Range((0, 100), (0, 40), "gas reburn and co-firing supply up to 20-30 % of "
                                "the heat (common practice, no source)", what="heat from natural gas"),
    # coal
    "sulfur_pct": Range((0, 100), (0.2, 6), "steam coals carry 0.2-6 % sulfur as received "
                        "(common practice, from memory)", what="coal sulfur"),
    "ash_pct": Range((0, 100), (3, 40), "steam coals carry 3-40 % ash as received "
                     "(common practice, from memory)", what="coal ash"),
    "moisture_pct": Range((0, 100), (1, 45), "ASTM D388 ranks: bituminous a few %, subbituminous "
                          "15-30 %, lignite 25-45 % (from memory)", what="coal moisture"),
    "hhv_mj_per_kg": Range((5, 40), (8, 33), "ASTM D388 coal ranks: lignite from about 14.7 MJ/kg to "
                           "anthracite near 33 MJ/kg; ash and moisture as received bring it lower "
                           "(from memory)", what="heating value as received"),
    "chlorine_pct": Range((0, 5), (0, 0.5), "steam coals carry 0.01-0.3 % chlorine (common practice, "
                          "from memory)", what="coal chlorine"),
    "sulfur_sd_pct": Range((0, 10), (0, 1), _CP, what="spread of sulfur between deliveries"),
    "mill_rejects_pct": Range((0, 20), (0, 1.5), "pulverisers reject a few tenths of a per cent "
                              "of the coal fed, rarely above 1-2 % on high-pyrite coal (common "
                              "practice, from memory); above 20 % the stream is a coal cleaning "
                              "plant's, not a mill's (no source)", what="coal rejected by the mills"),
    "rejects_sulfur_share_pct": Range((0, 100), (0, 30), "mill rejects are mostly coarse pyrite and "
                                      "rock, so they take at most the pyritic sulfur, about half the "
                                      "sulfur of an average bituminous coal; a dedicated dry separator "
                                      "on pulverised coal took 35-55 % of the pyrite in a 10-20 % "
                                      "reject (US Bureau of Mines RI 7732, Abel et al. 1973), a mill's "
                                      "own rejects take less (common practice, from memory)",
                                      what="coal sulfur leaving in the mill rejects"),
    "share_pct": Range((0, 100), (0, 100), _CP, what="blend share"),
    # buyers' limits
    "min_purity_pct": Range((0, 100), (85, 98), "wallboard plants ask for 90-95 % CaSO4·2H2O "
                            "(common practice, no source)", what="minimum gypsum purity"),
    "max_moisture_pct": Range((0, 100), (5, 15), "wallboard plants take cake of at most about 10 % "
                              "moisture (common practice, no source)", what="maximum gypsum moisture"),
    "max_chloride_ppm": Range((0, None), (20, 1000), "wallboard plants take at most about 100 ppm "
                              "chloride (common practice, no source)", what="maximum gypsum chloride"),
    "max_loi_pct": Range((0, 100), (2, 12), "ASTM C618: LOI at most 6 % for fly ash in concrete",
                         what="maximum LOI of fly ash"),
    "max_so3_pct": Range((0, 100), (2, 6), "ASTM C618: SO3 at most 5 % for fly ash in concrete",
                         what="maximum SO3 of fly ash"),
}


@dataclass(frozen=True)
class Field:
    """One column of a table sheet, or one key of a key/value sheet.

    Attributes
    ----------
    name : str
        Canonical (metric) name.
    kind : str
        ``text``, ``number``, ``integer``, ``date``, ``code``, ``weekdays`` or ``months``.
    required : bool
        The column (key) must be present and every value filled.
    default : Any
        Value used when an optional cell is empty (``None`` = no value, e.g. no limit).
    lo, hi : float | None
        Allowed closed range of a number.
    choices : tuple[str, ...]
        Allowed codes of a ``code`` field.
    unit : str
        Unit shown in the template's notes.
    note : str
        One-line meaning shown in the template.
    example : Any
        Value of the template's example row.
    range_key : str
        Name of this field's row in `PLAUSIBLE` when it differs from ``name`` (a
        supplier's ``caco3_pct`` is checked as ``limestone_caco3_pct``); ``"-"`` for none.
    """

    name: str
    kind: str = "number"
    required: bool = True
    default: Any = None
    lo: float | None = None
    hi: float | None = None
    choices: tuple[str, ...] = ()
    unit: str = ""
    note: str = ""
    example: Any = None
    range_key: str = ""

    @property
    def plausible(self) -> Range | None:
        """The field's row of the plausibility table, if it has one."""
        if self.kind not in ("number", "integer") or self.range_key == "-":
            return None
        return PLAUSIBLE.get(self.range_key or self.name)

    def bounds(self) -> tuple[float | None, float | None]:
        """The hard range: the plausibility table's where it has the field, else lo/hi."""
        rng = self.plausible
        return rng.hard if rng is not None else (self.lo, self.hi)

    def expected(self) -> str:
        """Plain-words description of an acceptable value, for error messages."""
        if self.kind == "code":
            return "one of " + ", ".join(self.choices)
        if self.kind == "date":
            return "a date (an Excel date or YYYY-MM-DD text)"
        if self.kind == "text":
            return "a name (text)"
        if self.kind == "weekdays":
            return "weekdays like Mon-Fri or Mon,Wed,Fri (empty = every day)"
        if self.kind == "months":
            return "months like Mar-Nov or Jan,Feb (empty = every month)"
        what = "a whole number" if self.kind == "integer" else "a number"
        lo, hi = self.bounds()
        if lo is not None and hi is not None:
            return f"{what} from {_fmt(lo)} to {_fmt(hi)}"
        if lo is not None:
            return f"{what} of at least {_fmt(lo)}"
        if hi is not None:
            return f"{what} of at most {_fmt(hi)}"
        return what


def _fmt(x: float) -> str:
    return f"{x:g}"


@dataclass(frozen=True)
class Sheet:
    """A sheet of the workbook: key/value (``plant``, ``scrubber``) or a table."""

    name: str
    fields: tuple[Field, ...]
    keyvalue: bool = False
    required: bool = True
    key: tuple[str, ...] = ()  # columns that identify a row (duplicates are errors)
    note: str = ""
    #: Columns the rows are sorted by once read: the order rows are written in carries
    #: no meaning (history pasted unit by unit is as good as history in date order).
    sort_by: tuple[str, ...] = ()

    def field(self, name: str) -> Field:
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)


def pct(name: str, note: str, default: Any = None, required: bool = False, example: Any = None,
        lo: float = 0.0, hi: float = 100.0) -> Field:
    return Field(name, "number", required, default, lo, hi, unit="%", note=note, example=example)


PLANT = Sheet(
    "plant",
    keyvalue=True,
    note="One value per key; empty values take the default shown in the note.",
    fields=(
        Field("name", "text", True, unit="", note="station name", example="My Station"),
        Field("start_date", "date", True, note="first planned day"),
        Field("horizon_days", "integer", False, 90, 1, 1096, unit="d", note="days planned"),
        Field("currency", "text", False, "USD", note="label for money columns"),
        Field("boiler", "code", False, "pc", choices=BOILERS,
              note="pc = pulverised coal with wet limestone scrubber; cfb = fluidised bed, limestone in the bed"),
        pct("fly_ash_share_pct", "share of coal ash leaving as fly ash (default 80 pc, 60 cfb)"),
        pct("so2_conversion_pct", "fuel sulfur leaving the boiler as SO2", 95.0),
        Field("fly_ash_loi_pct", "number", False, 3.0, 0, 99, unit="%",
              note="unburned carbon in the fly ash as collected (loss on ignition)"),
        Field("so2_limit_kg_per_gj", "number", False, None, 0, 50, unit="kg/GJ",
              note="permit SO2 limit on heat input; empty = none"),
        Field("so2_limit_avg_days", "integer", False, 30, 1, 366, unit="d",
              note="rolling averaging period of the limit"),
        Field("so2_limit_margin_pct", "number", False, 5.0, 0, 50, unit="%",
              note="compliance margin: where the plan chooses the removal it keeps the rolling average this "
                   "share under the limit, also in its worse futures (the balance estimates emissions; the "
                   "stack monitor measures them)"),
        Field("shortage_penalty_per_t", "number", False, 1000.0, 0, None, unit="money/t",
              note="cost of a tonne below safety stock"),
        Field("overflow_penalty_per_t", "number", False, 1000.0, 0, None, unit="money/t",
              note="cost of a tonne above capacity"),
    ),
)

SCRUBBER = Sheet(
    "scrubber",
    keyvalue=True,
    note="Wet limestone forced-oxidation scrubber (for boiler = cfb: the bed).",
    fields=(
        Field("removal_pct", "number", False, 97.0, 0, 100, unit="%",
              note="SO2 removal across the scrubber (cfb: in-bed capture)"),
        Field("ca_s_ratio", "number", False, 1.03, 1, 5, unit="mol/mol",
              note="mol CaCO3 fed per mol SO2 removed (cfb bed: 2-3)"),
        pct("limestone_caco3_pct", "CaCO3 of the stone in the silo on the first day, dry (each delivery then mixes in at its quarry's caco3_pct)", 94.0, lo=50.0),
        pct("oxidation_pct", "sulfite oxidised to sulfate", 99.0),
        Field("gypsum_moisture_pct", "number", False, 10.0, 0, 60, unit="%",
              note="free moisture of the dewatered cake"),
        pct("esp_efficiency_pct", "fly ash captured ahead of the scrubber", 99.5),
        pct("injection_removal_pct", "SO2 removed upstream by injected sorbent", 0.0),
        Field("injection_ca_s_ratio", "number", False, 2.5, 1, 10, unit="mol/mol",
              note="mol Ca injected per mol SO2 removed upstream"),
        pct("prescrubber_hcl_removal_pct", "HCl removed before the scrubber", 0.0),
        Field("gypsum_chloride_ppm", "number", False, 50.0, 0, 1e6, unit="ppm",
              note="chloride in the washed cake, as measured"),
        Field("removal_min_pct", "number", False, None, 0, 100, unit="%",
              note="lowest SO2 removal the plan may choose on a day (with removal_max_pct; "
                   "empty = removal_pct fixed)", range_key="removal_pct"),
        Field("removal_max_pct", "number", False, None, 0, 100, unit="%",
              note="highest SO2 removal the plan may choose on a day (with removal_min_pct; "
                   "empty = removal_pct fixed)", range_key="removal_pct"),
    ),
)

_weekdays = Field("weekdays", "weekdays", False, None, note="days it can run; empty = every day",
                  example="Mon-Fri")
_months = Field("months", "months", False, None, note="months it takes material; empty = all",
                example="Mar-Nov")


def _limit(name: str, unit: str, note: str, hi: float | None = None) -> Field:
    return Field(name, "number", False, None, 0, hi, unit=unit, note=note + "; empty = no limit")


UNITS = Sheet(
    "units",
    key=("unit",),
    fields=(
        Field("unit", "text", note="generating unit name", example="Unit 1"),
        Field("capacity_mw", "number", True, None, 1, 5000, unit="MW", note="net capacity",
              example=600),
        Field("heat_rate_gj_per_mwh", "number", True, None, 5, 20, unit="GJ/MWh",
              note="net heat rate (HHV basis)", example=10.2),
        pct("gas_heat_share_pct", "share of heat input from natural gas", 0.0, example=0),
    ),
)

GENERATION = Sheet(
    "generation",
    key=("date", "unit"),
    sort_by=("date", "unit"),
    fields=(
        Field("date", "date", note="day", example="2027-01-01"),
        Field("unit", "text", note="unit name from the units sheet", example="Unit 1"),
        Field("mwh", "number", True, None, 0, None, unit="MWh", note="net generation of the day",
              example=10800),
    ),
)

COAL_SOURCES = Sheet(
    "coal_sources",
    key=("source",),
    fields=(
        Field("source", "text", note="coal source name", example="Seam A"),
        pct("sulfur_pct", "sulfur, as received", required=True, example=2.5),
        pct("ash_pct", "ash, as received", required=True, example=10),
        pct("moisture_pct", "total moisture, as received", None, example=8),
        Field("hhv_mj_per_kg", "number", True, None, 5, 40, unit="MJ/kg",
              note="higher heating value, as received", example=26.0),
        pct("chlorine_pct", "chlorine, as received", 0.0, hi=5.0, example=0.1),
        Field("sulfur_sd_pct", "number", False, 0.0, 0, 10, unit="% S",
              note="standard deviation of sulfur between deliveries", example=0.2),
        Field("mill_rejects_pct", "number", False, 0.0, 0, 20, unit="%",
              note="share of the coal fed to the mills that they reject (rock, coarse pyrite), "
                   "hauled away by a 'mill_rejects' disposal row; empty = 0", example=0.3),
        Field("rejects_sulfur_share_pct", "number", False, 0.0, 0, 100, unit="%",
              note="share of the coal's sulfur that leaves in the mill rejects (never burned); "
                   "empty = 0", example=10),
    ),
)

COAL_BLEND = Sheet(
    "coal_blend",
    key=("date", "source"),
    sort_by=("date", "source"),
    fields=(
        Field("date", "date", note="blend holds from this date to the next", example="2027-01-01"),
        Field("source", "text", note="source name from coal_sources", example="Seam A"),
        pct("share_pct", "share of as-received tonnes; a date's shares sum to 100", required=True,
            example=100),
    ),
)

STORAGE = Sheet(
    "storage",
    key=("store",),
    fields=(
        Field("store", "code", choices=STORES, note="store", example="limestone"),
        Field("capacity_t", "number", True, None, 0, None, unit="t", note="usable capacity",
              example=40000),
        Field("safety_t", "number", True, None, 0, None, unit="t", note="safety stock",
              example=8000),
        Field("initial_t", "number", True, None, 0, None, unit="t",
              note="level at the start of the first day", example=20000),
    ),
)

SUPPLIERS = Sheet(
    "suppliers",
    key=("supplier", "mode", "months"),
    fields=(
        Field("supplier", "text", note="quarry or supplier", example="North Quarry"),
        Field("mode", "code", choices=SUPPLIER_MODES, note="rail (a unit train is one load) or truck",
              example="rail"),
        Field("load_t", "number", True, None, 0.001, None, unit="t", note="tonnes per load",
              example=9500),
        Field("max_loads_per_day", "integer", True, None, 0, 10000, unit="loads/d",
              note="loads that can arrive in one day", example=1),
        Field("lead_days", "integer", True, None, 0, 365, unit="d",
              note="days from order to arrival", example=12),
        _weekdays,
        Field("price_per_t", "number", True, None, 0, None, unit="money/t",
              note="limestone price at the quarry", example=14.5),
        Field("freight_per_load", "number", False, 0.0, 0, None, unit="money/load",
              note="freight per load", example=95000),
        Field("min_t_per_month", "number", False, None, 0, None, unit="t/month",
              note="contract minimum per month; empty = none", example=0),
        Field("max_t_per_month", "number", False, None, 0, None, unit="t/month",
              note="contract maximum per month; empty = none", example=40000),
        Field("caco3_pct", "number", False, None, 50, 100, unit="%",
              note="CaCO3 of this quarry's stone, dry; empty = the scrubber sheet's value (the stone in the silo on the first day)", example=94,
              range_key="limestone_caco3_pct"),
        Field("months", "months", False, None,
              note="months this row's terms apply (e.g. a seasonal freight rate); empty = all",
              example=""),
        Field("mgco3_pct", "number", False, None, 0, 50, unit="%", note="MgCO3 of this stone, dry (counted as unreacted solids in the gypsum); empty = not given", example=1.5),
        Field("tier_loads_per_month", "integer", False, None, 0, 10000, unit="loads/month", note="freight tier: loads a month at the full rate before the tier rate applies; empty = no tier", example=2),
        Field("tier_freight_per_load", "number", False, None, 0, None, unit="money/load", note="freight per load for the loads above tier_loads_per_month in a month", example=80000),
        Field("shortfall_per_t", "number", False, None, 0, None, unit="money/t", note="take-or-pay: paid per tonne short of the monthly minimum; empty = 25", example=9),
        Field("train_set", "text", False, None, note="name of a train set (train_sets sheet) this rail lane shares; empty = none", example="Main set"),
    ),
)

BUYERS = Sheet(
    "buyers",
    key=("buyer", "material", "mode"),
    fields=(
        Field("buyer", "text", note="buyer", example="Board Plant"),
        Field("material", "code", choices=BYPRODUCTS, note="material bought", example="gypsum"),
        Field("mode", "code", choices=BUYER_MODES, note="how it leaves", example="truck"),
        Field("load_t", "number", True, None, 0.001, None, unit="t", note="tonnes per load",
              example=25),
        Field("max_loads_per_day", "integer", True, None, 0, 10000, unit="loads/d",
              note="loads that can leave in one day", example=30),
        _weekdays,
        Field("price_per_t", "number", True, None, None, None, unit="money/t",
              note="net to the plant; negative = the plant pays", example=3.0),
        Field("min_t_per_month", "number", False, None, 0, None, unit="t/month",
              note="contract minimum per month; empty = none", example=10000),
        Field("max_t_per_month", "number", False, None, 0, None, unit="t/month",
              note="contract maximum per month; empty = none", example=25000),
        _limit("min_purity_pct", "%", "minimum CaSO4.2H2O in the dry gypsum", 100),
        _limit("max_moisture_pct", "%", "maximum free moisture of the gypsum", 100),
        _limit("max_chloride_ppm", "ppm", "maximum chloride in the gypsum"),
        _limit("max_loi_pct", "%", "maximum loss on ignition of the fly ash", 100),
        _limit("max_so3_pct", "%", "maximum SO3 of the fly ash", 100),
        _months,
        Field("shortfall_per_t", "number", False, None, 0, None, unit="money/t", note="paid per tonne short of the buyer's monthly minimum (it may exceed what the station makes); empty = 25", example=6),
    ),
)

DISPOSAL = Sheet(
    "disposal",
    key=("site", "material"),
    fields=(
        Field("site", "text", note="landfill or disposal site", example="Ash Landfill"),
        Field("material", "code", choices=DISPOSAL_MATERIALS,
              note="material it takes (mill_rejects: hauled daily from the mills, no store)",
              example="fly_ash"),
        Field("cost_per_t", "number", True, None, 0, None, unit="money/t",
              note="haul and disposal cost", example=15),
        Field("max_t_per_day", "number", False, None, 0, None, unit="t/d",
              note="daily limit; empty = none", example=3000),
        Field("airspace_t", "number", False, None, 0, None, unit="t",
              note="remaining airspace for this material; empty = unlimited", example=2000000),
    ),
)

FIRM_ORDERS = Sheet(
    "firm_orders",
    required=False,
    key=("date", "material", "party", "mode"),
    fields=(
        Field("date", "date", note="arrival or departure at the plant", example="2027-01-06"),
        Field("material", "code", choices=STORES, note="material", example="limestone"),
        Field("party", "text", note="supplier (limestone) or buyer / site (byproducts)",
              example="North Quarry"),
        Field("mode", "code", False, None, choices=SUPPLIER_MODES + ("barge",),
              note="lane mode; needed only when the party has several", example="rail"),
        Field("loads", "integer", True, None, 1, 10000, unit="loads", note="loads booked",
              example=1),
        Field("tonnes", "number", False, None, 0, None, unit="t",
              note="tonnes booked; empty = loads x load size", example=9500),
    ),
)

GENERATION_HISTORY = Sheet(
    "generation_history",
    required=False,
    key=("date", "unit"),
    sort_by=("date", "unit"),
    fields=GENERATION.fields,
    note="past days of generation; the forecast is made from them",
)

COAL_QUALITY_HISTORY = Sheet(
    "coal_quality_history",
    required=False,
    key=(),
    sort_by=("date", "source"),
    fields=(
        Field("date", "date", note="sample date", example="2026-06-01"),
        Field("source", "text", note="source name from coal_sources", example="Seam A"),
        pct("sulfur_pct", "sulfur, as received", required=True, example=2.6),
        pct("ash_pct", "ash, as received", None, example=10.2),
        Field("hhv_mj_per_kg", "number", False, None, 5, 40, unit="MJ/kg",
              note="higher heating value, as received", example=25.8),
    ),
    note="lab results",
)

LANE_CLOSURES = Sheet(
    "lane_closures",
    required=False,
    key=("party", "mode", "first_date"),
    fields=(
        Field("party", "text", note="supplier, buyer or disposal site", example="North Quarry"),
        Field("mode", "code", False, None, choices=SUPPLIER_MODES + ("barge",),
              note="lane mode; empty = every lane of the party", example="rail"),
        Field("first_date", "date", note="first day closed", example="2027-07-01"),
        Field("last_date", "date", note="last day closed", example="2027-07-14"),
    ),
    note="days a lane cannot run: track work, quarry shutdown, buyer's plant outage",
)

TRAIN_SETS = Sheet(
    "train_sets",
    required=False,
    key=("train_set",),
    fields=(
        Field("train_set", "text", note="name of a set of rail cars shared by lanes", example="Main set"),
        Field("max_trains", "integer", True, None, 1, 1000, unit="trains", note="most trains of the set's lanes arriving in any window", example=3),
        Field("window_days", "integer", True, None, 1, 366, unit="d", note="length of the rolling window (cycle time of the set)", example=10),
    ),
    note="a train set shared by rail lanes: at most max_trains arrivals in any window_days days",
)

#: Keys of `plant` and `scrubber` that `period_settings` may change for a span of days.
PERIOD_KEYS = (
    "so2_conversion_pct", "fly_ash_loi_pct", "removal_pct", "ca_s_ratio", "limestone_caco3_pct",
    "oxidation_pct", "gypsum_moisture_pct", "esp_efficiency_pct", "injection_removal_pct",
    "prescrubber_hcl_removal_pct", "gypsum_chloride_ppm",
)

PERIOD_SETTINGS = Sheet(
    "period_settings",
    required=False,
    key=("key", "first_date"),
    fields=(
        Field("first_date", "date", note="first day of the changed value", example="2027-05-03"),
        Field("last_date", "date", note="last day of the changed value", example="2027-05-09"),
        Field("key", "code", choices=PERIOD_KEYS,
              note="a plant or scrubber key whose value changes for these days",
              example="oxidation_pct"),
        Field("value", "number", note="the value for these days, in the key's unit", example=92),
    ),
    note="planned changes for a span of days: oxidation blower outage, burner tuning, ...",
)

ALLOWANCES = Sheet(
    "allowances",
    required=False,
    key=("date",),
    sort_by=("date",),
    fields=(
        Field("date", "date", note="the row's terms hold from this date until the next row's; "
              "the first row on or before the start date", example="2030-01-01"),
        Field("holding_t", "number", False, None, 0, None, unit="t SO2",
              note="allowances held on the first row's date, in tonnes of SO2 (first row only; "
                   "empty on later rows)", example=5000),
        Field("allocated_t", "number", False, None, 0, None, unit="t SO2",
              note="allowances added to the holding on this date (a new year's allocation); "
                   "empty = none", example=0),
        Field("buy_price_per_t", "number", True, None, 0, None, unit="money/t SO2",
              note="price to buy one tonne of SO2 allowance", example=400),
        Field("sell_price_per_t", "number", True, None, 0, None, unit="money/t SO2",
              note="price got for selling one tonne of SO2 allowance (at most the buy price)",
              example=380),
        Field("max_trade_t_per_month", "number", False, None, 0, None, unit="t SO2/month",
              note="most that can be bought, and separately most that can be sold, in a "
                   "calendar month; empty = no limit", example=2000),
    ),
    note="SO2 emission allowances (cap and trade): the holding, allocations, trading prices",
)

SHEETS: tuple[Sheet, ...] = (
    PLANT, SCRUBBER, UNITS, GENERATION, COAL_SOURCES, COAL_BLEND, STORAGE, SUPPLIERS, BUYERS,
    DISPOSAL, FIRM_ORDERS, LANE_CLOSURES, PERIOD_SETTINGS, GENERATION_HISTORY,
    COAL_QUALITY_HISTORY, TRAIN_SETS, ALLOWANCES,
)
SHEETS_BY_NAME: dict[str, Sheet] = {s.name: s for s in SHEETS}
