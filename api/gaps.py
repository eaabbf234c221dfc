"""Gap report: what the store holds per species and parameter, how usable it is, and what to curate next.

Three views, all plain DataFrames:
- coverage: one row per species, stage and parameter (the layout's compartments × volume and blood
  flow, plus body mass, cardiac output, GFR, hematocrit), counting the curated rows behind it and
  saying how it stands (see STATES); a model compartment lumping several stored ones stands as its
  worst part. Only rows on the compartments the layout names are counted; sub-compartments
  (stomach for gut) are not, although parameter sets may sum them.
- readiness: the share of a parameter set's numbers (fill="none") that are not gaps.
- most_wanted: which single parameter, once curated, closes the most gaps and readies the most species.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from ..schema.anatomy import FLUID_VOLUME, PORTAL_ORGANS

# How a coverage cell stands, from worst to best; the index is the cell's level in the heatmap.
STATES = ["absent", "fraction only", "no uncertainty", "unverified", "verified", "several sources"]
STATE_HELP = {
    "absent": "no curated value (a source may report it as missing)",
    "fraction only": "only relative forms (per body mass, % of cardiac output, per m²); no absolute value",
    "no uncertainty": "one source with an absolute value; no sd/se/range given",
    "unverified": "one source with an absolute value and uncertainty; not checked against the source text",
    "verified": "one source with an absolute value and uncertainty, checked against the source text",
    "several sources": "two or more sources, at least one with an absolute value",
}
VOLUME_QUANTITIES = ["tissue_volume", "tissue_mass", "tissue_mass_fraction"]
FLOW_QUANTITIES = ["blood_flow", "blood_flow_fraction"]
RELATIVE_QUANTITIES = {"tissue_mass_fraction", "blood_flow_fraction"}
FLUIDS = {"blood", "plasma"}


@dataclass(frozen=True)
class Parameter:
    id: str  # "liver.volume", "cardiac_output"
    label: str  # short column label for the matrix
    compartments: tuple[str, ...]  # stored compartment ids counted
    quantities: tuple[str, ...]
    model: tuple[str, str] | None  # (compartment, parameter) in a parameter set's table, if any


def layout_parameters(layout) -> list[Parameter]:
    """The coverage matrix's columns for a layout: whole-body ones, then volume and flow per compartment."""
    params = [Parameter("body_mass", "body mass", ("whole_body",), ("body_mass",), ("whole_body", "body_weight")),
              Parameter("cardiac_output", "cardiac output", ("whole_body",), ("cardiac_output",),
                        ("whole_body", "cardiac_output")),
              Parameter("gfr", "GFR", ("whole_body",), ("gfr",), None),
              Parameter("hematocrit", "hematocrit", ("blood",), ("hematocrit",), None)]
    for model, parts in layout.compartments.items():
        volume = list(VOLUME_QUANTITIES) + [FLUID_VOLUME[p] for p in parts if p in FLUID_VOLUME]
        params.append(Parameter(f"{model}.volume", f"{model} vol", tuple(parts), tuple(volume), (model, "volume")))
    for model, parts in layout.compartments.items():
        if not set(parts) <= FLUIDS:  # blood carries the cardiac output; it has no flow of its own
            params.append(Parameter(f"{model}.blood_flow", f"{model} flow", tuple(parts), tuple(FLOW_QUANTITIES),
                                    (model, "blood_flow")))
    return params


def cell_state(rows: pd.DataFrame) -> str:
    """How one species' rows for one parameter stand (rows with a value only)."""
    if not len(rows):
        return "absent"
    if rows["relative"].all():
        return "fraction only"
    # with an absolute value in hand, every row counts (a per-kg row may carry the only sd)
    if rows["source_id"].nunique() >= 2:
        return "several sources"
    if not rows["has_uncertainty"].any():
        return "no uncertainty"
    return "verified" if rows["verified"].any() else "unverified"


