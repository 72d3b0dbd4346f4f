"""The plan workbook, ``plan.xlsx``: one sheet per role, the daily balance, the costs and
every assumption, laid out to be printed and pinned up as well as read on screen.

Written with openpyxl: native line and bar charts, conditional colouring of the risk
figures, frozen headers, units in every header, print titles and landscape fit-to-width.
"""

from __future__ import annotations

import datetime as dt
import os
from dataclasses import asdict
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.formatting.rule import CellIsRule
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from .. import CAUTION
from ..schedule.lanes import SALE, SUPPLY, horizon_months
from ..schedule.lever import lever_days
from ..schedule.rejects import haul_frame, has_rejects
from .files import save_workbook

HEAD_FILL = PatternFill("solid", fgColor="2F4858")
HEAD_FONT = Font(bold=True, color="FFFFFF")
TITLE_FONT = Font(bold=True, size=14, color="2F4858")
NOTE_FONT = Font(italic=True, color="555555")
#: Risk colouring: a pale sand above the alert level, a brick red above 20 %.
WATCH_FILL = PatternFill("solid", fgColor="F6E7B4")
ALARM_FILL = PatternFill("solid", fgColor="E4A18B")
OUTLOOK_FILL = PatternFill("solid", fgColor="EEF2F4")
#: Plain headers of the Top risks sheet, in their order.
TOP_RISK_HEADERS = {"store": "store", "what": "limit", "first_date": "from",
                    "chance": "chance [%]", "remedy": "remedy",
                    "chance_after": "chance after the remedy [%]"}
#: Chart lines: the level in slate, safety stock in ochre, capacity in brick.
LINE_COLOURS = ("2F4858", "C98B2B", "A8442A")

SOURCES = [
    ("SO2 from fuel sulfur", "US EPA AP-42, 5th ed., Section 1.1 (about 95 % of fuel S to SO2; Table 1.1-3)"),
    ("Molar masses", "IUPAC standard atomic weights, via the periodictable library"),
    ("Unit conversions", "NIST SP 811, via the pint library"),
    ("Limestone scrubber chemistry", "Srivastava & Jozewicz (2001), J. Air & Waste Manage. Assoc. 51:1676"),
    ("Fly ash SO3 and LOI reporting", "ASTM C618 (class F: SO3 at most 5 %, LOI at most 6 %)"),
    ("Landfill mark, trigger days, empty-store penalty", "common practice, no source"),
    ("Mill rejects (coarse pyrite and rock, never burned)", "Abel et al. (1973), US Bureau of Mines "
     "RI 7732; typical reject shares from memory"),
]


def _frame_to_sheet(ws, frame: pd.DataFrame, start_row: int = 1, formats: dict | None = None,
                    widths: dict | None = None) -> None:
    formats = formats or {}
    for j, col in enumerate(frame.columns, start=1):
        c = ws.cell(start_row, j, col)
        c.fill, c.font = HEAD_FILL, HEAD_FONT
        c.alignment = Alignment(wrap_text=True, vertical="center", horizontal="center")
    for i, row in enumerate(frame.itertuples(index=False), start=start_row + 1):
        for j, v in enumerate(row, start=1):
            if isinstance(v, pd.Timestamp):
                v = v.date() if not pd.isna(v) else None
            elif isinstance(v, (np.floating, float)) and not np.isfinite(v):
                v = None
            elif isinstance(v, np.generic):
                v = v.item()
            elif v is pd.NA:
                v = None
            cell = ws.cell(i, j, v)
            col = frame.columns[j - 1]
            if col in formats:
                cell.number_format = formats[col]
            elif isinstance(v, dt.date):
                cell.number_format = "yyyy-mm-dd"
    for j, col in enumerate(frame.columns, start=1):
        w = (widths or {}).get(col) or _column_width(str(col), frame[col])
        ws.column_dimensions[get_column_letter(j)].width = w
    ws.freeze_panes = ws.cell(start_row + 1, 1)
    ws.row_dimensions[start_row].height = 58  # up to four lines of a wrapped header
    ws.print_title_rows = f"{start_row}:{start_row}"
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True


