"""The dashboard's look: colours, the chart template and the page's style sheet.

The style sheet is inlined in the page (no asset files, nothing fetched from elsewhere).
"""

from __future__ import annotations

import plotly.graph_objects as go
import plotly.io as pio

INK = "#1e2a30"
MUTED = "#667580"
GRID = "#e4e9e6"
PAPER = "#ffffff"
PAGE = "#eef1ec"
HEADER = "#243b35"
ACCENT = "#d9a441"

STORE_COLOURS = {
    "limestone": "#3c7a9e",
    "gypsum": "#c08a26",
    "fly_ash": "#56616b",
    "bottom_ash": "#94573a",
}
STORE_LABELS = {
    "limestone": "Limestone store",
    "gypsum": "Gypsum shed",
    "fly_ash": "Fly-ash silo",
    "bottom_ash": "Bottom-ash bunker",
}
MATERIAL_LABELS = {
    "limestone": "limestone",
    "gypsum": "gypsum",
    "fly_ash": "fly ash",
    "bottom_ash": "bottom ash",
}
SAFETY = "#e07b1a"
CAPACITY = "#b8322a"
GOOD = "#3a8f5c"
BAD = "#b8322a"
OUTLOOK = "#9aa7ae"
LANDFILL = "#8c8c7a"
#: Colours for parties (suppliers, buyers) in order of appearance.
PARTY_COLOURS = ["#2f6f8f", "#c0672b", "#4f8f4a", "#7b5ea7", "#b5893a", "#3f8f8a",
                 "#a04d6b", "#6a7f2e"]

FONT = "'DejaVu Sans', 'Segoe UI', Helvetica, Arial, sans-serif"

TEMPLATE = go.layout.Template(
    layout=go.Layout(
        font=dict(family=FONT, size=12, color=INK),
        paper_bgcolor=PAPER,
        plot_bgcolor=PAPER,
        colorway=PARTY_COLOURS,
        margin=dict(l=64, r=24, t=48, b=40),
        title=dict(font=dict(size=15, color=INK), x=0.01, xanchor="left"),
        xaxis=dict(gridcolor=GRID, linecolor="#b9c3bd", zeroline=False, ticks="outside",
                   tickcolor="#b9c3bd"),
        yaxis=dict(gridcolor=GRID, linecolor="#b9c3bd", zeroline=False, separatethousands=True),
        legend=dict(orientation="h", yanchor="bottom", y=1.02, xanchor="right", x=1,
                    bgcolor="rgba(0,0,0,0)", font=dict(size=11)),
        hoverlabel=dict(font=dict(family=FONT, size=12)),
        hovermode="closest",
    )
)
pio.templates["reagentplan"] = TEMPLATE


def party_colour(index: int) -> str:
    return PARTY_COLOURS[index % len(PARTY_COLOURS)]


def party_colours(scenario) -> dict[str, str]:
    """One colour per supplier and buyer (in workbook order) and the landfill colour for
    disposal sites, so a party looks the same in every chart."""
    out: dict[str, str] = {}
    for name in [s.supplier for s in scenario.suppliers] + [b.buyer for b in scenario.buyers]:
        if name not in out:
            out[name] = party_colour(len(out))
    for d in scenario.disposal:
        out.setdefault(d.site, LANDFILL)
    return out


