"""Parameter sets a modeller can trust, on the bundled store: flows within their source, masses that add up,
stage fallback on request, honest fills, verification visible, the circulation as data, one precision."""

from __future__ import annotations

import io
import json
import math

import pandas as pd
import pytest

from bodyplan.api.parameters import resolve_parameter
from bodyplan.api.trace import trace
from bodyplan.schema.model import PORTAL_ORGANS


@pytest.fixture(scope="module")
def store(real_store):
    return real_store


def test_absolute_flows_are_shares_of_their_own_source_cardiac_output(store):
    """Davies & Morris (1993) give the rhesus monkey's heart flow (60 mL/min) beside the same monkey's cardiac
    output (1086 mL/min): the share is 60/1086, not 60 over the species' pooled cardiac output (which another
    source moves). (The dog's pair of that table now gives way to read rows.)"""
    resolved = resolve_parameter(store, "rhesus_macaque", "heart", "blood_flow")
    [row] = [r for r in resolved.rows if r["source_id"] == "davies1993"]
    assert row["_value"] == pytest.approx(60 / 1086, rel=1e-12)
    assert any("own source's cardiac output" in note for note in resolved.notes)


def test_masses_add_up_to_the_body_mass_through_densities(store):
    ps = store.parameter_set("human", sex="male", body_mass="73 kg")
    masses = [ps.volumes[c].mass for c in ps.compartments]
    assert None not in masses
    assert sum(masses) == pytest.approx(73.0, rel=1e-12)
    rest = ps.volumes["rest_of_body"]
    assert rest.value == pytest.approx(rest.mass)  # the remainder at 1 kg/L, stated in its method
    assert "1 kg/L" in rest.method
    check = next(c for c in ps.checks if c["check"] == "masses_within_body_mass")
    assert check["status"] == "pass" and "73 kg" in check["detail"]
    # densities above 1 kg/L make the named volumes smaller than their masses
    liver = ps.volumes["liver"]
    assert liver.mass > liver.value


def test_stage_fallback_only_on_request_and_named(store):
    plain = store.parameter_set("cattle", life_stage="lactating", body_mass="600 kg")
    co = plain.cardiac_output
    assert co.origin == "gap" and "rows exist at other stages" in co.reason and "adult" in co.reason
    fallen = store.parameter_set("cattle", life_stage="lactating", body_mass="600 kg", stage_fallback=True)
    assert fallen.cardiac_output.origin == "fallback"
    assert fallen.cardiac_output.method.startswith("from adult rows (stage fallback)")
    assert len(fallen.gaps) < len(plain.gaps)
    adult = store.parameter_set("cattle", body_mass="600 kg")
    assert fallen.cardiac_output.value == pytest.approx(adult.cardiac_output.value)
    # without a body mass of its own stage, the body mass falls back too, and says so
    typical = store.parameter_set("cattle", life_stage="lactating", stage_fallback=True)
    assert typical.body_mass.origin == "fallback" and typical.body_mass.value > 100


def test_trace_points_to_rows_at_other_stages(store):
    """The store holds no cardiac output of adult pigs, only of younger ones: trace at adult says where, with
    as many rows as the store holds at each stage."""
    result = trace(store, "pig", "cardiac_output")
    assert result.rows.empty
    elsewhere = store.values(species="pig", quantity="cardiac_output").groupby("life_stage").size()
    assert len(elsewhere) and "adult" not in elsewhere
    listed = ", ".join(f"{n} at {stage}" for stage, n in elsewhere.items())
    assert f"rows exist at other stages ({listed})" in result.note


def test_fills_come_from_the_same_class_and_are_of_use(store):
    chicken = store.parameter_set("chicken", life_stage="juvenile", fill="allometric")
    for comp, parameter, cell in chicken.cells():
        if cell.origin == "allometric":
            assert "bird species" in cell.method, (comp, parameter)
            assert cell.high / cell.low <= 10
        if cell.origin == "gap" and "allometric fill refused" in cell.reason:
            assert "bird" in cell.reason or "prediction interval" in cell.reason or "range" in cell.reason
    for species, bw in (("cattle", "600 kg"), ("dog", "12 kg"), ("sheep", "60 kg")):
        for comp, parameter, cell in store.parameter_set(species, body_mass=bw, fill="allometric").cells():
            if cell.origin == "allometric":
                assert "mammal species" in cell.method and cell.high / cell.low <= 10, (species, comp, parameter)