@dataclass
class GapReport:
    layout: str
    stage: str
    parameters: list[Parameter]
    coverage: pd.DataFrame  # species, life_stage, parameter, label, state, level, counts, sources
    readiness: pd.DataFrame  # species, life_stage, readiness, available, total, gaps, supplied,
    #                          covered_parameters (cells with any row), waits_on
    most_wanted: pd.DataFrame  # parameter, species_made_ready, gaps_closed_alone, species_needing, species
    sources: pd.DataFrame  # id, citation of every source behind a covered cell

    @property
    def under_studied(self) -> pd.DataFrame:
        """Species and stages ranked from least to most ready."""
        ranked = self.readiness.sort_values(["readiness", "covered_parameters", "species"],
                                            ascending=[True, True, True], kind="stable")
        return ranked.reset_index(drop=True).assign(rank=lambda f: f.index + 1)

    def matrix(self, what: str = "state") -> pd.DataFrame:
        """Species (and stage) × parameter, one of: state, level, n_values, n_sources, mark."""
        wide = self.coverage.pivot(index=["species", "life_stage"], columns="parameter", values=what)
        return wide[[p.id for p in self.parameters]]

    def to_dict(self) -> dict:
        import json

        records = lambda f: json.loads(f.to_json(orient="records"))  # noqa: E731
        return {"layout": self.layout, "stage": self.stage, "states": STATE_HELP,
                "parameters": [{"id": p.id, "label": p.label, "compartments": list(p.compartments),
                                "quantities": list(p.quantities)} for p in self.parameters],
                "readiness": records(self.under_studied), "most_wanted": records(self.most_wanted),
                "coverage": records(self.coverage), "sources": records(self.sources)}


def _rows(store, species: list[str] | None) -> pd.DataFrame:
    sql = ("SELECT species_id, life_stage_id, compartment_id, quantity_id, normalisation, source_id, verified, "
           "uncertainty, value IS NOT NULL AS has_value FROM curated_values")
    params: list = []
    if species:
        sql += f" WHERE species_id IN ({', '.join('?' for _ in species)})"
        params = list(species)
    rows = store.frame(sql, params)
    rows["has_value"] = rows["has_value"].astype(bool)
    rows["verified"] = rows["verified"].astype(bool)
    rows["has_uncertainty"] = rows["uncertainty"] != "none"
    # relative: needs a body mass, cardiac output or body surface to become the model's number
    rows["relative"] = rows["quantity_id"].isin(RELATIVE_QUANTITIES) | (rows["normalisation"] != "none")
    return rows


def _mark(state: str, rows: pd.DataFrame) -> str:
    """A cell's text: number of sources, then v (verified), ± (uncertainty), f (fraction only)."""
    if state == "absent":
        return ""
    text = str(rows["source_id"].nunique())
    if rows["verified"].any():
        text += "v"
    if rows["has_uncertainty"].any():
        text += "±"
    if state == "fraction only":
        text += "f"
    return text


