"""Gap report: what the store holds per species and parameter, how usable it is, and what to curate next.

Three views, all plain DataFrames:
- coverage: one row per species, stage and slot (schema.model: body mass, cardiac output, GFR,
  hematocrit, and each model compartment's volume and blood flow), counting the curated rows that
  can feed it (its routes on the stored compartments it lumps and their parts, which parameter sets
  sum when the whole has no rows) and saying how it stands (see STATES); a model compartment lumping
  several stored ones stands as its worst part. Rows a set would not count (a piece of the organ, animals
  exercising, a method not accepted: api/rows.py) cover nothing and are counted apart (n_set_aside).
- readiness: the share of a parameter set's numbers (fill="none") that are not gaps.
- most_wanted: which single slot, once curated, closes the most gaps and readies the most species;
  what a gap waits on is read from the parameter set's own dependencies.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from ..schema.model import SCALED_SHARES, Slot, default_layout, slots, sub_parts
from .layouts import Layout, LayoutError, load_layout

NOT_IN_LAYOUT = "not in its layout"  # a slot the species' own layout does not have (lungs of a fish)
NOT_IN_LAYOUT_HELP = "the species' own layout has no such compartment (a fish has gills, not lungs)"
VERIFIED_MAJORITY = 0.5  # share of a number's weight on verified rows for it to count as verified
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
    life_stage: str
    slots: list[Slot]
    coverage: pd.DataFrame  # species, life_stage, slot, label, state, level, counts, sources
    readiness: pd.DataFrame  # species, life_stage, readiness, available, total, gaps, supplied,
    #                          covered_slots (slots with any row), waits_on
    most_wanted: pd.DataFrame  # slot, species_made_ready, gaps_closed_alone, species_needing, species
    sources: pd.DataFrame  # id, citation of every source behind a covered cell
    composition: pd.DataFrame = None  # per species: tissues whose composition lets each Kp method run
    species_left_out: dict = field(default_factory=dict)  # species → why the layout asked for does not fit it

    def left_out_lines(self) -> list[str]:
        """One line per reason, naming its species."""
        by_reason: dict[str, list[str]] = {}
        for sp, why in self.species_left_out.items():
            by_reason.setdefault(why, []).append(sp)
        return [f"left out {', '.join(sps)}: {why}" for why, sps in by_reason.items()]

    @property
    def under_studied(self) -> pd.DataFrame:
        """Species and stages ranked from least to most ready."""
        ranked = self.readiness.sort_values(["readiness", "covered_slots", "species"],
                                            ascending=[True, True, True], kind="stable")
        return ranked.reset_index(drop=True).assign(rank=lambda f: f.index + 1)

    def matrix(self, what: str = "state") -> pd.DataFrame:
        """Species (and stage) × slot, one of: state, level, n_values, n_sources, mark; a slot outside a
        species' own layout (a fish's lungs) is NOT_IN_LAYOUT (state), "" (mark) or missing."""
        wide = self.coverage.pivot(index=["species", "life_stage"], columns="slot", values=what)
        wide = wide.reindex(columns=[p.id for p in self.slots])
        fill = {"state": NOT_IN_LAYOUT, "mark": ""}.get(what)
        return wide if fill is None else wide.fillna(fill)

    def to_dict(self) -> dict:
        import json

        records = lambda f: json.loads(f.to_json(orient="records"))  # noqa: E731
        return {"layout": self.layout, "life_stage": self.life_stage, "states": STATE_HELP,
                "slots": [{"id": p.id, "label": p.label, "parameter": p.parameter, "compartment": p.compartment,
                           "stored_compartments": list(p.stored), "quantities": list(p.quantities)}
                          for p in self.slots],
                "readiness": records(self.under_studied), "most_wanted": records(self.most_wanted),
                "coverage": records(self.coverage), "sources": records(self.sources),
                "composition": records(self.composition), "species_left_out": self.species_left_out}


def _rows(store, species: list[str] | None) -> pd.DataFrame:
    sql = ("SELECT species_id, life_stage_id, compartment_id, quantity_id, normalisation, source_id, row_id, "
           "verified, uncertainty, value IS NOT NULL AS has_value FROM curated_values")
    params: list = []
    if species:
        sql += f" WHERE species_id IN ({', '.join('?' for _ in species)})"
        params = list(species)
    rows = store.frame(sql, params)
    rows["has_value"] = rows["has_value"].astype(bool)
    rows["verified"] = rows["verified"].astype(bool)
    rows["has_uncertainty"] = rows["uncertainty"] != "none"
    # relative: a share of the body mass or cardiac output (vocab kind "fraction"), or a per-kg or per-m²
    # form; it needs a body mass, cardiac output or body surface to become the model's number
    shares = {r["id"] for r in store.query("SELECT id, fraction_of FROM quantities WHERE kind = 'fraction'")
              if r["fraction_of"] in SCALED_SHARES}
    rows["relative"] = rows["quantity_id"].isin(shares) | (rows["normalisation"] != "none")
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


def coverage_table(store, layout, species: list[str], life_stage: str) -> tuple[pd.DataFrame, list[Slot]]:
    parts = {}
    for row in store.query("SELECT id, part_of FROM compartments WHERE part_of IS NOT NULL ORDER BY id"):
        parts.setdefault(row["part_of"], []).append(row["id"])
    layout_slots = slots(layout, parts)
    rows = _rows(store, species)
    keys = _species_stages(rows, species, life_stage)
    # each (compartment, quantity) belongs to at most one slot: a stored compartment sits in one
    # model compartment, and volume and flow quantities do not overlap
    owner = {(c, q): p.id for p in layout_slots for c in p.stored for q in p.quantities}
    rows["slot"] = [owner.get(cq) for cq in zip(rows["compartment_id"], rows["quantity_id"])]
    rows = rows[rows["slot"].notna()]
    rows = rows.assign(set_aside=_set_aside(store, rows, keys))
    groups = {key: part for key, part in rows.groupby(["species_id", "life_stage_id", "slot"])}
    empty = rows.iloc[0:0]
    records = []
    for sp, st in keys:
        for p in layout_slots:
            both = groups.get((sp, st, p.id), empty)
            aside = both[both["set_aside"]]  # a piece, another condition, a method not accepted …: trace says
            both = both[~both["set_aside"]]
            sel, gone = both[both["has_value"]], both[~both["has_value"]]
            state, lacking = cell_state(sel), []
            named = layout.compartments.get(p.compartment, [])
            if len(named) > 1 and len(sel):  # a lumped compartment stands as its worst part
                by_part = {c: cell_state(sel[sel["compartment_id"].isin(_with_parts(c, parts, named))])
                           for c in named}
                state = min(by_part.values(), key=STATES.index)
                lacking = [c for c, s in by_part.items() if s == "absent"]
            mark = _mark(cell_state(sel), sel) + ("*" if lacking else "")
            records.append({
                "species": sp, "life_stage": st, "slot": p.id, "label": p.label, "state": state,
                "level": STATES.index(state), "mark": mark, "parts_lacking": ", ".join(lacking),
                "n_values": len(sel),
                "n_sources": sel["source_id"].nunique(), "n_verified": int(sel["verified"].sum()),
                "n_with_uncertainty": int(sel["has_uncertainty"].sum()),
                "n_absolute": int((~sel["relative"]).sum()), "n_reported_missing": len(gone),
                "n_set_aside": len(aside),
                "sources": "; ".join(sorted(set(sel["source_id"]))),
            })
    return pd.DataFrame.from_records(records), layout_slots


def _set_aside(store, rows: pd.DataFrame, keys) -> list[bool]:
    """Rows a parameter set would not count (api/rows.py: a piece of the organ, a condition other than rest,
    a method not accepted here, a reprint, a share without its source's ratio): they cover nothing."""
    from .rows import CountedRows

    out = set()
    for sp, st in keys:
        counted = CountedRows(store, sp, st)  # animals counted by another row of their source still cover
        out |= {(sp, st, *key) for key in counted.left_out.keys() - counted.counted_elsewhere}
    return [key in out for key in zip(rows["species_id"], rows["life_stage_id"], rows["source_id"], rows["row_id"])]


def _with_parts(compartment: str, parts: dict[str, list[str]], named) -> set[str]:
    return {compartment, *sub_parts(compartment, parts, exclude=set(named))}


def _species_stages(rows: pd.DataFrame, species: list[str], life_stage: str) -> list[tuple[str, str]]:
    """(species, stage) pairs: the stage asked for, for every species; with stage "all", also
    every other stage that has rows."""
    if life_stage != "all":
        return [(sp, life_stage) for sp in species]
    keys = {(sp, "adult") for sp in species}
    keys |= set(map(tuple, rows[["species_id", "life_stage_id"]].drop_duplicates().to_numpy()))
    return sorted(keys)


def readiness_table(store, layout, keys: list[tuple[str, str]]) -> tuple[pd.DataFrame, dict]:
    """Non-gap share of each parameter set (fill="none"); rest_of_body and not-applicable rows left out."""
    records, tables = [], {}
    for sp, st in keys:
        table = store.parameter_set(sp, life_stage=st, layout=layout, fill="none").table
        table = table[(table["compartment"] != "rest_of_body") & (table["origin"] != "not_applicable")]
        tables[(sp, st)] = table
        gap = table["origin"] == "gap"
        # a number counts as verified when most of its weight rests on rows read in their source
        verified = ~gap & (table["verified_share"].fillna(0) >= VERIFIED_MAJORITY)
        records.append({"species": sp, "life_stage": st, "readiness": round(float((~gap).mean()), 4),
                        "readiness_verified": round(float(verified.mean()), 4),
                        "available": int((~gap).sum()), "available_verified": int(verified.sum()),
                        "available_unverified": int((~gap & ~verified).sum()), "total": len(table),
                        "gaps": _names(table[gap]), "supplied": _names(table[~gap])})
    return pd.DataFrame.from_records(records), tables


def _names(table: pd.DataFrame) -> str:
    return "; ".join(p if c == "whole_body" else f"{c} {p}"
                     for c, p in table[["compartment", "parameter"]].itertuples(index=False))


def needed_for(table: pd.DataFrame, cover: dict[str, str]) -> dict:
    """For each gap of one parameter set, the slots whose curation it waits on.

    Read from the set itself: a gap waits on each slot it rests on (``depends_on``) that is a gap in
    the same set, and on its own slot when nothing is stored for it; when it waits on nothing else,
    its own stored data do not yet give a number, and better data for it are wanted.
    """
    origins = dict(zip(table["slot"], table["origin"]))
    needs: dict[str, set[str]] = {}
    for slot, origin, depends in table[["slot", "origin", "depends_on"]].itertuples(index=False):
        if origin != "gap":
            continue
        depends = depends.split("; ") if depends else []
        need = {d for d in depends if d != slot and origins.get(d) == "gap"}
        if slot in depends and slot in cover and (cover[slot] == "absent" or not need):
            need.add(slot)
        needs[slot] = need
    return needs


def most_wanted_table(tables: dict, coverage: pd.DataFrame, params: list[Slot]) -> tuple[pd.DataFrame, dict]:
    """Per slot: species it would make ready alone, gaps it closes alone, species that need it.
    Also returns each (species, stage)'s full list of what it waits on."""
    waits: dict[tuple[str, str], list[str]] = {}
    counts: dict[str, dict] = {p.id: {"slot": p.id, "label": p.label, "species_made_ready": 0,
                                      "gaps_closed_alone": 0, "species_needing": 0, "species": []}
                               for p in params}
    for (sp, st), table in tables.items():
        cells = coverage[(coverage["species"] == sp) & (coverage["life_stage"] == st)]
        cover = dict(zip(cells["slot"], cells["state"]))
        needs = needed_for(table, cover)
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
    frame = frame.sort_values(["species_made_ready", "gaps_closed_alone", "species_needing", "slot"],
                              ascending=[False, False, False, True], kind="stable")
    return frame[frame["species_needing"] > 0].reset_index(drop=True), waits


BY_SPECIES = "each species' own"  # the report's layout name when every species has its default layout


def gap_report(store, species=None, life_stage: str = "adult", layout=None) -> GapReport:
    """Coverage, readiness and most-wanted slots for the species asked for (default: all in the store).
    Without a layout each species is read in its own default one (fish: fish, with gills and no lungs);
    a slot outside a species' layout has no cell for it."""
    if species is None or len(species) == 0:
        species = store.ids("species")
    else:
        species = [species] if isinstance(species, str) else list(species)
        for sp in species:
            store.require("species", sp, "species")
    if life_stage != "all":
        store.require("life_stages", life_stage, "life stage")
    species_left_out: dict[str, str] = {}
    known = set(store.ids("compartments"))
    taxon = dict(store.query("SELECT id, taxon_class FROM species"))
    if layout is None:
        by_layout: dict[str, list[str]] = {}
        for sp in species:
            by_layout.setdefault(default_layout(taxon[sp]), []).append(sp)
        name = BY_SPECIES if len(by_layout) > 1 else next(iter(by_layout))
        groups = [(load_layout(lay, known), group) for lay, group in by_layout.items()]
    else:
        lay = layout if isinstance(layout, Layout) else load_layout(layout, known)
        name, groups = lay.name, _fitting(lay, species, taxon, species_left_out)
    coverages, readinesses, tables, params = [], [], {}, {}
    for lay, group in groups:
        coverage, slots_of = coverage_table(store, lay, group, life_stage)
        keys = list(dict.fromkeys(zip(coverage["species"], coverage["life_stage"])))
        readiness, of_layout = readiness_table(store, lay, keys)
        coverages.append(coverage)
        readinesses.append(readiness)
        tables.update(of_layout)
        params.update({p.id: p for p in slots_of if p.id not in params})
    order = {sp: i for i, sp in enumerate(species)}  # the species in the order asked for
    asked = lambda frame: frame.sort_values("species", key=lambda c: c.map(order), kind="stable")  # noqa: E731
    coverage = asked(pd.concat(coverages, ignore_index=True)).reset_index(drop=True)
    readiness = asked(pd.concat(readinesses, ignore_index=True)).reset_index(drop=True)
    keys = list(zip(readiness["species"], readiness["life_stage"]))
    params = list(params.values())
    covered = coverage[coverage["n_values"] > 0].groupby(["species", "life_stage"]).size()
    readiness["covered_slots"] = [int(covered.get(k, 0)) for k in keys]
    most_wanted, waits = most_wanted_table(tables, coverage, params)
    readiness["waits_on"] = [", ".join(waits.get(k, [])) for k in keys]
    ids = sorted({s for text in coverage["sources"] for s in text.split("; ") if s})
    sources = store.frame(f"SELECT id, citation, doi FROM sources WHERE id IN ({', '.join('?' for _ in ids)}) "
                          "ORDER BY id", ids) if ids else pd.DataFrame(columns=["id", "citation", "doi"])
    from .partition import composition_readiness

    composition = composition_readiness(store, list(dict.fromkeys(coverage["species"])),
                                        "adult" if life_stage == "all" else life_stage)
    return GapReport(name, life_stage, params, coverage, readiness, most_wanted, sources, composition,
                     species_left_out)


def _fitting(layout, species: list[str], taxon: dict[str, str], left_out: dict[str, str]) -> list[tuple]:
    """The species in groups that share the layout as their bodies have it (a fish's richly perfused
    tissues have no lung); a species the layout does not fit goes to ``left_out`` with the reason, and
    when none fits the layout is refused."""
    by_class: dict[str, list[str]] = {}
    for sp in species:
        by_class.setdefault(taxon[sp], []).append(sp)
    groups, refusal = [], None
    for taxon_class, group in by_class.items():
        try:
            groups.append((layout.for_animal(group[0], taxon_class), group))
        except LayoutError as exc:
            refusal = exc
            left_out.update({sp: str(exc).removeprefix(f"{group[0]}: ") for sp in group})
    if not groups:
        raise refusal
    return groups