def test_a_refused_fill_names_the_peers_that_do_have_the_parameter(store):
    """The reason counts the peers of the animal's own stage, not of the last fallback stage tried."""
    import re

    dog = store.parameter_set("dog", body_mass="12 kg", fill="allometric")
    mammals = [s for s in store.ids("species") if s != "dog"
               and store.query("SELECT taxon_class FROM species WHERE id = ?", (s,))[0][0] == "mammal"]
    peers = {s: store.parameter_set(s, life_stage="adult") for s in mammals}
    checked = 0
    for comp, parameter, cell in dog.cells():
        found = re.search(r"fill refused: (\d+) mammal species have it \(([^)]*)\)", cell.reason or "")
        if cell.origin != "gap" or not found or parameter not in ("volume", "blood_flow"):
            continue
        cells = {s: (p.volumes if parameter == "volume" else p.flows).get(comp) for s, p in peers.items()}
        having = sorted(s for s, c in cells.items() if c is not None and c.origin not in ("gap", "not_applicable"))
        assert int(found.group(1)) >= len(having), (comp, parameter, found.group(0), having)
        checked += 1
    assert checked, "no refused fill of too few species to check"


def test_verification_is_carried_by_every_number(store):
    ps = store.parameter_set("dog", body_mass="12 kg")
    for comp, parameter, cell in ps.cells():
        if cell.origin not in ("gap", "not_applicable", "given"):
            assert cell.verified_share is not None and 0 <= cell.verified_share <= 1, (comp, parameter)
    frame = pd.read_csv(io.StringIO(ps.to_csv()))
    assert "verified_share" in frame.columns
    data = json.loads(ps.to_json())
    assert "verified_share" in data["cardiac_output"]
    strict = store.parameter_set("dog", body_mass="12 kg", verified_only=True)
    for comp, parameter, cell in strict.cells():
        if cell.origin in ("measured", "pooled", "scaled") and comp != "rest_of_body":
            assert cell.verified_share == pytest.approx(1.0), (comp, parameter)


def test_a_number_on_read_rows_only_has_a_share_of_exactly_one(store):
    """A share is a weighted fraction; a pool of read rows must say 1, not 1 minus rounding (a reader
    comparing with 1 would count it as partly recalled)."""
    for species in ("pig", "rat", "dog", "chicken"):
        for stage in ("adult", "juvenile"):
            ps = store.parameter_set(species, life_stage=stage, stage_fallback=True, fill="allometric")
            for comp, parameter, cell in ps.cells():
                share = cell.verified_share
                assert share is None or share == 1.0 or 0 <= share < 1 - 1e-9, (species, stage, comp, parameter, share)


def test_a_body_mass_far_outside_the_studied_subjects_is_flagged(store):
    far = store.parameter_set("dog", body_mass="400 kg")
    check = next(c for c in far.checks if c["check"] == "body_mass_within_studied_range")
    assert check["status"] == "warn"
    near = store.parameter_set("dog", body_mass="12 kg")
    assert next(c for c in near.checks if c["check"] == "body_mass_within_studied_range")["status"] == "pass"
    assert near.body_mass.origin == "given"


def test_a_number_resting_only_on_animals_of_another_size_is_flagged(store):
    """A share measured in grown cattle is not a 100 kg calf's: each number carries the body masses of the
    animals behind it, and the set flags those far from its own body mass (the studied-range margin)."""
    from bodyplan.api.checks import STUDIED_RANGE_MARGIN

    calf = store.parameter_set("cattle", life_stage="juvenile", body_mass="100 kg")
    low, high = calf.volumes["liver"].animals_kg
    assert low / STUDIED_RANGE_MARGIN > 100
    flagged = next(c for c in calf.checks if c["check"] == "numbers_from_animals_of_another_size")
    assert flagged["status"] == "warn" and f"liver.volume ({low:.3g}–{high:.3g} kg)" in flagged["detail"]
    liver = next(c for c in json.loads(calf.to_json())["compartments"] if c["compartment"] == "liver")
    assert liver["volume"]["animals_kg"] == [low, high]
    grown = store.parameter_set("cattle", life_stage="juvenile", body_mass=f"{(low + high) / 2} kg")
    assert "liver.volume" not in next((c["detail"] for c in grown.checks
                                       if c["check"] == "numbers_from_animals_of_another_size"), "")


def test_one_precision_in_every_data_format(store):
    ps = store.parameter_set("rat", body_mass="0.25 kg")
    data = json.loads(ps.to_json())
    frame = pd.read_csv(io.StringIO(ps.to_csv()))
    liver = frame[(frame["compartment"] == "liver") & (frame["parameter"] == "volume")]["value"].item()
    assert next(c for c in data["compartments"] if c["compartment"] == "liver")["volume"]["value"] == liver
    assert liver == ps.volumes["liver"].value