def _column_width(header: str, values: pd.Series) -> float:
    """A column as narrow as its header allows when wrapped on up to three lines and its
    widest value, between 9 and 40 characters (so a wide table still prints readably)."""
    longest_word = max((len(w) for w in header.split()), default=0)
    need = max(longest_word, -(-len(header) // 3))
    sample = values.head(400)
    if pd.api.types.is_numeric_dtype(sample):
        finite = sample[np.isfinite(sample.astype(float))] if len(sample) else sample
        widest = max((len(f"{abs(float(v)):,.0f}") + 2 for v in finite), default=4)
    else:
        widest = max((len(str(v)) for v in sample if v is not None), default=4)
        widest = 10 if pd.api.types.is_datetime64_any_dtype(sample) else widest
    return float(max(9, min(40, max(need, widest) + 2)))


def _title(ws, text: str, note: str) -> None:
    ws.cell(1, 1, text).font = TITLE_FONT
    ws.cell(2, 1, note).font = NOTE_FONT


def orders_frame(run) -> pd.DataFrame:
    """Every inbound load, for the coordinator."""
    mv = run.plan.movements
    inbound = mv[mv["direction"] == "in"].copy()
    return pd.DataFrame({
        "supplier": inbound["party"], "lane": inbound["lane"], "arrival date": inbound["date"],
        "order by": inbound["order_by"], "loads": inbound["loads"].astype("float"),
        "tonnes [t]": inbound["tonnes"], f"cost [{run.plan.scenario.plant.currency}]": inbound["cost"],
        "window": np.where(inbound["firm"], "firm", "outlook"),
        "already booked": np.where(inbound["booked"], "yes", ""),
    }).reset_index(drop=True)


def stores_frame(run) -> pd.DataFrame:
    """Daily store levels with safety, capacity and (with futures) the risk, wide."""
    inv = run.plan.inventory
    out = pd.DataFrame({"date": run.plan.scenario.dates})
    risk = run.risk.frame if run.risk is not None else None
    for store, g in inv.groupby("store", sort=False):
        label = store.replace("_", " ")
        out[f"{label} level [t]"] = g["level_t"].to_numpy()
        out[f"{label} safety [t]"] = g["safety_t"].to_numpy()
        out[f"{label} capacity [t]"] = g["capacity_t"].to_numpy()
        if risk is not None:
            r = risk[risk["store"] == store]
            if store == "limestone":
                out[f"{label} chance below safety [%]"] = 100 * r["p_below_safety"].to_numpy()
            else:
                out[f"{label} chance over capacity [%]"] = 100 * r["p_over_capacity"].to_numpy()
    return out


def shipments_frame(run) -> pd.DataFrame:
    """Every outbound load to a buyer with its quality margin, for sales."""
    plan = run.plan
    mv = plan.movements
    sales = mv[mv["kind"] == "sale"].copy()
    bal = plan.balance.set_index("date")
    buyers = {b.lane: b for b in plan.scenario.buyers}
    margins = []
    for r in sales.itertuples():
        b, q = buyers[r.lane], bal.loc[r.date]
        parts = []
        if b.min_purity_pct is not None:
            parts.append(("purity", q["gypsum_purity_pct"] - b.min_purity_pct))
        if b.max_moisture_pct is not None:
            parts.append(("moisture", b.max_moisture_pct - q["gypsum_moisture_pct"]))
        if b.max_chloride_ppm is not None:
            parts.append(("chloride", (b.max_chloride_ppm - q["gypsum_chloride_ppm"]) / 100))
        if b.max_loi_pct is not None:
            parts.append(("LOI", b.max_loi_pct - q["fly_ash_loi_pct"]))
        if b.max_so3_pct is not None:
            parts.append(("SO3", b.max_so3_pct - q["fly_ash_so3_pct"]))
        parts = [p for p in parts if np.isfinite(p[1])]
        margins.append(min(parts, key=lambda p: p[1]) if parts else ("", np.nan))
    cur = plan.scenario.plant.currency
    return pd.DataFrame({
        "date": sales["date"], "buyer": sales["party"], "material": sales["material"],
        "loads": sales["loads"].astype(float), "tonnes [t]": sales["tonnes"],
        f"net revenue [{cur}]": -sales["cost"],
        "closest limit": [m[0] for m in margins],
        "quality margin [% points]": [m[1] for m in margins],
        "window": np.where(sales["firm"], "firm", "outlook"),
    }).reset_index(drop=True)


def contract_frame(run) -> pd.DataFrame:
    """Monthly tonnes per lane against its pro-rated minimum and maximum."""
    plan = run.plan
    _, months, _ = horizon_months(plan.scenario.dates)
    rows = []
    for lane in plan.lanes:
        if lane.kind not in (SUPPLY, SALE):
            continue
        totals = plan.evaluation.month_totals[lane.name]
        for k, month in enumerate(months):
            lo, hi = lane.month_min_t[k], lane.month_max_t[k]
            t = totals[k]
            status = ("below minimum" if np.isfinite(lo) and t < lo - 1e-6 else
                      "at maximum" if np.isfinite(hi) and t >= hi - 1e-6 else "within")
            rows.append({"party": lane.party, "lane": lane.name, "month": str(month),
                         "tonnes [t]": t, "minimum [t]": lo, "maximum [t]": hi, "status": status,
                         "direction": "in" if lane.kind == SUPPLY else "out"})
    return pd.DataFrame(rows)


def costs_frame(run) -> pd.DataFrame:
    s = run.plan.summary()
    keys = list(s["costs"])
    cur = s["currency"]
    frame = pd.DataFrame({"item": [k.replace("_", " ") for k in keys],
                          f"plan [{cur}]": [s["costs"][k] for k in keys],
                          f"reorder-point baseline [{cur}]": [s["baseline_costs"][k] for k in keys]})
    total = pd.DataFrame({"item": ["total (with end-stock value)"],
                          f"plan [{cur}]": [s["total_cost"]],
                          f"reorder-point baseline [{cur}]": [s["baseline_total_cost"]]})
    return pd.concat([frame, total], ignore_index=True)


def rejects_frame(run) -> pd.DataFrame | None:
    """The mill rejects' daily haul (`reagentplan.schedule.rejects.haul_frame`) with
    plain headers, or ``None`` when the coal has no rejects and no site takes them."""
    plan = run.plan
    haul = plan.evaluation.rejects
    if haul is None or not has_rejects(plan.scenario):
        return None
    frame = haul_frame(haul, plan.balance["mill_rejects_t"], plan.scenario.dates)
    cur = plan.scenario.plant.currency
    names = {"made_t": "rejects made [t]", "not_hauled_t": "not hauled [t]", "waiting_t": "waiting in the bins [t]",
             "cost": f"haul cost [{cur}]"}
    return frame.rename(columns=lambda c: names.get(c, c[:-2] + " [t]" if c.endswith("_t") else c))


def _records(objs) -> pd.DataFrame:
    rows = []
    for o in objs:
        d = asdict(o)
        for k, v in d.items():
            if isinstance(v, frozenset):
                d[k] = ",".join(str(i) for i in sorted(v))
        rows.append(d)
    return pd.DataFrame(rows)


def _line_chart(ws, title: str, data_ws, first_col: int, cols: list[int], n_rows: int, anchor: str,
                y_title: str | None) -> None:
    chart = LineChart()
    chart.title, chart.y_axis.title, chart.x_axis.title = title, y_title, "date"
    chart.height, chart.width = 9, 24
    chart.x_axis.number_format = "mmm-yy"
    for c in cols:
        chart.add_data(Reference(data_ws, min_col=c, min_row=1, max_row=n_rows + 1), titles_from_data=True)
    for series, colour, dash in zip(chart.series, LINE_COLOURS, ("solid", "dash", "dash")):
        series.graphicalProperties.line.solidFill = colour
        series.graphicalProperties.line.dashStyle = dash
        series.graphicalProperties.line.width = 19050 if dash == "solid" else 12700
        series.smooth = False
    chart.set_categories(Reference(data_ws, min_col=first_col, min_row=2, max_row=n_rows + 1))
    ws.add_chart(chart, anchor)


def write_plan_workbook(run, path: str | os.PathLike) -> Path:
    """Write ``plan.xlsx`` for a `reagentplan.pipeline.PlanRun` (via a temporary name)."""
    path = Path(path)
    plan = run.plan
    scn = plan.scenario
    cur = scn.plant.currency
    wb = Workbook()
    money = f'#,##0 "{cur}"'

    # --- coordinator
    ws = wb.active
    ws.title = "Coordinator"
    orders = orders_frame(run)
    _title(ws, f"{scn.plant.name}: limestone loads to book",
           "Dated at arrival at the plant; order by = last day to place the order. "
           "Outlook rows (shaded) are weekly plans spread to days and will be re-planned.")
    _frame_to_sheet(ws, orders, start_row=4, formats={"loads": "0", "tonnes [t]": "#,##0",
                                                      f"cost [{cur}]": money},
                    widths={"supplier": 24, "lane": 34, "arrival date": 12, "order by": 12})
    for i, w in enumerate(orders["window"], start=5):
        if w == "outlook":
            for j in range(1, len(orders.columns) + 1):
                ws.cell(i, j).fill = OUTLOOK_FILL

    # --- plant manager
    ws = wb.create_sheet("Plant manager")
    stores = stores_frame(run)
    _frame_to_sheet(ws, stores, formats={c: "#,##0" for c in stores.columns if "[t]" in c}
                    | {c: "0.0" for c in stores.columns if "[%]" in c})
    n = len(stores)
    for j, c in enumerate(stores.columns, start=1):
        if "[%]" in c:
            letter = get_column_letter(j)
            rng = f"{letter}2:{letter}{n + 1}"
            ws.conditional_formatting.add(rng, CellIsRule(operator="greaterThan", formula=["20"], fill=ALARM_FILL))
            ws.conditional_formatting.add(rng, CellIsRule(operator="greaterThan", formula=["5"], fill=WATCH_FILL))
    charts = wb.create_sheet("Store charts")
    charts.cell(1, 1, "End-of-day level with safety stock and capacity, per store").font = TITLE_FONT
    charts.page_setup.orientation = "landscape"
    charts.page_setup.fitToWidth, charts.page_setup.fitToHeight = 1, 0
    charts.sheet_properties.pageSetUpPr.fitToPage = True
    row = 3
    for store in scn.storage:
        label = store.replace("_", " ")
        cols = [stores.columns.get_loc(f"{label} {k} [t]") + 1 for k in ("level", "safety", "capacity")]
        _line_chart(charts, f"{label}, end-of-day tonnes [t]", ws, 1, cols, n, f"A{row}", None)
        row += 19
    if run.risk is not None and run.risk.top:
        top = pd.DataFrame(run.risk.top).rename(columns=TOP_RISK_HEADERS)
        top = top[[c for c in TOP_RISK_HEADERS.values() if c in top.columns]]
        rws = wb.create_sheet("Top risks")
        _title(rws, "Where the plan is most likely to break a limit",
               f"Chance across {run.risk.n_futures} sampled futures with the plan held fixed.")
        _frame_to_sheet(rws, top, start_row=4,
                        formats={"chance [%]": "0.0%", "chance after the remedy [%]": "0.0%"},
                        widths={"remedy": 60, "store": 12, "limit": 18, "from": 12,
                                "chance [%]": 12, "chance after the remedy [%]": 16})
        for row in rws.iter_rows(min_row=5, max_row=4 + len(top)):
            for cell in row:
                cell.alignment = Alignment(wrap_text=True, vertical="top")

    # --- sales
    ws = wb.create_sheet("Sales")
    ships = shipments_frame(run)
    _frame_to_sheet(ws, ships, formats={"tonnes [t]": "#,##0", f"net revenue [{cur}]": money,
                                        "quality margin [% points]": "0.00", "loads": "0"},
                    widths={"buyer": 24})
    ws.conditional_formatting.add(f"H2:H{len(ships) + 1}",
                                  CellIsRule(operator="lessThan", formula=["0.5"], fill=WATCH_FILL))
    cws = wb.create_sheet("Contracts")
    contracts = contract_frame(run)
    _frame_to_sheet(cws, contracts, formats={c: "#,##0" for c in contracts.columns if "[t]" in c},
                    widths={"lane": 36, "party": 24})
    for i, status in enumerate(contracts["status"], start=2):
        if status == "below minimum":
            cws.cell(i, contracts.columns.get_loc("status") + 1).fill = ALARM_FILL
    # monthly shipments per buyer, as a table the bar chart reads
    sales = ships.assign(month=pd.to_datetime(ships["date"]).dt.to_period("M").astype(str))
    pivot = sales.pivot_table(index="month", columns="buyer", values="tonnes [t]", aggfunc="sum",
                              fill_value=0.0).reset_index()
    start_col = len(contracts.columns) + 3
    for j, col in enumerate(pivot.columns, start=start_col):
        cws.cell(1, j, col).font = Font(bold=True)
        for i, v in enumerate(pivot[col], start=2):
            cws.cell(i, j, v if not isinstance(v, np.generic) else v.item())
    if len(pivot.columns) > 1:
        bar = BarChart()
        # the unit in the title: a one-letter axis title is drawn rotated as an odd glyph
        bar.title = "Shipments by buyer per month, tonnes [t]"
        bar.height, bar.width = 9, 24
        bar.add_data(Reference(cws, min_col=start_col + 1, max_col=start_col + len(pivot.columns) - 1,
                               min_row=1, max_row=len(pivot) + 1), titles_from_data=True)
        bar.set_categories(Reference(cws, min_col=start_col, min_row=2, max_row=len(pivot) + 1))
        cws.add_chart(bar, f"{get_column_letter(start_col)}{len(pivot) + 4}")

    # --- stone in the silo and the gypsum it makes
    _stone_sheet(wb, run)

    # --- the scrubber's removal, the permit and the allowances
    _scrubber_sheet(wb, run)

    # --- mill rejects, balance, costs, assumptions
    rejects = rejects_frame(run)
    if rejects is not None:
        ws = wb.create_sheet("Mill rejects")
        _title(ws, "Mill rejects hauled each day from the mills, cheapest site first",
               "Not a decision of the plan: the coal burned sets them, so the plan and the baseline "
               "haul and pay the same. Not hauled = more than the sites take (a breach).")
        _frame_to_sheet(ws, rejects, start_row=4,
                        formats={c: "#,##0.0" for c in rejects.columns if "[t]" in c}
                        | {rejects.columns[-1]: money}, widths={"date": 12})
    ws = wb.create_sheet("Daily balance")
    bal = plan.balance.copy()
    if rejects is not None:
        bal["mill_rejects_hauled_t"] = plan.evaluation.rejects.total_hauled_t
        bal["mill_rejects_not_hauled_t"] = plan.evaluation.rejects.unhauled_t
    bal.columns = [_with_unit(c) for c in bal.columns]
    if rejects is not None:
        bal[f"mill rejects haul cost [{cur}]"] = plan.evaluation.rejects.cost
    _frame_to_sheet(ws, bal, formats={c: "#,##0.0" for c in bal.columns if "[t]" in c or "[GJ]" in c
                                      or "[MWh]" in c} | {c: "0.000" for c in bal.columns if "/" in c}
                    | {c: "0.00" for c in bal.columns if "[%]" in c})
    ws = wb.create_sheet("Costs")
    costs = costs_frame(run)
    _title(ws, "Costs of the plan and of the reorder-point baseline",
           "Positive = the plant pays. Limestone left at the end is credited at its cheapest "
           "delivered cost; byproduct left is charged at its landfill cost. Mill rejects "
           "disposal is the same for both (the coal sets it). Allowances: bought less sold "
           "(allowances left at the end are credited in the end-stock value at the last sell price).")
    _frame_to_sheet(ws, costs, start_row=4, formats={c: money for c in costs.columns[1:]},
                    widths={"item": 30, costs.columns[1]: 20, costs.columns[2]: 28})
    _assumptions(wb.create_sheet("Assumptions"), run)

    for sheet in wb.worksheets:
        _page_setup(sheet, scn.plant.name, _window_end(run) if sheet.title in DAILY_SHEETS else None)
    return save_workbook(wb, path)


#: Sheets with a row per day (or per load): printed for the firm window only.
DAILY_SHEETS = ("Plant manager", "Sales", "Stone and gypsum", "Scrubber and permit", "Daily balance")
#: Most columns of a table printed on one page across.
MAX_COLUMNS_PER_PAGE = 20
#: Page margins [inch]: narrow, as printers allow.
MARGINS = {"left": 0.4, "right": 0.4, "top": 0.6, "bottom": 0.6, "header": 0.25, "footer": 0.25}


def _window_end(run) -> dt.date:
    """Last day of the firm window (the days planned one by one)."""
    p = run.plan.scenario.plant
    return p.start_date + dt.timedelta(days=min(run.plan.firm_days, p.horizon_days) - 1)


def _page_setup(ws, station: str, window_end: dt.date | None = None) -> None:
    """Print ``ws`` readably: landscape, one page wide, narrow margins, the sheet and the
    station in the header and the page number in the footer, the header rows (already
    set as print titles) and the first column repeated.  With ``window_end``, the print
    area stops at the last row dated on or before it (charts and side tables above that
    row are kept) and the footer says so; the sheet itself keeps every row."""
    from openpyxl.utils.cell import coordinate_from_string

    ps = ws.page_setup
    # a tall list of inputs reads best upright; every table across
    ps.orientation = "portrait" if ws.title == "Assumptions" else "landscape"
    # a table of many columns (the daily balance) on as many pages across as keep it legible
    wide = ws.print_title_rows is not None and ws.max_column > MAX_COLUMNS_PER_PAGE
    ps.fitToWidth, ps.fitToHeight = (-(-ws.max_column // MAX_COLUMNS_PER_PAGE) if wide else 1), 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    for side, inches in MARGINS.items():
        setattr(ws.page_margins, side, inches)
    ws.print_options.horizontalCentered = False
    ws.oddHeader.center.text = f"&A · {station}"[:200]
    ws.oddFooter.right.text = "page &P of &N"
    if ws.print_title_rows and ws.max_column > 6:
        ws.print_title_cols = "A:A"
    if window_end is None:
        return
    last, later = 0, False
    for row in ws.iter_rows():
        for cell in row:
            v = cell.value
            if isinstance(v, dt.datetime):
                v = v.date()
            if isinstance(v, dt.date):
                if v <= window_end:
                    last = max(last, cell.row)
                else:
                    later = True
    if not later or not last:
        return
    for chart in ws._charts:  # a chart's rows, at about 0.5 cm each
        anchor = chart.anchor if isinstance(chart.anchor, str) else None
        if anchor:
            _, top = coordinate_from_string(anchor)
            last = max(last, top + int(np.ceil(chart.height / 0.5)))
    ws.print_area = f"A1:{get_column_letter(ws.max_column)}{last}"
    if last <= 80:  # the firm window's rows on one page (no page of four spilled rows)
        ps.fitToHeight = 1
    ws.oddFooter.left.text = f"Printed to {window_end:%d %b %Y}, the end of the firm window; the sheet holds every day."


def _stone_sheet(wb, run) -> None:
    """The silo's CaCO3 by day, the gypsum's purity against each buyer's limit (a chart),
    and every limestone delivery with its stone, marked where it was chosen for quality."""
    from ..schedule.quality import deliveries_quality_frame, stone_frame

    plan = run.plan
    scn = plan.scenario
    if "limestone_caco3_pct" not in plan.balance:
        return
    ws = wb.create_sheet("Stone and gypsum")
    daily = stone_frame(scn, plan.balance).rename(columns={
        "silo_caco3_pct": "silo CaCO3 [%]", "gypsum_purity_pct": "gypsum purity [%]",
        "silo_mgco3_pct": "silo MgCO3 [%]"})
    _title(ws, "Stone in the silo and the gypsum it makes",
           "The silo is taken as well mixed: each day's deliveries mix with the stock, and the "
           "scrubber draws that mix. Purity is the CaSO4.2H2O share of the dry cake.")
    _frame_to_sheet(ws, daily, start_row=4, formats={c: "0.00" for c in daily.columns if "[%]" in c},
                    widths={"date": 12})
    n = len(daily)
    cols = [daily.columns.get_loc(c) + 1 for c in daily.columns if c != "date" and "MgCO3" not in c]
    chart = LineChart()
    chart.title, chart.y_axis.title = "Silo CaCO3 and gypsum purity against buyers' limits", "%"
    chart.height, chart.width = 10, 26
    for j in cols:
        chart.add_data(Reference(ws, min_col=j, min_row=4, max_row=n + 4), titles_from_data=True)
    chart.set_categories(Reference(ws, min_col=1, min_row=5, max_row=n + 4))
    for k, series in enumerate(chart.series):
        series.graphicalProperties.line.solidFill = LINE_COLOURS[k % len(LINE_COLOURS)]
        series.smooth = False
    ws.add_chart(chart, f"{get_column_letter(len(daily.columns) + 2)}4")
    deliveries = deliveries_quality_frame(scn, plan.lanes, plan.movements)
    cur = scn.plant.currency
    deliveries = deliveries.rename(columns={"tonnes": "tonnes [t]", "caco3_pct": "stone CaCO3 [%]",
                                            "cost_per_t_caco3": f"delivered cost per t CaCO3 [{cur}/t]",
                                            "chosen_for_quality": "chosen for quality",
                                            "instead_of": "cheaper lower-grade stone open that day"})
    start_col = len(daily.columns) + 2
    first_row = 26
    ws.cell(first_row - 1, start_col, "Limestone deliveries and the stone they bring").font = Font(bold=True)
    widths = {"date": 12, "party": 24, "lane": 30, "tonnes [t]": 11, "stone CaCO3 [%]": 11,
              "chosen for quality": 11, "cheaper lower-grade stone open that day": 30}
    for j, col in enumerate(deliveries.columns, start=start_col):
        c = ws.cell(first_row, j, col)
        c.fill, c.font = HEAD_FILL, HEAD_FONT
        c.alignment = Alignment(wrap_text=True, vertical="center", horizontal="center")
        ws.column_dimensions[get_column_letter(j)].width = widths.get(col, 16)
    ws.row_dimensions[first_row].height = 45
    for i, row in enumerate(deliveries.itertuples(index=False), start=first_row + 1):
        for j, v in enumerate(row, start=start_col):
            if deliveries.columns[j - start_col] == "chosen for quality":
                v = "yes" if bool(v) else ""
            elif isinstance(v, pd.Timestamp):
                v = v.date()
            elif isinstance(v, np.generic):
                v = v.item()
            cell = ws.cell(i, j, v)
            if isinstance(v, dt.date):
                cell.number_format = "yyyy-mm-dd"
            if deliveries.columns[j - start_col] == "chosen for quality" and v:
                ws.cell(i, j).fill = WATCH_FILL


#: Plain headers of the "Scrubber and permit" sheet's daily table, by `lever_days` column.
SCRUBBER_HEADERS = {"date": "date", "removal_pct": "SO2 removal chosen [%]",
                    "removal_min_pct": "removal min [%]", "removal_max_pct": "removal max [%]",
                    "setpoint_pct": "setpoint [%]", "so2_emitted_t": "SO2 emitted [t]",
                    "so2_rolling_kg_per_gj": "rolling average [kg/GJ]",
                    "so2_limit_kg_per_gj": "permit limit [kg/GJ]"}
#: Headers of the removal dips table, by `removal_dips` key.
DIP_HEADERS = {"first_date": "from", "last_date": "to", "lowest_pct": "lowest removal [%]",
               "setpoint_pct": "setpoint [%]", "cause": "cause"}
#: Chart lines of the removal: chosen in slate, min and max in brick, setpoint in ochre.
REMOVAL_COLOURS = {"SO2 removal chosen [%]": ("2F4858", "solid"), "removal min [%]": ("A8442A", "dash"),
                   "removal max [%]": ("A8442A", "dash"), "setpoint [%]": ("C98B2B", "sysDot"),
                   "SO2 removal [%]": ("2F4858", "solid"),
                   "rolling average [kg/GJ]": ("2F4858", "solid"), "permit limit [kg/GJ]": ("A8442A", "dash")}


def scrubber_frame(run) -> pd.DataFrame | None:
    """The plan's removal, SO2 emitted and permit average per day with plain headers
    (`reagentplan.schedule.lever.lever_days`), or ``None`` where the plan neither chose the
    removal nor the station holds allowances.  A fixed removal is headed "SO2 removal"."""
    days = lever_days(run.plan)
    if days is None:
        return None
    headers = dict(SCRUBBER_HEADERS)
    if run.plan.plan.removal is None:
        headers["removal_pct"] = "SO2 removal [%]"
    return days.rename(columns=headers)


def allowance_months_frame(run) -> pd.DataFrame | None:
    """The allowance account per month (``summary()["allowances"]``) with plain headers,
    or ``None`` without an allowances sheet."""
    block = run.plan.summary().get("allowances")
    if block is None:
        return None
    cur = run.plan.scenario.plant.currency
    frame = pd.DataFrame(block["months"], columns=["month", "emitted_t", "allocated_t", "bought_t",
                                                   "sold_t", "cost", "holding_end_t"])
    return frame.rename(columns={"emitted_t": "SO2 emitted [t]", "allocated_t": "allocated [t]",
                                 "bought_t": "bought [t]", "sold_t": "sold [t]",
                                 "cost": f"money paid [{cur}]",
                                 "holding_end_t": "holding at month end [t]"})


def _small_table(ws, frame: pd.DataFrame, row: int, col: int, formats: dict, widths: dict) -> int:
    """``frame`` with the sheet's header look at (row, col); returns the row after it."""
    for j, name in enumerate(frame.columns, start=col):
        c = ws.cell(row, j, name)
        c.fill, c.font = HEAD_FILL, HEAD_FONT
        c.alignment = Alignment(wrap_text=True, vertical="center", horizontal="center")
        ws.column_dimensions[get_column_letter(j)].width = widths.get(name, 12)
    for i, rec in enumerate(frame.itertuples(index=False), start=row + 1):
        for j, v in enumerate(rec, start=col):
            if isinstance(v, np.generic):
                v = v.item()
            cell = ws.cell(i, j, v)
            name = frame.columns[j - col]
            if name in formats:
                cell.number_format = formats[name]
            cell.alignment = Alignment(wrap_text=True, vertical="top")
    return row + len(frame) + 1


def _scrubber_chart(data_ws, title: str, y_title: str, cols: list[tuple[int, str]], header_row: int,
                    n: int, y_min: float | None, y_max: float | None, y_format: str) -> LineChart:
    chart = LineChart()
    chart.title, chart.y_axis.title, chart.x_axis.title = title, y_title, "date"
    chart.height, chart.width = 9, 24
    chart.x_axis.number_format = "mmm-yy"
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    chart.y_axis.number_format = y_format
    chart.y_axis.scaling.min, chart.y_axis.scaling.max = y_min, y_max
    for j, _ in cols:
        chart.add_data(Reference(data_ws, min_col=j, min_row=header_row, max_row=header_row + n),
                       titles_from_data=True)
    for series, (_, name) in zip(chart.series, cols):
        colour, dash = REMOVAL_COLOURS.get(name, ("2F4858", "solid"))
        series.graphicalProperties.line.solidFill = colour
        series.graphicalProperties.line.dashStyle = dash
        series.graphicalProperties.line.width = 22225 if dash == "solid" else 12700
        series.smooth = False
    chart.set_categories(Reference(data_ws, min_col=1, min_row=header_row + 1, max_row=header_row + n))
    return chart


def _scrubber_sheet(wb, run) -> None:
    """"Scrubber and permit": where the plan chose the removal or the station holds
    allowances, the daily removal against its range and setpoint with the SO2 emitted and
    the permit's rolling average against its limit (left), the removal dips with their
    cause and the allowance months (top right), and a chart of each (below them)."""
    daily = scrubber_frame(run)
    if daily is None:
        return
    plan = run.plan
    scn = plan.scenario
    cur = scn.plant.currency
    avg = scn.plant.so2_limit_avg_days
    ws = wb.create_sheet("Scrubber and permit")
    chose = plan.plan.removal is not None
    _title(ws, "SO2 removal chosen by the plan, the permit's rolling average and the allowances"
           if chose else "SO2 removal, the permit's rolling average and the allowances",
           (f"The plan chooses the removal each day between removal min and max; the setpoint is the "
            f"fixed removal the reorder-point baseline runs at. " if chose else
            "The removal is fixed (no range in the scrubber sheet). ")
           + f"Rolling average = SO2 emitted over the last {avg} days per GJ of heat input.")
    header = 4
    _frame_to_sheet(ws, daily, start_row=header,
                    formats={c: "0.00" for c in daily.columns if "[%]" in c}
                    | {"SO2 emitted [t]": "#,##0.0"} | {c: "0.0000" for c in daily.columns if "kg/GJ" in c},
                    widths={"date": 12})
    n = len(daily)
    side = len(daily.columns) + 2
    row = header - 1
    ws.cell(row, side, "Days the plan runs the scrubber below its setpoint").font = Font(bold=True)
    dips = (plan.summary().get("removal") or {}).get("dips") or []
    if not chose:
        ws.cell(row + 1, side, "none: the removal is fixed").font = NOTE_FONT
        row += 3
    elif not dips:
        ws.cell(row + 1, side, "none: the plan never runs below the setpoint").font = NOTE_FONT
        row += 3
    else:
        frame = pd.DataFrame(dips)[list(DIP_HEADERS)].rename(columns=DIP_HEADERS)
        row = _small_table(ws, frame, row + 1, side, {"lowest removal [%]": "0.00", "setpoint [%]": "0.00"},
                           {"from": 11, "to": 11, "lowest removal [%]": 11, "setpoint [%]": 10, "cause": 70}) + 1
    months = allowance_months_frame(run)
    if months is not None:
        opening = plan.summary()["allowances"]["opening_t"]
        ws.cell(row, side, f"SO2 allowances by month (held at the start: {opening:,.0f} t; "
                           "money paid: bought less sold)").font = Font(bold=True)
        row = _small_table(ws, months, row + 1, side,
                           {c: "#,##0.0" for c in months.columns if "[t]" in c}
                           | {f"money paid [{cur}]": f'#,##0 "{cur}"'},
                           {"month": 11, f"money paid [{cur}]": 14}) + 1
    removal_cols = [(daily.columns.get_loc(c) + 1, c) for c in daily.columns if "[%]" in c]
    lows = [float(daily[c].min()) for _, c in removal_cols]
    ws.add_chart(_scrubber_chart(ws, "SO2 removal chosen, its range and the setpoint" if chose
                                 else "SO2 removal", "%", removal_cols, header, n,
                                 float(np.floor(min(lows) - 0.5)), 100.0, "0.0"),
                 f"{get_column_letter(side)}{row + 1}")
    permit_cols = [(daily.columns.get_loc(c) + 1, c) for c in daily.columns if "kg/GJ" in c
                   and daily[c].notna().any()]
    ws.add_chart(_scrubber_chart(ws, f"{avg}-day rolling average of SO2 against the permit limit",
                                 "kg/GJ", permit_cols, header, n, 0.0, None, "0.000"),
                 f"{get_column_letter(side)}{row + 20}")


_UNITS = {"_t": "[t]", "_gj": "[GJ]", "_mwh": "[MWh]", "_pct": "[%]", "_ppm": "[ppm]",
          "_kg_per_gj": "[kg/GJ]", "_lb_per_mmbtu": "[lb/MMBtu]", "_kg_per_mwh": "[kg/MWh]"}


def _with_unit(col: str) -> str:
    for suffix, unit in sorted(_UNITS.items(), key=lambda kv: -len(kv[0])):
        if col.endswith(suffix):
            return f"{col[: -len(suffix)].replace('_', ' ')} {unit}"
    return col.replace("_", " ")


def _assumptions(ws, run) -> None:
    scn = run.plan.scenario
    _title(ws, "Assumptions: every input as read, the sources of the constants, the cautions",
           f"Scenario file: {scn.source_name or 'upload'}. All quantities metric.")
    r = 4
    ws.cell(r, 1, "Caution").font = Font(bold=True, color="9C2A00")
    ws.cell(r, 2, CAUTION).alignment = Alignment(wrap_text=True)
    ws.row_dimensions[r].height = 45
    r += 2
    warnings = [*getattr(scn, "warnings", ()), *getattr(run, "warnings", ())]
    ws.cell(r, 1, "Warnings: unusual inputs").font = Font(bold=True, color="9C2A00")
    if not warnings:
        ws.cell(r, 2, "none: every value is inside its usual range").font = NOTE_FONT
        r += 1
    for w in warnings:
        ws.cell(r, 2, str(w)).alignment = Alignment(wrap_text=True)
        ws.row_dimensions[r].height = 45
        r += 1
    r += 1
    ws.cell(r, 1, "Sources of the constants").font = Font(bold=True)
    for what, src in SOURCES:
        r += 1
        ws.cell(r, 1, what)
        ws.cell(r, 2, src)
    r += 2
    blocks = [("plant", pd.DataFrame(list(asdict(scn.plant).items()), columns=["key", "value"])),
              ("scrubber", pd.DataFrame(list(asdict(scn.scrubber).items()), columns=["key", "value"])),
              ("units", _records(scn.units)), ("coal_sources", _records(scn.coal_sources)),
              ("coal_blend", scn.coal_blend), ("storage", _records(scn.storage.values())),
              ("suppliers", _records(scn.suppliers)), ("buyers", _records(scn.buyers)),
              ("disposal", _records(scn.disposal)), ("firm_orders", _records(scn.firm_orders)),
              ("lane_closures", _records(scn.lane_closures))]
    if scn.period_settings is not None:
        blocks.append(("period_settings", scn.period_settings))
    for name, frame in blocks:
        ws.cell(r, 1, name).font = Font(bold=True)
        r += 1
        if frame.empty:
            ws.cell(r, 1, "(none)").font = NOTE_FONT
            r += 2
            continue
        for j, col in enumerate(frame.columns, start=1):
            c = ws.cell(r, j, col)
            c.fill, c.font = HEAD_FILL, HEAD_FONT
        for row in frame.itertuples(index=False):
            r += 1
            for j, v in enumerate(row, start=1):
                if isinstance(v, pd.Timestamp):
                    v = v.date()
                elif isinstance(v, np.generic):
                    v = v.item()
                elif not isinstance(v, (int, float, str, dt.date, type(None))):
                    v = str(v)
                ws.cell(r, j, v)
        r += 2
    ws.column_dimensions["A"].width = 34
    ws.column_dimensions["B"].width = 60
    ws.page_setup.orientation = "landscape"