def coverage_table(store, layout, species: list[str], stage: str) -> tuple[pd.DataFrame, list[Parameter]]:
    params = layout_parameters(layout)
    rows = _rows(store, species)
    keys = _species_stages(rows, species, stage)
    # each (compartment, quantity) belongs to at most one parameter: a stored compartment sits in one
    # model compartment, and volume and flow quantities do not overlap
    owner = {(c, q): p.id for p in params for c in p.compartments for q in p.quantities}
    rows["parameter"] = [owner.get(cq) for cq in zip(rows["compartment_id"], rows["quantity_id"])]
    rows = rows[rows["parameter"].notna()]
    groups = {key: part for key, part in rows.groupby(["species_id", "life_stage_id", "parameter"])}
    empty = rows.iloc[0:0]
    records = []
    for sp, st in keys:
        for p in params:
            both = groups.get((sp, st, p.id), empty)
            sel, gone = both[both["has_value"]], both[~both["has_value"]]
            state, lacking = cell_state(sel), []
            if len(p.compartments) > 1 and len(sel):  # a lumped compartment stands as its worst part
                by_part = {c: cell_state(sel[sel["compartment_id"] == c]) for c in p.compartments}
                state = min(by_part.values(), key=STATES.index)
                lacking = [c for c, s in by_part.items() if s == "absent"]
            mark = _mark(cell_state(sel), sel) + ("*" if lacking else "")
            records.append({
                "species": sp, "life_stage": st, "parameter": p.id, "label": p.label, "state": state,
                "level": STATES.index(state), "mark": mark, "parts_lacking": ", ".join(lacking),
                "n_values": len(sel),
                "n_sources": sel["source_id"].nunique(), "n_verified": int(sel["verified"].sum()),
                "n_with_uncertainty": int(sel["has_uncertainty"].sum()),
                "n_absolute": int((~sel["relative"]).sum()), "n_reported_missing": len(gone),
                "sources": "; ".join(sorted(set(sel["source_id"]))),
            })
    return pd.DataFrame.from_records(records), params


def _species_stages(rows: pd.DataFrame, species: list[str], stage: str) -> list[tuple[str, str]]:
    """(species, stage) pairs: the stage asked for, for every species; with stage "all", also
    every other stage that has rows."""
    if stage != "all":
        return [(sp, stage) for sp in species]
    keys = {(sp, "adult") for sp in species}
    keys |= set(map(tuple, rows[["species_id", "life_stage_id"]].drop_duplicates().to_numpy()))
    return sorted(keys)


def readiness_table(store, layout, keys: list[tuple[str, str]]) -> tuple[pd.DataFrame, dict]:
    """Non-gap share of each parameter set (fill="none"); rest_of_body and not-applicable rows left out."""
    records, tables = [], {}
    for sp, st in keys:
        table = store.parameter_set(sp, life_stage=st, layout=layout, fill="none").table
        table = table[(table["compartment"] != "rest_of_body") & (table["fill"] != "not_applicable")]
        tables[(sp, st)] = table
        gap = table["fill"] == "gap"
        records.append({"species": sp, "life_stage": st, "readiness": round(float((~gap).mean()), 4),
                        "available": int((~gap).sum()), "total": len(table),
                        "gaps": _names(table[gap]), "supplied": _names(table[~gap])})
    return pd.DataFrame.from_records(records), tables


def _names(table: pd.DataFrame) -> str:
    return "; ".join(p if c == "whole_body" else f"{c} {p}"
                     for c, p in table[["compartment", "parameter"]].itertuples(index=False))


def needed_for(table: pd.DataFrame, cover: dict[str, str], layout, params: list[Parameter]) -> dict:
    """For each gap of one parameter set, the stored parameters whose curation it waits on.

    A gap waits on its own parameter when nothing is stored for it, on body mass when the body
    weight is a gap, on cardiac output when a flow is and cardiac output is a gap, and a liver flow
    on the portal organs' flows when the layout keeps them apart (their flows come off the total).
    """
    by_model = {p.model: p.id for p in params if p.model}
    fills = {(c, q): f for c, q, f in table[["compartment", "parameter", "fill"]].itertuples(index=False)}
    bw_gap = fills.get(("whole_body", "body_weight")) == "gap"
    co_gap = fills.get(("whole_body", "cardiac_output")) == "gap"
    portal_models = [m for m, parts in layout.compartments.items() if set(parts) & PORTAL_ORGANS]
    needs: dict[tuple[str, str], set[str]] = {}
    for (comp, quantity), fill in fills.items():
        if fill != "gap":
            continue
        own = by_model.get((comp, quantity))
        need: set[str] = set()
        if own and cover.get(own, "absent") == "absent":
            need.add(own)
        if bw_gap and own != "body_mass":
            need.add("body_mass")
        if quantity == "blood_flow" and co_gap:
            need.add("cardiac_output")
        if quantity == "blood_flow" and "liver" in layout.compartments.get(comp, []):
            for model in portal_models:
                if fills.get((model, "blood_flow")) == "gap":
                    need.add(by_model[(model, "blood_flow")])
        if quantity == "blood_flow" and layout.compartments.get(comp) == ["lung"]:
            need.discard(own)  # lung flow is the cardiac output
            need.add("cardiac_output")
        if not need and own:  # data are stored but do not yet give a number: better data wanted
            need.add(own)
        needs[(comp, quantity)] = need
    return needs


