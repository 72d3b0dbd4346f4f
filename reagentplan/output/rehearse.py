"""Files of a rehearsal: ``rehearsal.csv`` (one row per policy × future),
``rehearsal.xlsx`` (the table, a chart of the two policies' realised costs per future,
the cost by cause, notes) and ``rehearsal.json`` (settings, summary, timings)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import BarChart, Reference

from .. import CAUTION
from .files import save_workbook, write_csv, write_json
from .plan_workbook import NOTE_FONT, TITLE_FONT, _frame_to_sheet

NOTES = (
    ("policy", "plan: the optimised plan followed each week; baseline: the reorder-point policy followed each week"),
    ("future", "which sampled future was taken as the truth (the same futures for both policies)"),
    ("realised_cost", "sum of the cost_ columns: what carrying the policy out really cost [currency]"),
    ("controllable_cost", "stone + freight + sales + landfill + closing stock (no penalties) [currency]"),
    ("cost_stone / cost_freight", "price and freight of the stone that arrived"),
    ("cost_sales", "byproduct sold at the buyers' net prices (negative = revenue)"),
    ("cost_landfill", "byproduct landfilled at the site's cost"),
    ("cost_stone_missing", "limestone use the empty store could not meet, at 5 x the shortage penalty"),
    ("cost_under_safety", "tonne-days below safety stock at the shortage penalty"),
    ("cost_overflow", "tonnes above a store's capacity (dumped) at the overflow penalty"),
    ("cost_contract_shortfall", "tonnes short of a monthly minimum, months wholly rehearsed"),
    ("cost_closing_stock", "stores at the end: limestone credited at the cheapest delivered cost "
                           "(per tonne of CaCO3 when the suppliers' stone differs), byproducts charged "
                           "at the cheapest landfill cost"),
    ("days_under_safety", "days the limestone store ended below its safety stock"),
    ("byproduct_days_under_safety", "days a byproduct store ended below its safety stock (a heel kept in the store)"),
    ("nervous_*", "loads added, moved, cancelled or changed inside the firm window between consecutive plans"),
    ("months_over_max", "contract months whose realised tonnes exceed the monthly maximum"),
    ("stone_received_t / stone_used_t", "limestone delivered / drawn by the scrubber: the silo's mix carries "
                                        "the CaCO3 need, so poorer stone is drawn in more tonnes [t]"),
    ("refused_t", "byproduct loads a buyer's laboratory refused, the day's product outside its limits "
                  "(left in the store) [t]"),
)


def _chart(wb: Workbook, table: pd.DataFrame, currency: str) -> None:
    ws = wb.create_sheet("chart")
    ws.cell(1, 1, "Realised cost per future: plan against reorder-point baseline").font = TITLE_FONT
    ws.cell(2, 1, "the same sampled futures and disturbances for both policies; lower is better").font = NOTE_FONT
    wide = table.pivot(index="future", columns="policy", values="realised_cost").reset_index()
    cols = ["future"] + [p for p in ("plan", "baseline") if p in wide.columns]
    wide = wide[cols].rename(columns={p: f"{p} [{currency}]" for p in cols[1:]})
    _frame_to_sheet(ws, wide, start_row=4, formats={c: "#,##0" for c in wide.columns[1:]})
    if not len(wide):
        return
    chart = BarChart()
    chart.type = "col"
    chart.title = "Realised cost per future"
    chart.x_axis.title = "future"
    chart.y_axis.title = f"realised cost [{currency}]"
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    chart.height, chart.width = 11, 22
    data = Reference(ws, min_col=2, max_col=len(cols), min_row=4, max_row=4 + len(wide))
    chart.add_data(data, titles_from_data=True)
    chart.set_categories(Reference(ws, min_col=1, min_row=5, max_row=4 + len(wide)))
    ws.add_chart(chart, "F4")


def write_rehearsal_workbook(result, path: Path) -> Path:
    wb = Workbook()
    ws = wb.active
    ws.title = "rehearsal"
    table = result.table
    _frame_to_sheet(ws, table, formats={c: "#,##0" for c in table.columns if "cost" in c})
    cur = result.settings.get("currency", "")
    _chart(wb, table, cur)
    causes = wb.create_sheet("by cause")
    causes.cell(1, 1, "Median realised cost by cause").font = TITLE_FONT
    summ = result.summary()
    rows = [{"cause": k, **{p: summ[p]["costs_p50"][k] for p in ("plan", "baseline") if p in summ}}
            for k in next(iter(summ.values()))["costs_p50"]]
    _frame_to_sheet(causes, pd.DataFrame(rows), start_row=3,
                    formats={"plan": "#,##0", "baseline": "#,##0"})
    notes = wb.create_sheet("notes")
    notes.cell(1, 1, "The rehearsal").font = TITLE_FONT
    lines = [(k, str(v)) for k, v in result.settings.items()]
    lines += [(f"seconds {k}", str(v)) for k, v in result.seconds.items()]
    lines += [("", ""), ("column", "meaning")] + list(NOTES) + [("", ""), ("caution", CAUTION)]
    for i, (k, v) in enumerate(lines, start=3):
        notes.cell(i, 1, k)
        notes.cell(i, 2, v)
    notes.column_dimensions["A"].width = 30
    notes.column_dimensions["B"].width = 110
    return save_workbook(wb, path)


def write_rehearsal(result, folder: Path) -> list[Path]:
    """Every file of a rehearsal (`reagentplan.rehearse.RehearsalResult`) into ``folder``."""
    folder = Path(folder)
    return [write_csv(result.table, folder / "rehearsal.csv"),
            write_rehearsal_workbook(result, folder / "rehearsal.xlsx"),
            write_json({"settings": result.settings, "summary": result.summary(), "seconds": result.seconds,
                        "caution": CAUTION}, folder / "rehearsal.json")]


__all__ = ["write_rehearsal", "write_rehearsal_workbook"]
