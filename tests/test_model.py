"""The model declaration (schema/model.py) is the one place every layer reads, and the layers agree.

- the declaration agrees with the vocabularies it names (quantities' kind and fraction_of, compartments);
- no module outside it keeps its own list of routes or compartment rules;
- for every species × stage × layout of the bundled store: what the gap report says a gap waits on
  is a slot the parameter set's own numbers rest on, and the gap report, trace and the parameter set
  count the same curated rows for the same slot.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

from bodyplan.api.gaps import gap_report
from bodyplan.api.layouts import load_layout
from bodyplan.api.parameters import resolve_parameter
from bodyplan.api.trace import trace
from bodyplan.schema import model

ROOT = Path(__file__).resolve().parents[1]
LAYOUTS = ("whole_body", "rich_slow")


@pytest.fixture(scope="module")
def store(real_store):
    return real_store


@pytest.fixture(scope="module")
def reports(store):
    return {name: gap_report(store, life_stage="all", layout=name) for name in LAYOUTS}


def test_declaration_agrees_with_the_vocabularies(store):
    quantities = {r["id"]: dict(r) for r in store.query("SELECT id, kind, fraction_of FROM quantities")}
    compartments = {r["id"]: r["part_of"] for r in store.query("SELECT id, part_of FROM compartments")}
    assert model.route_quantities() <= set(quantities)
    for absolute, share in model.BODY_MASS_SHARES.items():
        assert quantities[share]["kind"] == "fraction" and quantities[share]["fraction_of"] == "body_mass"
        assert quantities[absolute]["kind"] == "absolute"
    # the flow routes: one share of cardiac output, one absolute flow
    kinds = {quantities[q]["fraction_of"] for q in model.routes("blood_flow")}
    assert kinds == {"cardiac_output", None}
    for fluid, quantity in model.FLUID_VOLUME.items():
        assert fluid in compartments and quantities[quantity]["kind"] == "absolute"
    named = model.PORTAL_ORGANS | model.PULMONARY | model.VESSELS | {model.LIVER}
    assert named <= set(compartments)
    for side in (c for c in compartments if model.is_side(c)):  # one side is part of its pair
        assert compartments[side] == side.split("_", 1)[1], side
    for p in model.PARAMETERS.values():
        assert p.computed or p.routes, p.id


# Literals of the declaration that no other module may spell out again.
# (Quantity ids that are also parameter ids or normalisations, such as blood_flow or tissue_mass, are left
# out: those words have their own meanings elsewhere.)
DECLARED = sorted(model.route_quantities() - set(model.PARAMETERS) - {"tissue_mass", "body_surface"}
                  | set(model.SHARES_OF_A_WHOLE) | model.VESSELS | {"pancreas", "small_intestine", "large_intestine"})


@pytest.mark.parametrize("path", sorted(p.relative_to(ROOT).as_posix() for folder in ("api", "src")
                                        for p in (ROOT / folder).rglob("*.py")))
def test_no_module_keeps_its_own_copy_of_the_declaration(path):
    text = (ROOT / path).read_text(encoding="utf-8")
    found = [q for q in DECLARED if re.search(rf"""["']{q}["']""", text)]
    assert found == [], f"{path} spells out {found}: read them from bodyplan.schema.model"


def test_portal_rule_is_one_rule():
    assert model.is_portal(["gut"]) and model.is_portal(["stomach", "small_intestine"])
    assert not model.is_portal(["brain", "gut"])  # a mixed compartment is not portal: its portal parts
    assert not model.is_portal([])                # count within the liver's total flow


def keys_of(report):
    return list(dict.fromkeys(zip(report.readiness["species"], report.readiness["life_stage"])))


@pytest.mark.parametrize("layout", LAYOUTS)
def test_gaps_wait_only_on_what_the_set_rests_on(store, reports, layout):
    report = reports[layout]
    ready = report.readiness.set_index(["species", "life_stage"])
    checked = 0
    for species, stage in keys_of(report):
        table = store.parameter_set(species, life_stage=stage, layout=layout).table
        table = table[(table["compartment"] != "rest_of_body") & (table["origin"] != "not_applicable")]
        gaps = table[table["origin"] == "gap"]
        rests_on = {d for text in gaps["depends_on"] for d in text.split("; ") if d}
        waits = {w for w in ready.loc[(species, stage), "waits_on"].split(", ") if w}
        assert waits <= rests_on, (species, stage, waits - rests_on)
        assert (waits == set()) == gaps.empty, (species, stage)
        checked += 1
    assert checked >= 31


def test_rich_slow_liver_flow_does_not_wait_on_the_richly_perfused_flow(store, reports):
    """rich_slow has no portal compartment: the liver takes the total hepatic flow, which does not
    depend on the lumped compartment that holds gut and spleen."""
    for species, stage in keys_of(reports["rich_slow"]):
        ps = store.parameter_set(species, life_stage=stage, layout="rich_slow")
        assert "richly_perfused.blood_flow" not in ps.flows["liver"].depends_on
        assert ps.liver_flow.startswith("total hepatic flow")


def _rows_with_values(store, species, stage, slot) -> pd.DataFrame:
    rows = store.values(species=species, life_stage=stage, quantity=list(slot.quantities),
                        compartment=list(slot.stored))
    return rows[rows["value"].notna()]


@pytest.mark.parametrize("layout", LAYOUTS)
def test_gap_report_trace_and_set_count_the_same_rows(store, reports, layout):
    report = reports[layout]
    slots = {s.id: s for s in report.slots}
    lay = load_layout(layout)
    for cell in report.coverage.itertuples(index=False):
        slot = slots[cell.slot]
        rows = _rows_with_values(store, cell.species, cell.life_stage, slot)
        assert len(rows) == cell.n_values + cell.n_set_aside, (cell.species, cell.life_stage, cell.slot)
        if not len(rows):
            continue
        shown = set(zip(rows["source"], rows["row_id"]))
        for stored in (lay.compartments.get(slot.compartment) or [slot.compartment]):
            resolved = resolve_parameter(store, cell.species, stored, slot.parameter, life_stage=cell.life_stage)
            used = {(r["source_id"], r["row_id"]) for r in resolved.rows
                    if r["quantity_id"] in slot.quantities}
            assert used <= shown, (cell.species, cell.slot, used - shown)


@pytest.mark.parametrize("species, quantity, compartment", [
    ("dog", "gfr", None), ("human", "hematocrit", None), ("rat", "tissue_mass", "liver"),
    ("dog", "cardiac_output", None), ("human", "blood_volume", "blood")])
def test_trace_combines_what_the_set_prints(store, reports, species, quantity, compartment):
    """trace shows the rows the gap report counts and the number the parameter set prints."""
    result = trace(store, species, quantity, compartment)
    parameter = model.parameter_of(quantity)
    assert result.combined, result.note
    ps = store.parameter_set(species)
    declared = model.PARAMETERS[parameter]
    [entry] = [c for c in result.combined if c["compartment"] == (declared.compartment or compartment)]
    if parameter in ("gfr", "hematocrit"):
        scale = 1.0 if declared.resolved_as.startswith("fraction") else ps.body_mass.value
        assert entry["value"] * scale == pytest.approx(ps.physiology[parameter].value, rel=1e-9)
    used = sum(result.rows["used"])
    assert used == len([r for r in entry["rows_used"] if r["quantity"] == quantity]) and used >= 1
    slot = model.slot_id(compartment or "whole_body", parameter)
    cell = reports["whole_body"].coverage.query("species == @species and life_stage == 'adult' and slot == @slot")
    assert int(cell["n_values"].iloc[0]) >= len(result.rows[result.rows["value"].notna()])