def most_wanted_table(tables: dict, coverage: pd.DataFrame, layout,
                      params: list[Parameter]) -> tuple[pd.DataFrame, dict]:
    """Per parameter: species it would make ready alone, gaps it closes alone, species that need it.
    Also returns each (species, stage)'s full list of what it waits on."""
    waits: dict[tuple[str, str], list[str]] = {}
    counts: dict[str, dict] = {p.id: {"parameter": p.id, "label": p.label, "species_made_ready": 0,
                                      "gaps_closed_alone": 0, "species_needing": 0, "species": []}
                               for p in params if p.model}
    for (sp, st), table in tables.items():
        cells = coverage[(coverage["species"] == sp) & (coverage["life_stage"] == st)]
        cover = dict(zip(cells["parameter"], cells["state"]))
        needs = needed_for(table, cover, layout, params)
        union = set().union(*needs.values()) if needs else set()
        waits[(sp, st)] = [p.id for p in params if p.id in union]
        who = sp if st == "adult" else f"{sp} ({st})"
        for pid in union:
            counts[pid]["species_needing"] += 1
            counts[pid]["species"].append(who)
        for need in needs.values():
            if len(need) == 1:
                counts[next(iter(need))]["gaps_closed_alone"] += 1
        if len(union) == 1:
            counts[next(iter(union))]["species_made_ready"] += 1
    frame = pd.DataFrame.from_records(list(counts.values()))
    frame["species"] = frame["species"].map(lambda s: ", ".join(sorted(s)))
    frame = frame.sort_values(["species_made_ready", "gaps_closed_alone", "species_needing", "parameter"],
                              ascending=[False, False, False, True], kind="stable")
    return frame[frame["species_needing"] > 0].reset_index(drop=True), waits


def gap_report(store, species=None, stage: str = "adult", layout="whole_body") -> GapReport:
    """Coverage, readiness and most-wanted parameters for the species asked for (default: all in the store)."""
    from .layouts import Layout, load_layout

    lay = layout if isinstance(layout, Layout) else load_layout(layout, set(store.ids("compartments")))
    if species is None or len(species) == 0:
        species = store.ids("species")
    else:
        species = [species] if isinstance(species, str) else list(species)
        for sp in species:
            store.require("species", sp, "species")
    if stage != "all":
        store.require("life_stages", stage, "life stage")
    coverage, params = coverage_table(store, lay, species, stage)
    keys = list(dict.fromkeys(zip(coverage["species"], coverage["life_stage"])))
    readiness, tables = readiness_table(store, lay, keys)
    covered = coverage[coverage["n_values"] > 0].groupby(["species", "life_stage"]).size()
    readiness["covered_parameters"] = [int(covered.get(k, 0)) for k in keys]
    most_wanted, waits = most_wanted_table(tables, coverage, lay, params)
    readiness["waits_on"] = [", ".join(waits.get(k, [])) for k in keys]
    ids = sorted({s for text in coverage["sources"] for s in text.split("; ") if s})
    sources = store.frame(f"SELECT id, citation, doi FROM sources WHERE id IN ({', '.join('?' for _ in ids)}) "
                          "ORDER BY id", ids) if ids else pd.DataFrame(columns=["id", "citation", "doi"])
    return GapReport(lay.name, stage, params, coverage, readiness, most_wanted, sources)
