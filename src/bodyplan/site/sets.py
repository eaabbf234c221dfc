"""The one place the site reads the API: parameter sets, gap reports and curated rows, turned into the plain
dicts the modeller pages render. Field names of the API are read here only, so a rename there is one edit here.
"""

from __future__ import annotations

from functools import cached_property

OWN = "own"  # the coverage read in each species' own layout (fish: fish), as `bodyplan gaps` reads it
LAYOUTS = ("whole_body", "rich_slow", "fish")  # the bundled layouts
COVERAGE_LAYOUTS = (OWN, *LAYOUTS)  # each has its coverage pages, the species' own first
MINIMAL = "rich_slow"  # the minimal layout of air breathers: fish have no lungs for it to lump


def layouts_for(taxon_class: str) -> tuple[str, ...]:
    """The layouts a species' parameter sets are shown in: its own (fish: fish), then for air breathers the
    minimal one."""
    from ..schema.model import default_layout

    own = default_layout(taxon_class)
    return (own, MINIMAL) if own == "whole_body" else (own,)
PHYSIOLOGY_LABELS = {"gfr": "GFR", "hematocrit": "hematocrit"}
PHYSIOLOGY_ROWS = {"gfr": ("whole_body", ("gfr",)), "hematocrit": ("blood", ("hematocrit",))}


def _origin(cell: dict) -> str:
    """How a number was obtained: measured, pooled, scaled, allometric, gap or not_applicable."""
    return cell.get("origin") or cell.get("fill") or ""


def number_text(cell: dict) -> str:
    """'0.3744 [0.369–0.38]' or '4.7 ± 0.3', formatted by `bodyplan params` itself; 'gap' for a gap."""
    from ..commands.params import _value_text

    if _origin(cell) == "gap":
        return "gap"
    return _value_text(cell.get("value"), cell.get("sd"), cell.get("se"), *(cell.get("interval") or (None, None)))


def state_colours() -> dict[str, str]:
    """The gap report's colour of each coverage state, as CSS hex (the heatmap's own colours)."""
    from matplotlib.colors import to_hex

    from ..report.heatmap import state_colours as rgba

    return {state: to_hex(colour) for state, colour in rgba().items()}


def text_colour(hex_colour: str) -> str:
    from matplotlib.colors import to_rgb

    r, g, b = to_rgb(hex_colour)
    return "#000" if 0.299 * r + 0.587 * g + 0.114 * b > 0.5 else "#fff"