CSS = f"""
:root {{ --Dash-Fill-Interactive-Strong: #2f6f5e; --Dash-Fill-Interactive-Weak: #d5e4dd;
  --Dash-Fill-Primary-Hover: #24574a; --Dash-Fill-Primary-Active: #1b4338; }}
* {{ box-sizing: border-box; }}
body {{ margin: 0; background: {PAGE}; color: {INK}; font-family: {FONT}; font-size: 14px; }}
.rp-header {{ background: {HEADER}; color: #f4f1e8; padding: 12px 22px 10px;
  display: flex; flex-wrap: wrap; align-items: center; gap: 10px 28px; }}
.rp-brand {{ display: flex; flex-direction: column; }}
.rp-brand .rp-name {{ font-size: 19px; font-weight: bold; letter-spacing: .3px; }}
.rp-brand .rp-name b {{ color: {ACCENT}; }}
.rp-brand .rp-sub {{ font-size: 13px; color: #c8d2cb; margin-top: 2px; }}
.rp-kpis {{ display: flex; flex-wrap: wrap; gap: 10px; margin-left: auto; }}
.rp-picker .dash-options-list-option,
.rp-picker .dash-options-list-option:not(:has(input[disabled])):focus-within {{ color: #f4f1e8;
  background: transparent; }}
.rp-picker .dash-options-list-option:has(input:checked),
.rp-picker .dash-options-list-option:has(input:checked):not(:has(input[disabled])):focus-within {{
  color: {ACCENT}; font-weight: bold; }}
.rp-kpi {{ background: rgba(255,255,255,.08); border: 1px solid rgba(255,255,255,.14);
  border-radius: 6px; padding: 5px 11px; min-width: 110px; }}
.rp-kpi .k {{ font-size: 11px; color: #b9c6bf; text-transform: uppercase; letter-spacing: .5px; }}
.rp-kpi .v {{ font-size: 16px; font-weight: bold; }}
.rp-kpi.warn .v {{ color: #ffb199; }}
.rp-kpi.good .v {{ color: #a8e0b8; }}
.rp-caution {{ background: #fbf3dc; color: #5c4a14; border-bottom: 1px solid #ead9a6;
  padding: 6px 22px; font-size: 12.5px; }}
.rp-body {{ display: flex; align-items: flex-start; gap: 16px; padding: 14px 16px 30px; }}
.rp-side {{ flex: 0 0 292px; background: {PAPER}; border: 1px solid #d8ded9; border-radius: 8px;
  padding: 12px 14px; position: sticky; top: 10px; }}
.rp-side h3 {{ font-size: 13px; text-transform: uppercase; letter-spacing: .6px; color: {MUTED};
  margin: 14px 0 6px; border-bottom: 1px solid {GRID}; padding-bottom: 4px; }}
.rp-side h3:first-child {{ margin-top: 2px; }}
.rp-side label, .rp-field-label {{ font-size: 12.5px; color: {INK}; display: block; margin: 8px 0 2px; }}
.rp-source {{ font-size: 12.5px; color: {MUTED}; word-break: break-word; }}
.rp-input {{ width: 100%; box-sizing: border-box; font-size: 12.5px; padding: 4px 6px;
  border: 1px solid #c9d2cc; border-radius: 5px; }}
.rp-upload {{ border: 1.5px dashed #9fb0a6; border-radius: 7px; padding: 10px; text-align: center;
  font-size: 12.5px; color: {MUTED}; cursor: pointer; background: #f7f9f6; margin-top: 6px; }}
.rp-upload:hover {{ border-color: {HEADER}; color: {INK}; }}
.rp-msg {{ font-size: 12px; margin-top: 6px; white-space: pre-wrap; }}
.rp-msg.bad {{ background: #fbe9e6; color: #7d1f17; border: 1px solid #efc2bb; border-radius: 6px;
  padding: 7px 8px; max-height: 260px; overflow-y: auto; font-family: 'DejaVu Sans Mono', monospace;
  font-size: 11px; }}
.rp-msg.good {{ color: #24683f; }}
.rp-button {{ background: {HEADER}; color: #fff; border: 0; border-radius: 6px; padding: 8px 14px;
  font-size: 13.5px; cursor: pointer; font-family: {FONT}; }}
.rp-button:hover {{ background: #1a2c27; }}
.rp-button:disabled {{ background: #9aa8a2; cursor: progress; }}
.rp-button.secondary {{ background: #fff; color: {HEADER}; border: 1px solid {HEADER}; }}
.rp-button.secondary:disabled {{ color: #9aa8a2; border-color: #c5cec9; background: #fff; cursor: default; }}
.rp-buttons {{ display: flex; gap: 8px; margin-top: 12px; }}
.rp-run .rp-progress {{ display: none; }}
.rp-run.busy .rp-progress {{ display: block; }}
.rp-progress progress {{ width: 100%; height: 10px; accent-color: {ACCENT}; margin-top: 8px; }}
.rp-progress-text {{ font-size: 12px; color: {MUTED}; margin-top: 3px; }}
.rp-outage-dates {{ font-size: 12px; color: {MUTED}; margin-top: 2px; }}
.rp-main {{ flex: 1 1 auto; min-width: 0; }}
.rp-tabs {{ border-bottom: 2px solid {HEADER}; }}
.rp-tab {{ background: #dde4de !important; border: 1px solid #cdd6cf !important; border-bottom: 0 !important;
  color: {INK} !important; padding: 8px 14px !important; font-size: 14px; border-radius: 6px 6px 0 0;
  margin-right: 4px; }}
.rp-tab--selected {{ background: {HEADER} !important; color: #fff !important; border-color: {HEADER} !important; }}
.rp-tab .role {{ display: block; font-size: 11px; opacity: .75; }}
.rp-view {{ padding-top: 12px; }}
.rp-view-intro {{ font-size: 13px; color: {MUTED}; margin: 0 2px 10px; }}
.rp-grid {{ display: grid; grid-template-columns: repeat(auto-fit, minmax(460px, 1fr)); gap: 14px; }}
.rp-card {{ background: {PAPER}; border: 1px solid #d8ded9; border-radius: 8px; padding: 6px 8px; min-width: 0;
  overflow-x: auto; }}
.rp-card.wide {{ grid-column: 1 / -1; }}
.rp-card h4 {{ margin: 6px 6px 6px; font-size: 14px; }}
.rp-headlines {{ display: grid; grid-template-columns: repeat(auto-fit, minmax(220px, 1fr)); gap: 10px;
  margin-bottom: 14px; }}
.rp-headline {{ background: {PAPER}; border: 1px solid #d8ded9; border-left: 6px solid {GOOD};
  border-radius: 7px; padding: 8px 11px; }}
.rp-headline.risk {{ border-left-color: {BAD}; background: #fff8f6; }}
.rp-headline.breach {{ border-left-color: {SAFETY}; }}
.rp-headline .store {{ font-weight: bold; font-size: 13.5px; }}
.rp-headline .when {{ font-size: 17px; margin: 3px 0; }}
.rp-headline .detail {{ font-size: 12px; color: {MUTED}; }}
table.rp-table {{ border-collapse: collapse; width: 100%; font-size: 12.5px; }}
table.rp-table th {{ text-align: left; color: {MUTED}; font-weight: normal; border-bottom: 1px solid #cfd7d1;
  padding: 4px 6px; vertical-align: bottom; }}
table.rp-table td {{ border-bottom: 1px solid {GRID}; padding: 4px 6px; }}
table.rp-table td.num, table.rp-table th.num {{ text-align: right; font-variant-numeric: tabular-nums; }}
table.rp-table tr.soon td {{ background: #fff6e3; }}
.rp-graph .modebar-group {{ opacity: 0; transition: opacity .25s; }}
.rp-graph:hover .modebar-group, .rp-graph:focus-within .modebar-group {{ opacity: 1; }}
.rp-subhead {{ font-size: 12px; color: {MUTED}; text-transform: uppercase; letter-spacing: .5px;
  margin: 12px 6px 2px; }}
.rp-empty {{ color: {MUTED}; font-size: 13px; padding: 10px 6px; }}
.rp-foot {{ font-size: 11.5px; color: {MUTED}; padding: 0 22px 18px; }}
@media (max-width: 900px) {{ .rp-body {{ flex-direction: column; }} .rp-side {{ position: static; width: 100%; flex: none; }} }}
"""

#: The page; ``PLOTLY_JS_URL`` is replaced by the app's local address of plotly.js, which
#: the browser then starts fetching at once instead of after the layout has arrived.
INDEX_STRING = """<!DOCTYPE html>
<html lang="en">
    <head>
        {%metas%}
        <title>{%title%}</title>
        {%favicon%}
        <link rel="preload" href="PLOTLY_JS_URL" as="script">
        {%css%}
        <style>""" + CSS + """</style>
    </head>
    <body>
        {%app_entry%}
        <footer>
            {%config%}
            {%scripts%}
            {%renderer%}
        </footer>
    </body>
</html>"""
