"""Parameter sets: scaling, pooling, layouts, balances, gaps, fills and exports.

Mechanics are tested on an invented tree (tests/data/params_toy, every row says
"invented for tests"); published checks run on the bundled curated store.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.api.layouts import LayoutError, load_layout
from bodyplan.api.parameters import ParameterSetError
from bodyplan.api.pooling import pool

TOY = Path(__file__).parent / "data" / "params_toy"


@pytest.fixture(scope="module")
def toy_store(store_from_tree):
    return store_from_tree(TOY)


def cell(ps, compartment, parameter):
    row = ps.table.query("compartment == @compartment and parameter == @parameter").iloc[0]
    return row


# ---- scaling ------------------------------------------------------------------------------------
def test_fraction_times_body_weight_over_density(toy_store):
    ps = toy_store.parameter_set("dog", body_mass="12 kg")
    liver = cell(ps, "liver", "volume")
    expected = 0.03 * 10 ** -0.1 * 12 / 1.05  # toy fraction at the dog's 10 kg, × 12 kg, / 1.05 kg/L
    assert liver["value"] == pytest.approx(expected, rel=2e-3)
    assert liver["origin"] == "scaled"
    assert "density 1.05 kg/L" in liver["method"]


def test_flow_fraction_times_cardiac_output(toy_store):
    ps = toy_store.parameter_set("dog")
    co = 15 * 10 ** 0.75  # toy CO at the dog's own 10 kg
    assert ps.cardiac_output.value == pytest.approx(co, rel=2e-3)
    kidney = cell(ps, "kidney", "blood_flow")
    assert kidney["value"] == pytest.approx(0.18 * co, rel=2e-3)


def test_pounds_and_pint_quantities_are_body_weights(toy_store):
    from bodyplan.units import Quantity

    a = toy_store.parameter_set("dog", body_mass="26.4555 lb")  # 12.000 kg (1 lb = 0.45359237 kg, NIST SP 811)
    b = toy_store.parameter_set("dog", body_mass=Quantity(12, "kg"))
    assert a.body_mass.value == pytest.approx(12.0, rel=1e-5)
    assert cell(a, "liver", "volume")["value"] == pytest.approx(cell(b, "liver", "volume")["value"], rel=1e-5)


def test_body_weight_must_be_a_positive_mass(toy_store):
    with pytest.raises(ParameterSetError):
        toy_store.parameter_set("dog", body_mass="12 L")
    with pytest.raises(ParameterSetError):
        toy_store.parameter_set("dog", body_mass="-3 kg")


@settings(max_examples=25, deadline=None)
@given(bw=st.floats(min_value=1.0, max_value=100.0), k=st.floats(min_value=1.1, max_value=5.0))
def test_volumes_scale_linearly_with_body_weight(toy_store, bw, k):
    a = toy_store.parameter_set("rabbit", body_mass=f"{bw} kg").table
    b = toy_store.parameter_set("rabbit", body_mass=f"{bw * k} kg").table
    vols = a["parameter"] == "volume"
    ratio = (b.loc[vols, "value"] / a.loc[vols, "value"]).dropna()
    assert np.allclose(ratio, k, rtol=1e-9)


@settings(max_examples=15, deadline=None)
@given(species=st.sampled_from(["mouse", "rat", "rabbit", "dog", "pig", "cattle", "human"]),
       bw=st.floats(min_value=0.01, max_value=800.0))
def test_rest_of_body_never_silently_negative(toy_store, species, bw):
    ps = toy_store.parameter_set(species, body_mass=f"{bw} kg")
    rest = ps.volumes["rest_of_body"]
    if rest.value is not None and rest.value < 0:
        assert any(c["check"] == "masses_within_body_mass" and c["status"] == "fail" for c in ps.checks)
    flow = ps.flows["rest_of_body"]
    if flow.value is not None and flow.value < 0:
        assert any(c["check"] == "rest_of_body_flow_not_negative" and c["status"] == "fail" for c in ps.checks)


def test_same_request_same_numbers(toy_store):
    a = toy_store.parameter_set("pig", body_mass="80 kg").to_json()
    b = toy_store.parameter_set("pig", body_mass="80 kg").to_json()
    assert a == b


# ---- layouts ------------------------------------------------------------------------------------
def test_lumping_then_summing_equals_summing_then_lumping(toy_store):
    whole = toy_store.parameter_set("cattle", layout="whole_body")
    lumped = toy_store.parameter_set("cattle", layout="rich_slow")
    rich = load_layout("rich_slow").compartments["richly_perfused"]
    slow = load_layout("rich_slow").compartments["slowly_perfused"]
    assert lumped.volumes["richly_perfused"].value == pytest.approx(sum(whole.volumes[c].value for c in rich))
    assert lumped.volumes["slowly_perfused"].value == pytest.approx(sum(whole.volumes[c].value for c in slow))
    assert lumped.flows["slowly_perfused"].value == pytest.approx(sum(whole.flows[c].value for c in slow))
    # every layout closes to the same body mass (each volume through its density) and cardiac output
    for ps in (whole, lumped):
        assert sum(v.mass for v in ps.volumes.values()) == pytest.approx(ps.body_mass.value)


def test_portal_circulation_is_explicit(toy_store):
    whole = toy_store.parameter_set("rat")
    assert whole.liver_flow.startswith("hepatic artery only")
    co = whole.cardiac_output.value
    # hepatic artery = total hepatic (25 %) − gut (15 %) − spleen (2 %)
    assert whole.flows["liver"].value == pytest.approx((0.25 - 0.15 - 0.02) * co, rel=1e-3)
    lumped = toy_store.parameter_set("rat", layout="rich_slow")
    assert lumped.liver_flow.startswith("total hepatic flow")
    assert lumped.flows["liver"].value == pytest.approx(0.25 * co, rel=1e-3)
    # gut and spleen drain into the liver, so the richly perfused flow does not count them again
    rich = 0.04 + 0.10
    assert lumped.flows["richly_perfused"].value == pytest.approx(rich * co, rel=1e-3)
    assert "portal" in json.loads(lumped.to_json())["liver_flow"]


def test_user_layout_file(toy_store, tmp_path):
    path = tmp_path / "mine.toml"
    path.write_text('name = "mine"\n[compartments]\nviscera = ["liver", "gut", "spleen"]\n'
                    'carcass = ["muscle", "bone", "skin"]\nfat = ["adipose"]\n', encoding="utf-8")
    ps = toy_store.parameter_set("pig", layout=str(path))
    whole = toy_store.parameter_set("pig")
    assert ps.volumes["viscera"].value == pytest.approx(
        sum(whole.volumes[c].value for c in ("liver", "gut", "spleen")))
    assert ps.compartments[-1] == "rest_of_body"


@pytest.mark.parametrize("text, message", [
    ('[compartments]\nx = ["liver"]\ny = ["liver"]\n', "in both"),
    ('[compartments]\nx = ["nosuchorgan"]\n', "unknown compartment"),
    ('[compartments]\nrest_of_body = ["liver"]\n', "added by bodyplan"),
    ("compartments = 3\n", "needs a [compartments] table"),
    ("[compartments\n", "not valid TOML"),
])
def test_bad_layout_files(toy_store, tmp_path, text, message):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(LayoutError, match=message.replace("[", r"\[")):
        toy_store.parameter_set("pig", layout=str(path))


# ---- pooling ------------------------------------------------------------------------------------
def test_pooling_matches_statsmodels():
    from statsmodels.stats.meta_analysis import combine_effects

    values = np.array([2.6, 2.2, 2.9, 2.4])
    sds = np.array([0.4, 0.5, 0.6, 0.3])
    ns = np.array([20, 12, 9, 30])
    ours = pool(values, sds, ns, ["a", "b", "c", "d"])
    ref = combine_effects(values, sds**2 / ns, method_re="dl")
    assert ours.method.startswith("DerSimonian–Laird")
    assert ours.value == pytest.approx(ref.mean_effect_re, rel=1e-12)
    assert ours.se == pytest.approx(ref.sd_eff_w_re, rel=1e-12)
    assert ours.tau2 == pytest.approx(ref.tau2, rel=1e-9, abs=1e-15)


def test_pooling_fallback_is_stated():
    est = pool([1.0, 3.0], [0.1, float("nan")], [5, 5], ["a", "b"])
    assert est.value == 2.0 and (est.low, est.high) == (1.0, 3.0)
    assert est.method.startswith("mean of study values")


def test_parameter_set_pools_two_studies(toy_store):
    ps = toy_store.parameter_set("human", body_mass="70 kg")
    liver = ps.volumes["liver"]
    assert set(liver.sources) >= {"toy2026"}
    assert "DerSimonian–Laird" in liver.method


# ---- gaps and fills -----------------------------------------------------------------------------
def test_sparse_species_gaps_have_reasons(toy_store):
    ps = toy_store.parameter_set("ferret")
    gaps = {(g["compartment"], g["quantity"]): g["reason"] for g in ps.gaps}
    assert ("kidney", "volume") in gaps and "no volume, mass or mass fraction of kidney" in gaps[("kidney", "volume")]
    assert ("whole_body", "cardiac_output") in gaps
    assert ps.volumes["liver"].origin == "scaled"
    assert all(reason for reason in gaps.values())


def test_allometric_fill_labels_values_with_intervals(toy_store):
    ps = toy_store.parameter_set("ferret", fill="allometric")
    kidney = ps.volumes["kidney"]
    assert kidney.origin == "allometric"
    assert kidney.low < kidney.value < kidney.high
    assert "allometric across 7 mammal species" in kidney.method
    # toy data follow volume = 0.006 · BW^0.9 / 1.05 exactly, so the fit recovers it
    assert kidney.value == pytest.approx(0.006 * 1.2**0.9 / 1.05, rel=0.02)
    assert ps.cardiac_output.origin == "allometric"
    assert ps.cardiac_output.value == pytest.approx(15 * 1.2**0.75, rel=0.02)
    assert json.loads(ps.to_json())["cardiac_output"]["origin"] == "allometric"
    assert toy_store.parameter_set("ferret").volumes["kidney"].origin == "gap"  # never without asking


# ---- exports ------------------------------------------------------------------------------------
def test_json_has_the_documented_keys(toy_store):
    d = json.loads(toy_store.parameter_set("dog", body_mass="12 kg").to_json())
    for key in ("species", "life_stage", "body_mass", "cardiac_output", "compartments", "gaps", "checks",
                "caution"):
        assert key in d
    assert d["body_mass"] == {**d["body_mass"], "value": 12.0, "unit": "kg"}
    first = d["compartments"][0]
    for part in ("volume", "blood_flow"):
        assert {"value", "unit", "sd", "origin", "sources"} <= set(first[part])
    assert "veterinarian" in d["caution"]


def test_csv_round_trip(toy_store, tmp_path):
    import pandas as pd

    ps = toy_store.parameter_set("dog")
    path = tmp_path / "dog.csv"
    ps.to_csv(path)
    back = pd.read_csv(path)
    assert list(back["compartment"]) == list(ps.table["compartment"])
    assert np.allclose(back["value"], ps.table["value"], equal_nan=True)


def test_sbml_is_consistent(toy_store):
    import libsbml

    ps = toy_store.parameter_set("ferret")  # gaps exported on request: NaN, marked
    doc = libsbml.readSBMLFromString(ps.to_sbml(allow_gaps=True))
    assert doc.getNumErrors() == 0
    doc.checkConsistency()
    errors = [doc.getError(i) for i in range(doc.getNumErrors())]
    serious = [e.getMessage() for e in errors if e.getSeverity() >= libsbml.LIBSBML_SEV_ERROR]
    assert serious == []
    model = doc.getModel()
    assert model.getCompartment("liver").getSize() == pytest.approx(ps.volumes["liver"].value)
    assert math.isnan(model.getParameter("cardiac_output").getValue())


def test_clinical_units(toy_store):
    si = toy_store.parameter_set("dog")
    clinical = toy_store.parameter_set("dog", units="clinical")
    assert cell(clinical, "liver", "volume")["unit"] == "mL"
    assert cell(clinical, "liver", "volume")["value"] == pytest.approx(cell(si, "liver", "volume")["value"] * 1000)
    assert cell(clinical, "kidney", "blood_flow")["value"] == pytest.approx(
        cell(si, "kidney", "blood_flow")["value"] * 1000 / 60)


def test_quantities_as_pint(toy_store):
    q = toy_store.parameter_set("dog").quantity("liver", "volume")
    assert q.check("[volume]")


# ---- published references, on the bundled store -------------------------------------------------
def test_adult_male_human_against_icrp89(real_store):
    """ICRP Publication 89 (2002), Table 2.8 reference adult male, 73 kg: liver 1.8 kg,
    brain 1.45 kg, kidneys 0.31 kg, heart 0.33 kg, cardiac output 6.5 L/min (Table 2.39).

    The set pools every stored source (not ICRP alone), so each organ must fall within 30 %
    of the reference: the spread between published adult series is of that order.
    """
    ps = real_store.parameter_set("human", sex="male", body_mass="73 kg")
    reference_kg = {"liver": 1.8, "brain": 1.45, "kidney": 0.31, "heart": 0.33}
    for organ, kg in reference_kg.items():
        volume = ps.volumes[organ]
        assert volume.origin != "gap", organ
        assert volume.value == pytest.approx(kg / 1.05, rel=0.30), organ  # ≈1.05 kg/L soft tissue
    assert ps.cardiac_output.value / 60 == pytest.approx(6.5, rel=0.15)


def test_rat_against_brown_1997(real_store):
    """Brown et al. 1997 Toxicol Ind Health 13:407, Table 5 (rat organ weights, % body weight):
    liver 3.66, kidneys 0.73, brain 0.57 (from memory of the table)."""
    ps = real_store.parameter_set("rat", body_mass="0.25 kg")
    for organ, percent in {"liver": 3.66, "kidney": 0.73, "brain": 0.57}.items():
        volume = ps.volumes[organ]
        assert volume.origin != "gap", organ
        assert volume.value * 1.05 / 0.25 * 100 == pytest.approx(percent, rel=0.25), organ


def test_unknown_species_is_a_clear_error(real_store):
    from bodyplan.api import UnknownIdError

    with pytest.raises(UnknownIdError, match="unknown species 'unicorn'"):
        real_store.parameter_set("unicorn")


def test_cli_params_json(real_store, tmp_path):
    from click.testing import CliRunner

    from bodyplan.cli import cli

    out = tmp_path / "dog.json"
    result = CliRunner().invoke(cli, ["params", "dog", "--body-weight", "12 kg", "--format", "json",
                                      "--out", str(out), "--store", str(real_store.path)])
    assert result.exit_code == 0, result.output
    d = json.loads(out.read_text())
    assert d["species"] == "dog" and d["body_mass"]["value"] == 12.0
    table = CliRunner().invoke(cli, ["params", "dog", "--store", str(real_store.path)])
    assert "liver" in table.output and "research modelling" in table.output
    assert math.isfinite(d["body_mass"]["value"])


def test_gfr_scales_per_kg_and_hematocrit_is_not_scaled(toy_store):
    ps = toy_store.parameter_set("dog", body_mass="12 kg")
    gfr, hct = ps.physiology["gfr"], ps.physiology["hematocrit"]
    assert gfr.value == pytest.approx(4 * 12 * 60 / 1000)  # 4 mL/min/kg × 12 kg in L/h
    assert gfr.origin == "scaled"
    assert hct.value == pytest.approx(0.45) and hct.origin == "measured" and hct.sd == pytest.approx(0.03)
    d = json.loads(toy_store.parameter_set("dog", units="clinical").to_json())
    assert d["physiology"]["gfr"]["unit"] == "mL/min"
    assert d["physiology"]["gfr"]["value"] == pytest.approx(40.0)  # 4 mL/min/kg × the dog's 10 kg
    ferret = toy_store.parameter_set("ferret")
    assert {"compartment": "blood", "quantity": "hematocrit",
            "reason": "no hematocrit stored for ferret (adult)"} in ferret.gaps


# ---- a layout fits the animal's body -------------------------------------------------------------
def test_a_layout_with_lungs_is_refused_for_a_fish_with_the_layouts_that_fit(real_store):
    """A fish has gills, not lungs (common practice, no source): a whole-body set would have to place a lung
    between venous and arterial blood, so it is refused and the message names the layouts that fit."""
    with pytest.raises(LayoutError, match=r"rainbow_trout: a fish has no lung, which the whole_body layout needs; "
                                          r"use --layout fish or rich_slow"):
        real_store.parameter_set("rainbow_trout", layout="whole_body")
    with pytest.raises(LayoutError, match=r"rat: a mammal has no gills, which the fish layout needs"):
        real_store.parameter_set("rat", layout="fish")


def test_a_lumped_compartment_is_summed_over_the_organs_the_animal_has(real_store):
    fish = real_store.parameter_set("rainbow_trout", life_stage="juvenile", layout="rich_slow")
    mammal = real_store.parameter_set("rat", layout="rich_slow")
    assert "lung" in mammal.layout.compartments["richly_perfused"]
    assert fish.layout.compartments["richly_perfused"] == [
        c for c in mammal.layout.compartments["richly_perfused"] if c != "lung"]


def test_a_gap_report_in_a_layout_no_species_asked_for_fits_is_refused(real_store):
    with pytest.raises(LayoutError, match="a fish has no lung"):
        real_store.gap_report(["rainbow_trout", "atlantic_salmon"], layout="whole_body")
    both = real_store.gap_report(["rainbow_trout", "rat"], layout="whole_body")
    assert set(both.readiness["species"]) == {"rat"} and set(both.species_left_out) == {"rainbow_trout"}