@pytest.mark.parametrize("species, layout", [("human", "whole_body"), ("human", "rich_slow")])
def test_circulation_is_data_and_returns_the_cardiac_output(store, species, layout):
    ps = store.parameter_set(species, body_mass="73 kg", layout=layout)
    data = json.loads(ps.to_json())
    flows = {c["compartment"]: c["blood_flow"]["value"] for c in data["compartments"]}
    routes = {c["compartment"]: c for c in data["circulation"]}
    liver = next(c for c in ps.layout.compartments if "liver" in ps.layout.compartments[c])
    to_liver = [c for c, r in routes.items() if r["drains_to"] == liver]
    assert sorted(routes[liver]["receives_from"][1:]) == sorted(to_liver)
    for comp in to_liver:
        assert set(ps.layout.compartments[comp]) <= PORTAL_ORGANS
    systemic = [c for c, r in routes.items() if r["flow"] == "blood_flow"]
    venous_return = sum(flows[c] for c in systemic if routes[c]["drains_to"] == "blood") + \
        sum(flows[c] for c in to_liver)
    assert venous_return == pytest.approx(data["cardiac_output"]["value"], rel=1e-9)
    assert all(math.isfinite(flows[c]) for c in systemic)


def test_production_class_is_an_option_and_mixing_is_said(store):
    mixed = store.parameter_set("chicken", life_stage="juvenile", body_mass="2.5 kg")
    check = next(c for c in mixed.checks if c["check"] == "classes_mixed")
    assert "broiler" in check["detail"] and "layer" in check["detail"]
    broilers = store.parameter_set("chicken", life_stage="juvenile", body_mass="2.5 kg", animal_class="broiler")
    from bodyplan.api.resolve import Resolver

    def classes(animal_class):
        resolver = Resolver(store, "chicken", "juvenile", animal_class=animal_class)
        return {r["class_id"] for rows in resolver.groups.values() for r in rows}

    assert {"broiler", "layer"} <= classes(None)
    assert classes("broiler") <= {"broiler", None} and "broiler" in classes("broiler")
    assert any(cell.origin != "gap" for c, p, cell in broilers.cells())
    assert "layer" not in next(c for c in broilers.checks if c["check"] == "classes_mixed")["detail"]
    from bodyplan.api.parameters import ParameterSetError

    with pytest.raises(ParameterSetError, match="its classes: broiler, layer"):
        store.parameter_set("chicken", animal_class="pekin")


def test_partition_coefficients_travel_with_the_set(store, tmp_path):
    """Kp of every model compartment (volume-weighted over lumped parts) in the JSON and the SBML; a
    compound here is invented for tests."""
    import libsbml

    compound = {"name": "neutral_x", "log_p": 2.0, "fu_plasma": 0.5, "blood_plasma_ratio": 1.0}
    ps = store.parameter_set("rat", body_mass="0.25 kg", layout="rich_slow")
    ps.add_partition_coefficients(store, compound, borrow_from="human")
    data = json.loads(ps.to_json())
    rows = {r["compartment"]: r for r in data["partition_coefficients"]}
    assert set(rows) == set(ps.compartments)  # the layout and rest_of_body
    liver = rows["liver"]
    assert liver["kp"] > 0 and liver["kp_blood"] == pytest.approx(liver["kp"] / 1.0)
    assert "human" in str(liver["borrowed_from"])
    sbml = ps.to_sbml(allow_gaps=True)
    model = libsbml.readSBMLFromString(sbml).getModel()
    kp = model.getParameter("kp_neutral_x_liver")
    assert kp is not None and kp.getValue() == pytest.approx(liver["kp_blood"])
    # blood has no composition, and the rat has no bone volume to weight slowly_perfused's parts by
    assert rows["slowly_perfused"]["kp_blood"] is None and rows["slowly_perfused"]["status"] == "gap"
    assert math.isnan(model.getParameter("kp_neutral_x_slowly_perfused").getValue())  # marked, never defaulted
    from bodyplan.api.parameters import ParameterSetError

    with pytest.raises(ParameterSetError, match="gap|no Kp for"):  # set gaps or Kp gaps: refused either way
        ps.to_sbml()
    assert store.parameter_set("rat", body_mass="0.25 kg").partition == []  # Kp only when asked


def test_resting_cardiac_output_of_sockeye_salmon(real_store):
    """Steinhausen et al. (2008), Table 1: the same sockeye at rest (25.3 mL/min/kg, 15 °C), swimming,
    at fatigue and in recovery. The set is of fish at rest; the other rows say why they are left out."""
    ps = real_store.parameter_set("sockeye_salmon", body_mass="1 kg")
    assert ps.cardiac_output.value == pytest.approx(25.3 * 60 / 1000)
    from bodyplan.api.resolve import Resolver

    left = Resolver(real_store, "sockeye_salmon").left_out
    assert {left[("steinhausen2008", f"co_{state}")].split(":")[0] for state in ("swim", "fatigue", "recovery")} == {
        "measured in condition exercise", "measured in condition exhaustion", "measured in condition recovery"}
