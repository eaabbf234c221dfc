"""The gap report as one self-contained HTML file: heatmap (PNG as base64), ranked lists, sources per cell."""

from __future__ import annotations

import base64
from html import escape
from pathlib import Path

import pandas as pd

from ..api.gaps import NOT_IN_LAYOUT, NOT_IN_LAYOUT_HELP, STATE_HELP, GapReport

STYLE = """
body { font-family: system-ui, sans-serif; margin: 2em; max-width: 80em; color: #111; }
table { border-collapse: collapse; margin: 0.5em 0 1.5em; font-size: 0.9em; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.5em; text-align: left; vertical-align: top; }
th { background: #eee; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
img { max-width: 100%; height: auto; border: 1px solid #ddd; }
.note { color: #444; font-size: 0.9em; }
"""


def _source_links(text: str) -> str:
    return "; ".join(f'<a href="#src-{escape(s)}">{escape(s)}</a>' for s in text.split("; ") if s)


def _doi_link(doi: str) -> str:
    return f'<a href="https://doi.org/{escape(doi)}">{escape(doi)}</a>'


def _table(frame: pd.DataFrame, columns: dict[str, str], numeric=(), table_id: str = "", html=None,
           row_id=None) -> str:
    """An HTML table; ``html`` maps a column to a function giving its cell's markup from the value."""
    html = html or {}
    head = "".join(f"<th>{escape(label)}</th>" for label in columns.values())
    body = []
    for row in frame.itertuples(index=False):
        cells = []
        for col in columns:
            value = getattr(row, col)
            text = "" if value is None or (isinstance(value, float) and pd.isna(value)) else str(value)
            cls = ' class="num"' if col in numeric else ""
            cells.append(f"<td{cls}>{html[col](text) if col in html and text else escape(text)}</td>")
        ident = f' id="{escape(row_id(row))}"' if row_id else ""
        body.append(f"<tr{ident}>" + "".join(cells) + "</tr>")
    ident = f' id="{table_id}"' if table_id else ""
    return f"<table{ident}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _missing(row) -> str:
    """The shorter of the two lists: the gaps, or what is supplied."""
    if not row.available:
        return "all"
    if row.available < row.total - row.available:
        return f"all but: {row.supplied}"
    return row.gaps


def gap_report_html(report: GapReport, png: bytes | None = None, store_info: dict | None = None) -> str:
    from .heatmap import write_heatmap

    png = write_heatmap(report) if png is None else png
    image = base64.b64encode(png).decode("ascii")
    ranked = report.under_studied.assign(readiness_pct=lambda f: (f["readiness"] * 100).round(0).astype(int),
                                         verified_pct=lambda f: (f["readiness_verified"] * 100).round(0).astype(int),
                                         missing=lambda f: [_missing(r) for r in f.itertuples()])
    stage = "all stages" if report.life_stage == "all" else f"life stage {report.life_stage}"
    covered = report.coverage[report.coverage["n_values"] > 0].sort_values(["species", "life_stage",
                                                                                    "slot"])
    states = pd.DataFrame([{"state": k, "meaning": v} for k, v in STATE_HELP.items()] +
                          ([{"state": NOT_IN_LAYOUT, "meaning": NOT_IN_LAYOUT_HELP}] if (report.matrix() == NOT_IN_LAYOUT).any().any() else []))
    info = store_info or {}
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>bodyplan gap report: {escape(report.layout)} layout, {escape(stage)}</title>",
        f"<style>{STYLE}</style></head><body>",
        f"<h1>Gap report: {escape(report.layout)} layout, {escape(stage)}</h1>",
        f'<p class="note">{len(ranked)} species × stage rows, {len(report.slots)} parameters. '
        f"Store {escape(str(info.get('store', '')))}, content hash {escape(str(info.get('content_hash', ''))[:16])}."
        " Readiness is the share of the layout's parameter set (body weight, cardiac output, GFR, hematocrit, "
        "volume and blood flow per compartment; rest_of_body left out) that the store supplies without "
        "filling; verified % the share whose weight rests mostly on rows read in their source text.</p>",
        *(f'<p class="note">{escape(line.capitalize())}.</p>' for line in report.left_out_lines()),
        "<h2>Coverage</h2>",
        f'<img id="heatmap" alt="coverage heatmap: species by parameter, coloured by state" '
        f'src="data:image/png;base64,{image}">',
        _table(states, {"state": "state", "meaning": "meaning"}, table_id="states"),
        "<h2>Under-studied species (least ready first)</h2>",
        _table(ranked, {"rank": "rank", "species": "species", "life_stage": "stage",
                        "readiness_pct": "readiness %", "verified_pct": "verified %", "available": "available",
                        "available_unverified": "of them unverified", "total": "of",
                        "covered_slots": "slots with any data", "missing": "gaps",
                        "waits_on": "to curate (see Most wanted)"},
               numeric={"rank", "readiness_pct", "verified_pct", "available", "available_unverified", "total",
                        "covered_slots"},
               table_id="under-studied"),
        "<h2>Most wanted</h2>",
        '<p class="note">What each gap waits on: its own parameter when nothing is stored for it, body mass '
        "when the body weight is a gap, cardiac output for flows when it is a gap. <em>made ready</em>: species "
        "whose every gap waits on this parameter alone; <em>gaps closed alone</em>: gaps that wait on it "
        "alone; <em>species needing</em>: species with a gap that waits on it.</p>",
        _table(report.most_wanted, {"slot": "slot", "species_made_ready": "made ready",
                                    "gaps_closed_alone": "gaps closed alone",
                                    "species_needing": "species needing", "species": "species"},
               numeric={"species_made_ready", "gaps_closed_alone", "species_needing"}, table_id="most-wanted"),
        "<h2>Tissue composition for partition coefficients</h2>",
        '<p class="note">Of the whole-body layout\'s tissues, how many hold every composition input a Kp method '
        "needs, from the species' own rows (plasma, and for strong bases erythrocytes, included); "
        "<em>read share</em>: inputs read in their source; <em>to curate</em>: the inputs most methods wait on.</p>",
        _table(report.composition, {"species": "species", "tissues": "tissues", "poulin_theil": "Poulin–Theil",
                                    "rodgers_rowland_neutral": "Rodgers–Rowland (neutral, acid)",
                                    "rodgers_rowland_base": "Rodgers–Rowland (strong base)",
                                    "inputs": "inputs held", "verified_share": "read share",
                                    "to_curate": "to curate"},
               numeric={"tissues", "poulin_theil", "rodgers_rowland_neutral", "rodgers_rowland_base", "inputs",
                        "verified_share"}, table_id="composition"),
        "<h2>Sources behind each covered cell</h2>",
        _table(covered, {"species": "species", "life_stage": "stage", "slot": "slot", "state": "state",
                         "n_values": "values", "n_absolute": "absolute", "n_verified": "verified",
                         "n_with_uncertainty": "with uncertainty", "parts_lacking": "parts lacking data",
                         "sources": "sources"},
               numeric={"n_values", "n_absolute", "n_verified", "n_with_uncertainty"}, table_id="cells",
               html={"sources": _source_links}),
        "<h2>Sources</h2>",
        _table(report.sources, {"id": "id", "citation": "citation", "doi": "DOI"}, table_id="sources",
               html={"doi": _doi_link}, row_id=lambda row: f"src-{row.id}"),
        "</body></html>",
    ]
    return "\n".join(parts) + "\n"


def write_gap_report_html(report: GapReport, path: str | Path, store_info: dict | None = None) -> None:
    Path(path).write_text(gap_report_html(report, store_info=store_info), encoding="utf-8")
