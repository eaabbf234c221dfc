"""Stage fallback: a gap at the life stage asked for, filled from the same species at another stage,
only on request and named on the value.

Without the option a gap still says how many rows the species has at which other stages, so the
user sees what the option (or another ``--life-stage``) would bring. Rows of another stage are
taken as that stage's parameter set at the requested body mass: volumes per kg and flow shares
are scaled to it, never copied as absolute numbers.
"""

from __future__ import annotations

from dataclasses import replace

from ..schema.model import STAGE_FALLBACK, slots


def other_stage_rows(store, species: str, life_stage: str, layout) -> dict[str, dict[str, int]]:
    """slot id → {other stage: number of rows a set there would count} for one species (a piece of an organ
    or a row of animals exercising is no row to point to)."""
    from .rows import CountedRows

    parts: dict[str, list[str]] = {}
    for row in store.query("SELECT id, part_of FROM compartments WHERE part_of IS NOT NULL ORDER BY id"):
        parts.setdefault(row["part_of"], []).append(row["id"])
    stages = [r[0] for r in store.query("SELECT DISTINCT life_stage_id FROM curated_values WHERE species_id = ? "
                                        "AND life_stage_id <> ?", (species, life_stage))]
    counts = {(stage, compartment, quantity): len(rows) for stage in stages
              for (quantity, compartment), rows in CountedRows(store, species, stage).groups.items()}
    out: dict[str, dict[str, int]] = {}
    for slot in slots(layout, parts):
        for (stage, compartment, quantity), n in counts.items():
            if compartment in slot.stored and quantity in slot.quantities:
                out.setdefault(slot.id, {}).setdefault(stage, 0)
                out[slot.id][stage] += n
    return out


def stage_order(life_stage: str, stages_with_rows) -> list[str]:
    """The stages to borrow from, nearest first (schema.model STAGE_FALLBACK), then any other."""
    preferred = [s for s in STAGE_FALLBACK.get(life_stage, ()) if s in stages_with_rows]
    return preferred + sorted(s for s in stages_with_rows if s not in preferred and s != life_stage)


def point_to_other_stages(ps, counts: dict[str, dict[str, int]], tried: bool = False) -> None:
    """Say on each gap how many rows other stages hold for it, and whether the fallback already tried them."""
    for cells, key, slot in _gap_cells(ps):
        found = counts.get(slot)
        if found:
            where = ", ".join(f"{n} at {stage}" for stage, n in sorted(found.items()))
            then = (", but the stage fallback found no number in them (trace that stage to see why)" if tried else
                    ": ask for the stage fallback, or another life stage")
            cells[key] = replace(cells[key], reason=f"{cells[key].reason}; rows exist at other stages ({where})"
                                 + then)


def fall_back(store, ps, make_set) -> None:
    """Fill each gap of ``ps`` from the nearest other stage whose own set has it (``make_set(stage)``
    builds that stage's set at the same body mass and layout)."""
    counts = other_stage_rows(store, ps.species, ps.life_stage, ps.layout)
    stages = {stage for found in counts.values() for stage in found}
    for stage in stage_order(ps.life_stage, stages):
        if not any(True for _ in _gap_cells(ps)):
            break
        other = make_set(stage)
        for cells, key, slot in _gap_cells(ps):
            found = _cell_of(other, slot)
            if found is not None and found.origin not in ("gap", "not_applicable"):
                cells[key] = from_stage(found, stage)
    point_to_other_stages(ps, counts, tried=True)


def from_stage(cell, stage: str):
    """A number of another life stage's set, named as a fallback on the value."""
    return replace(cell, origin="fallback", stage=stage, method=f"from {stage} rows (stage fallback): {cell.method}")


def _cell_of(ps, slot: str):
    for cells, key, candidate in _all_cells(ps):
        if candidate == slot:
            return cells[key]
    return None


def _all_cells(ps):
    from ..schema.model import slot_id

    yield vars(ps), "cardiac_output", "cardiac_output"  # the set's own attribute
    for name in ps.physiology:
        yield ps.physiology, name, name
    for comp in ps.layout.compartments:
        yield ps.volumes, comp, slot_id(comp, "volume")
        yield ps.flows, comp, slot_id(comp, "blood_flow")


def _gap_cells(ps):
    return [(cells, key, slot) for cells, key, slot in _all_cells(ps) if cells[key].origin == "gap"]
