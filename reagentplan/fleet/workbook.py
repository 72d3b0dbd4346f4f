"""The fleet workbook (``../shared/FLEET.md``): sheets ``fleet``, ``stations``,
``shared_contracts`` and ``shared_train_sets`` that tie several stations' scenario
workbooks together.

`load_fleet` reads the fleet workbook with the scenario's table reader
(`reagentplan.scenario.tables`), loads every station's workbook as `load_scenario`
does, and checks what the sheets say about each other: one start date, horizon and
currency for every station, every shared contract's party in some station, every shared
train set named by some station's supplier rows.  Every problem is raised at once as a
`ScenarioError`, located by station, sheet, row and column (a station workbook's own
problems carry its sheet as ``STATION:sheet``).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import Problem, ScenarioError
from ..scenario import Scenario, load_scenario, scenario_from_raw
from ..scenario.tables import Collector, did_you_mean, read_keyvalue_into, read_table_into
from ..schema import Field, Sheet
from ..units import VARIANTS
from ..workbook import RawSheet, read_raw

MATERIALS = ("limestone", "gypsum", "fly_ash", "bottom_ash")

FLEET = Sheet("fleet", keyvalue=True, fields=(
    Field("name", "text", True, None, note="the fleet's name", example="Northern stations"),
))

STATIONS = Sheet("stations", key=("station",), fields=(
    Field("station", "text", note="a short name, unique in the fleet; it names the station's output folder",
          example="north"),
    Field("workbook", "text", note="the station's scenario workbook, relative to the fleet workbook's folder",
          example="north.xlsx"),
    Field("db", "text", False, None, note="optional: the station's operations record (sqlite:///..., "
          "postgresql+psycopg://...)"),
))

SHARED_CONTRACTS = Sheet("shared_contracts", required=False, key=("contract",), fields=(
    Field("contract", "text", note="a name for the agreement", example="Greyfell limestone"),
    Field("party", "text", note="the supplier or buyer, spelled as in the station workbooks", example="Greyfell"),
    Field("material", "code", choices=MATERIALS, note="limestone for a supplier; gypsum, fly_ash or "
          "bottom_ash for a buyer", example="limestone"),
    Field("min_t_per_month", "number", False, None, 0, None, unit="t/month",
          note="pooled monthly minimum over all the fleet's stations (empty = none)"),
    Field("max_t_per_month", "number", False, None, 0, None, unit="t/month",
          note="pooled monthly maximum over all the fleet's stations (empty = none)"),
    Field("shortfall_per_t", "number", False, None, 0, None, unit="money/t",
          note="take-or-pay per tonne the pool falls short of its minimum; empty = 25"),
))

SHARED_TRAIN_SETS = Sheet("shared_train_sets", required=False, key=("train_set",), fields=(
    Field("train_set", "text", note="a train set named in supplier rows of several stations", example="Main set"),
    Field("max_trains", "integer", True, None, 1, 1000, unit="trains",
          note="most arrivals at all of its stations together in any window", example=1),
    Field("window_days", "integer", True, None, 1, 366, unit="d", note="length of the rolling window", example=7),
))

SHEETS = (FLEET, STATIONS, SHARED_CONTRACTS, SHARED_TRAIN_SETS)
#: Sheets of free notes the fleet workbook may carry.
NOTE_SHEETS = ("notes", "readme")


@dataclass(frozen=True)
class SharedContract:
    """A contract pooled over the fleet: monthly limits [t/month] (None = none) and the
    take-or-pay rate [money/t] (None = the default penalty)."""

    contract: str
    party: str
    material: str
    min_t_per_month: float | None
    max_t_per_month: float | None
    shortfall_per_t: float | None
    row: int = 0


@dataclass(frozen=True)
class SharedTrainSet:
    """One set of cars for the fleet: at most ``max_trains`` arrivals at all its stations
    in any ``window_days`` [d] consecutive days."""

    train_set: str
    max_trains: int
    window_days: int
    row: int = 0


@dataclass(frozen=True)
class Station:
    station: str
    workbook: Path
    db: str | None
    scenario: Scenario
    row: int = 0


@dataclass(frozen=True)
class Fleet:
    name: str
    stations: tuple[Station, ...]
    shared_contracts: tuple[SharedContract, ...] = ()
    shared_train_sets: tuple[SharedTrainSet, ...] = ()
    source_name: str = ""
    warnings: tuple = field(default_factory=tuple)

    def station(self, name: str) -> Station:
        return next(s for s in self.stations if s.station == name)

    @property
    def currency(self) -> str:
        return self.stations[0].scenario.plant.currency


def is_fleet_workbook(source) -> bool:
    """True when ``source`` (a path) is a fleet workbook: it has a ``stations`` sheet.
    A file that cannot be read is left to the station loader to report."""
    try:
        return "stations" in read_raw(source)
    except (ScenarioError, OSError):
        return False


def _us_shortfall(raw: RawSheet) -> RawSheet:
    """``shortfall_per_st`` [money/short ton] read as ``shortfall_per_t`` [money/t] (the
    factor of the price columns' pair, from `pint` through `reagentplan.units`)."""
    if "shortfall_per_st" not in raw.header:
        return raw
    j = raw.header.index("shortfall_per_st")
    factor = VARIANTS["price_per_t"].factor
    rows = []
    for excel_row, values in raw.rows:
        v = list(values)
        if j < len(v) and isinstance(v[j], (int, float)) and not isinstance(v[j], bool):
            v[j] = v[j] * factor
        rows.append((excel_row, tuple(v)))
    header = list(raw.header)
    header[j] = "shortfall_per_t"
    return RawSheet(raw.name, header, list(raw.header_as_written), rows)


def _station_problems(station: str, err: ScenarioError) -> list[Problem]:
    """A station workbook's problems, each sheet named ``STATION:sheet``."""
    return [Problem(f"{station}:{p.sheet}" if p.sheet else f"{station}:workbook", p.row, p.column, p.found,
                    p.expected) for p in err.problems]


def load_fleet(source: str | os.PathLike, *, raw: dict[str, RawSheet] | None = None,
               station_raws: dict[str, dict[str, RawSheet]] | None = None) -> Fleet:
    """Read and check a fleet workbook and every station workbook it names.

    ``raw``: the fleet workbook's sheets already read (a study's variant of them);
    ``station_raws``: per station, its workbook's sheets already read (likewise).

    Raises
    ------
    ScenarioError
        Listing every problem, located by (station,) sheet, Excel row and column.
    """
    path = Path(source)
    raw = read_raw(path) if raw is None else raw
    out = Collector()
    for name in raw:
        if name not in {s.name for s in SHEETS} and name not in NOTE_SHEETS:
            out.add(name, None, None, f"unknown sheet '{name}'{did_you_mean(name, [s.name for s in SHEETS])}",
                    "fleet, stations, shared_contracts, shared_train_sets (or notes)")
    for sheet in SHEETS:
        if sheet.required and sheet.name not in raw:
            out.add(sheet.name, None, None, "the sheet is missing", f"a sheet '{sheet.name}'")
    out.fail()
    meta = read_keyvalue_into(raw["fleet"], FLEET, out)
    st_rows = read_table_into(raw["stations"], STATIONS, out)
    c_rows = (read_table_into(_us_shortfall(raw["shared_contracts"]), SHARED_CONTRACTS, out)
              if "shared_contracts" in raw else [])
    t_rows = read_table_into(raw["shared_train_sets"], SHARED_TRAIN_SETS, out) if "shared_train_sets" in raw else []
    if not st_rows and not out.problems:
        out.add("stations", None, None, "no station", "one row per station (station, workbook)")
    stations = []
    for r in st_rows:
        name = str(r["station"]).strip()
        wb = (path.parent / str(r["workbook"]).strip())
        if not wb.is_file():
            out.add("stations", r["_row"], "workbook", f"station '{name}': '{r['workbook']}' does not exist "
                    f"(looked in {path.parent.name or '.'}/)",
                    "a station's scenario workbook, a path relative to the fleet workbook's folder")
            continue
        try:
            if station_raws and name in station_raws:
                scn = scenario_from_raw(station_raws[name], wb.name)
            else:
                scn = load_scenario(wb)
        except ScenarioError as e:
            out.problems.extend(_station_problems(name, e))
            continue
        stations.append(Station(name, wb, r.get("db"), scn, r["_row"]))
    out.fail()
    _check_same_calendar(stations, out)
    contracts = [SharedContract(r["contract"], str(r["party"]).strip(), r["material"], r["min_t_per_month"],
                                r["max_t_per_month"], r["shortfall_per_t"], r["_row"]) for r in c_rows]
    sets = [SharedTrainSet(r["train_set"], int(r["max_trains"]), int(r["window_days"]), r["_row"]) for r in t_rows]
    _check_contracts(contracts, stations, out)
    _check_train_sets(sets, stations, out)
    out.fail()
    return Fleet(str(meta["name"]), tuple(stations), tuple(contracts), tuple(sets), path.name,
                 tuple(out.warnings))


def _check_same_calendar(stations: list[Station], out: Collector) -> None:
    """Every station starts on one date, plans one horizon and counts one currency."""
    if not stations:
        return
    first = stations[0]
    for s in stations[1:]:
        for what, get in (("start_date", lambda p: f"{p.start_date:%Y-%m-%d}"),
                          ("horizon_days", lambda p: str(p.horizon_days)),
                          ("currency", lambda p: str(p.currency))):
            a, b = get(first.scenario.plant), get(s.scenario.plant)
            if a != b:
                out.add("stations", s.row, "workbook",
                        f"station '{s.station}' has {what} {b} but station '{first.station}' has {what} {a}",
                        f"every station of the fleet with the same {what} (plant sheet)")


def contract_parties(scn: Scenario, material: str) -> list[str]:
    """The parties of a station that a contract of ``material`` may name."""
    if material == "limestone":
        return [s.supplier for s in scn.suppliers]
    return [b.buyer for b in scn.buyers if b.material == material]


def _check_contracts(contracts: list[SharedContract], stations: list[Station], out: Collector) -> None:
    for c in contracts:
        names = sorted({p for s in stations for p in contract_parties(s.scenario, c.material)})
        if c.party not in names:
            role = "supplier" if c.material == "limestone" else f"buyer of {c.material}"
            out.add("shared_contracts", c.row, "party",
                    f"'{c.party}' is no {role} of any station{did_you_mean(c.party, names)}",
                    f"a {role} spelled as in a station workbook: one of " + (", ".join(names) or "(none)"))
        if (c.min_t_per_month is not None and c.max_t_per_month is not None
                and c.min_t_per_month > c.max_t_per_month):
            out.add("shared_contracts", c.row, "min_t_per_month", f"{c.min_t_per_month:g} above the maximum "
                    f"{c.max_t_per_month:g}", "a pooled minimum no larger than the pooled maximum")


def _check_train_sets(sets: list[SharedTrainSet], stations: list[Station], out: Collector) -> None:
    named = sorted({s_.train_set for s in stations for s_ in s.scenario.suppliers if s_.train_set})
    for t in sets:
        if t.train_set not in named:
            out.add("shared_train_sets", t.row, "train_set",
                    f"'{t.train_set}' is named by no station's supplier rows{did_you_mean(t.train_set, named)}",
                    "a train_set of the stations' suppliers sheets: one of " + (", ".join(named) or "(none)"))
