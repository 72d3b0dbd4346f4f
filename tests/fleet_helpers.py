"""A small invented fleet for the tests: three stations built from `helpers.minimal_sheets`
sharing a quarry contract, a car set and a board plant's monthly room."""

from __future__ import annotations

from pathlib import Path

from helpers import clone, minimal_sheets, set_value, write_workbook
from openpyxl import Workbook

#: landfill cost of gypsum [money/t] and generation [MWh/d] per station (invented)
STATIONS = {"north": (48.0, 2500.0), "south": (9.0, 2200.0), "east": (20.0, 1800.0)}


def station_sheets(name: str, days: int, landfill: float, mwh: float, *, train_set: str | None = "Q set",
                   max_trains: int = 2, window_days: int = 7) -> dict:
    s = minimal_sheets(days, mwh)
    set_value(s, "plant", "name", None, f"{name.title()} Station")
    s["disposal"][1][2] = landfill  # Cell 1 gypsum cost_per_t
    if train_set:
        s["suppliers"][0].append("train_set")
        s["suppliers"][1].append(train_set)
        s["train_sets"] = [["train_set", "max_trains", "window_days"], [train_set, max_trains, window_days]]
    return s


def fleet_rows(stations: dict[str, str], contracts: list[list] | None = None,
               sets: list[list] | None = None, name: str = "Test fleet") -> dict[str, list[list]]:
    out = {"fleet": [["key", "value"], ["name", name]],
           "stations": [["station", "workbook"]] + [[k, v] for k, v in stations.items()]}
    if contracts is not None:
        out["shared_contracts"] = [["contract", "party", "material", "min_t_per_month", "max_t_per_month",
                                    "shortfall_per_t"]] + contracts
    if sets is not None:
        out["shared_train_sets"] = [["train_set", "max_trains", "window_days"]] + sets
    return out


def write_fleet(folder: Path, *, days: int = 28, shared: bool = True, stations=None, contracts=None, sets=None,
                per_station=None) -> Path:
    """Write the three stations and a fleet workbook into ``folder``; returns its path.
    ``shared`` False: no shared contract nor train set (each station keeps its own)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    stations = stations or STATIONS
    for name, (landfill, mwh) in stations.items():
        sheets = station_sheets(name, days, landfill, mwh)
        if per_station and name in per_station:
            per_station[name](sheets)
        write_workbook(sheets, folder / f"{name}.xlsx")
    if shared:
        contracts = contracts if contracts is not None else [
            ["Quarry pool", "Quarry Q", "limestone", None, 12000, None],
            ["Board pool", "Board Co", "gypsum", None, 4000, None]]
        sets = sets if sets is not None else [["Q set", 2, 7]]
    rows = fleet_rows({n: f"{n}.xlsx" for n in stations}, contracts if shared else None, sets if shared else None)
    return write_workbook(rows, folder / "fleet.xlsx")


def two_stones(days: int):
    """A ``per_station`` edit for `write_fleet`: the station becomes
    `test_schedule.two_quarries` (two quarries of different CaCO3 feeding a mixed silo)."""
    from test_schedule import two_quarries

    def edit(sheets: dict) -> None:
        q = two_quarries(days=days, seed=1)
        sheets.clear()
        sheets.update(q)

    return edit