class SiteData:
    """Everything the modeller pages show, read once from one store."""

    def __init__(self, store):
        self.store = store

    # ---- vocabularies and rows ---------------------------------------------------------------------
    @cached_property
    def species(self) -> list[dict]:
        return [dict(r) for r in self.store.query(
            "SELECT id, scientific_name, common_name, ncbi_taxon, taxon_class FROM species ORDER BY common_name")]

    @cached_property
    def labels(self) -> dict[str, dict[str, str]]:
        return {table: {r["id"]: r["label"] for r in self.store.query(f"SELECT id, label FROM {table}")}
                for table in ("quantities", "compartments", "life_stages")}

    @cached_property
    def rows(self) -> list[dict]:
        """Every curated row with its citation (the value pages and the links to rows)."""
        return [dict(r) for r in self.store.query(
            "SELECT v.*, s.citation, s.doi FROM curated_values v JOIN sources s ON s.id = v.source_id "
            "ORDER BY v.id")]

    @cached_property
    def row_ids(self) -> dict[tuple[str, str], dict]:
        return {(r["source_id"], r["row_id"]): r for r in self.rows}

    def stages_with_rows(self, species: str) -> list[str]:
        return sorted({r["life_stage_id"] for r in self.rows if r["species_id"] == species},
                      key=lambda s: (s != "adult", s))

    @cached_property
    def content_hash(self) -> str:
        return self.store.build_info().get("content_hash", "")

    # ---- gap report --------------------------------------------------------------------------------
    def coverage(self, layout: str) -> dict:
        """The gap report's coverage, readiness and states for every species at every stage with rows."""
        return self._coverage[layout]

    @cached_property
    def _coverage(self) -> dict[str, dict]:
        from ..api.gaps import NOT_IN_LAYOUT, NOT_IN_LAYOUT_HELP, STATE_HELP, STATES, gap_report

        colours = state_colours()
        out = {}
        for layout in COVERAGE_LAYOUTS:
            report = gap_report(self.store, None, life_stage="all", layout=None if layout == OWN else layout)
            data = report.to_dict()
            cells = {(c["species"], c["life_stage"], c["slot"]): c for c in data["coverage"]}
            readiness = {(r["species"], r["life_stage"]): r for r in data["readiness"]}
            out[layout] = {
                "layout": layout, "name": report.layout,
                "parameters": [dict(p, compartments=p["stored_compartments"]) for p in data["slots"]],
                "states": [{"state": s, "help": {**STATE_HELP, NOT_IN_LAYOUT: NOT_IN_LAYOUT_HELP}[s],
                            "colour": colours[s], "text": text_colour(colours[s])}
                           for s in STATES + ([NOT_IN_LAYOUT] if layout == OWN else [])],
                "colours": colours,
                "texts": {s: text_colour(c) for s, c in colours.items()},
                "cells": cells,
                "readiness": readiness,
                "keys": list(readiness),
                "left_out": report.left_out_lines(),
            }
        return out

    # ---- parameter sets ----------------------------------------------------------------------------
    def parameter_set(self, species: str, stage: str, layout: str) -> dict:
        """A parameter set at the species' typical body mass, with the rows behind each number."""
        ps = self.store.parameter_set(species, life_stage=stage, layout=layout)
        d = ps.to_dict()
        body = d.get("body_mass") or d.get("body_weight")
        lines = [self._line("body mass", "whole_body", "body_mass", body, species, stage),
                 self._line("cardiac output", "whole_body", "cardiac_output", d["cardiac_output"], species, stage)]
        for name, cell in d.get("physiology", {}).items():
            lines.append(self._line(PHYSIOLOGY_LABELS.get(name, name), PHYSIOLOGY_ROWS.get(name, ("", ()))[0],
                                    name, cell, species, stage))
        compartments = []
        for c in d["compartments"]:
            parts = c.get("stored_compartments") or []
            compartments.append({
                "compartment": c["compartment"], "parts": parts,
                "volume": self._cell(c["volume"], self._rows_behind(species, stage, parts, "volume", c["volume"])),
                "blood_flow": self._cell(c["blood_flow"],
                                         self._rows_behind(species, stage, parts, "blood_flow", c["blood_flow"])),
            })
        command = f"bodyplan params {species} --life-stage {stage} --layout {layout}" + (" --allow-gaps" if ps.gaps else "")
        return {"species": species, "life_stage": stage, "layout": layout, "lines": lines,
                "compartments": compartments, "volume_unit": d["compartments"][0]["volume"]["unit"],
                "flow_unit": d["cardiac_output"]["unit"], "liver_flow": d.get("liver_flow", ""),
                "checks": d.get("checks", []), "gaps": d.get("gaps", []), "caution": d.get("caution", ""),
                "body_weight": number_text(body), "body_origin": _origin(body), "command": command,
                "downloads": {"json": ps.to_json() + "\n", "csv": ps.to_csv(), "sbml": ps.to_sbml(allow_gaps=True)}}

    def _line(self, label, compartment, parameter, cell, species, stage) -> dict:
        if parameter in PHYSIOLOGY_ROWS:
            rows = self._rows_of(species, stage, [compartment], PHYSIOLOGY_ROWS[parameter][1], cell)
        else:
            rows = self._rows_behind(species, stage, [compartment], parameter, cell)
        return dict(self._cell(cell, rows), label=label)

    def _cell(self, cell: dict, rows: list[dict]) -> dict:
        verified = sum(1 for r in rows if r["verified"])
        mark = "" if not rows else "✓ verified" if verified == len(rows) else \
            f"{verified} of {len(rows)} verified" if verified else "unverified"
        return {"text": number_text(cell), "unit": cell.get("unit", ""), "origin": _origin(cell),
                "sources": list(dict.fromkeys(cell.get("sources") or [])), "method": cell.get("method", ""),
                "reason": cell.get("reason", ""), "interval_kind": cell.get("interval_kind", ""),
                "rows": [r["id"] for r in rows], "verified": verified, "mark": mark}

    def _rows_behind(self, species, stage, parts, parameter, cell) -> list[dict]:
        """The curated rows the parameter set combined for this number (the trace of each stored part)."""
        from ..api.parameters import resolve_parameter

        if _origin(cell) in ("gap", "not_applicable") or parameter not in (
                "volume", "blood_flow", "cardiac_output", "body_mass"):
            return []
        found = []
        for part in parts or ["whole_body"]:
            try:
                resolved = resolve_parameter(self.store, species, part, parameter, life_stage=stage)
            except Exception:  # a part the resolver does not know: the number then shows no row links
                continue
            for r in resolved.rows:
                row = self.row_ids.get((r.get("source_id"), r.get("row_id")))
                if row is not None and row not in found:
                    found.append(row)
        return found

    def _rows_of(self, species, stage, compartments, quantities, cell) -> list[dict]:
        sources = set(cell.get("sources") or [])
        return [r for r in self.rows if r["species_id"] == species and r["life_stage_id"] == stage
                and r["compartment_id"] in compartments and r["quantity_id"] in quantities
                and r["source_id"] in sources and r["value"] is not None]
