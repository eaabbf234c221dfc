"""What a number means decides how it is pooled, on the real bundled rows: parts are not the whole,
the same animals count once, reprints give way to their original, methods not accepted stay out,
recalled rows give way to read ones, per-m² rows count through the body surface.

Reference masses: ICRP Publication 89 (2002), reference adult male — kidneys 310 g and stomach wall
150 g (read as reproduced in Turner, Atoms, Radiation and Radiation Protection, Table 16.1; both are rows
of the store), heart tissue 330 g and large intestine wall 370 g (from memory).
"""

from __future__ import annotations

import pytest

from bodyplan.api.parameters import resolve_parameter
from bodyplan.api.resolve import Resolver
from bodyplan.api.trace import trace


@pytest.fixture(scope="module")
def store(real_store):
    return real_store


@pytest.fixture(scope="module")
def male(store):
    return store.parameter_set("human", sex="male", body_mass="73 kg")


def organ_mass(ps, compartment: str) -> float:
    return ps.volumes[compartment].mass


@pytest.mark.parametrize("organ, grams", [("kidney", 310), ("heart", 330)])
def test_reference_man_organs_are_tissue_masses(male, organ, grams):
    """Before: heart 'with its blood' was averaged with heart tissue (+36 %), single kidneys with pairs."""
    assert organ_mass(male, organ) == pytest.approx(grams / 1000, rel=0.15)


def test_stomach_wall_is_not_averaged_with_its_contents(store):
    resolved = resolve_parameter(store, "human", "stomach", "volume", sex="male")
    assert {r["part_id"] for r in resolved.rows} == {"tissue"}
    result = trace(store, "human", "tissue_mass", "stomach", sex="male")
    left = dict(zip(result.rows["row_id"], result.rows["left_out"]))
    assert "part contents" in left["m_stomach_contents_am"] and "part with_contents" in left["a_stomach_wc_m"]
    density = Resolver(store, "human").density("stomach")[0]
    assert resolved.estimate.value * 73 * density == pytest.approx(0.150, rel=0.15)


def test_large_intestine_is_the_whole_not_its_segments(store):
    result = trace(store, "human", "tissue_mass", "large_intestine", sex="male")
    used = result.rows[result.rows["used"]]
    assert list(used["row_id"]) == ["m_li_total"]
    assert all("segment" in why for why in result.rows[~result.rows["used"]]["left_out"])
    resolved = resolve_parameter(store, "human", "large_intestine", "volume", sex="male")
    density = Resolver(store, "human").density("large_intestine")[0]
    assert resolved.estimate.value * 73 * density == pytest.approx(0.370, rel=0.15)


def test_kidney_pair_never_pools_single_sides(store):
    resolved = resolve_parameter(store, "human", "kidney", "volume", sex="male")
    assert {r["compartment_id"] for r in resolved.rows} == {"kidney"}


def test_laying_hen_stomach_adds_gizzard_and_proventriculus(store):
    resolver = Resolver(store, "chicken", "laying")
    parts = [resolver.volume_per_kg(p).estimate.value for p in ("gizzard", "proventriculus")]
    stomach = resolver.volume_per_kg("stomach")
    assert stomach.estimate.value == pytest.approx(sum(parts), rel=1e-12)
    assert stomach.estimate.method.startswith("sum of parts")


def test_juvenile_chicken_gfr_from_accepted_methods_only(store):
    """Exogenous creatinine clearance in birds is inflated by tubular handling (Gasthuys et al. 2019):
    the iohexol value of the same broilers, 3.09 mL/min/kg, stands alone."""
    result = trace(store, "chicken", "gfr", life_stage="juvenile")
    [combined] = result.combined
    assert combined["value"] == pytest.approx(3.09 * 60 / 1000, rel=1e-9)  # L/h per kg
    left = dict(zip(result.rows["row_id"], result.rows["left_out"]))
    assert "not accepted" in left["gfr_creatinine_broiler"]


def test_trout_blood_volume_leaves_out_the_albumin_space(store):
    result = trace(store, "rainbow_trout", "blood_volume", "blood")
    left = dict(zip(result.rows["row_id"], result.rows["left_out"]))
    assert "not accepted" in left["bv_albumin_space"]
    [combined] = result.combined
    assert combined["value"] < 0.06  # L/kg; with the albumin space it was 77 % higher


def test_human_gfr_from_the_measured_per_body_surface_rows(store):
    result = trace(store, "human", "gfr")
    used = result.rows[result.rows["used"]]
    assert set(used["unit"]) == {"mL/min/(1.73 m^2)"} and len(used) >= 3
    assert "recalled" in result.rows.set_index("row_id").loc["h_gfr", "left_out"]
    # soares2013 reports all adults and two splits of them (sex, age): only 'all' counts
    soares = result.rows[result.rows["source"] == "soares2013"]
    assert list(soares[soares["used"]]["row_id"]) == ["gfr_all"]
    [combined] = result.combined
    assert "body surface" in combined["method"]
    gfr = store.parameter_set("human", body_mass="73 kg").physiology["gfr"].value * 1000 / 60  # mL/min
    assert 90 < gfr < 140


def test_a_reprint_gives_way_to_its_original(store):
    resolver = Resolver(store, "human")
    reasons = {key: why for key, why in resolver.left_out.items() if key[0] == "poulin2002"}
    assert reasons and all("reprints poulin2000" in why for why in reasons.values())


HEADER = ("id,species,life_stage,age,sex,strain,class,group,compartment,quantity,part,method,condition,value,unit,uncertainty,"
          "spread,low,high,statistic,uncertainty_assumed,n,n_counts,body_mass,temperature,denominator,basis,locator,verified,"
          "missing_reason,comment\n")


@pytest.fixture(scope="module")
def two_ways(store_from_tree, tmp_path_factory):
    """Invented for tests: one source prints the same animals' numbers twice, absolute and per kg body mass,
    without their body mass; the species' typical body mass (another source) is 50 kg, theirs 60 kg."""
    root = tmp_path_factory.mktemp("two_ways")
    (root / "values").mkdir()
    note = "invented for tests"
    rows = {
        "typical2026": ["bw,sheep,adult,,female,,,all,whole_body,body_mass,,weighing,,50,kg,none,,,,mean,no,10,animals,,,,"
                        f"measured,Table 1,yes,,{note}"],
        "twoways2026": [
            f"gfr_abs,sheep,adult,,female,,,all,whole_body,gfr,,inulin_clearance,,120,mL/min,none,,,,mean,no,6,animals,,,,"
            f"measured,Table 2,yes,,{note}: 60 kg sheep; body mass not printed",
            f"gfr_kg,sheep,adult,,female,,,all,whole_body,gfr,,inulin_clearance,,2,mL/min/kg,none,,,,mean,no,6,animals,,,,"
            f"measured,Table 2,yes,,{note}: the same sheep per kg",
            f"heart_g,sheep,adult,,female,,,all,heart,tissue_mass,tissue,dissection_weighing,,300,g,none,,,,mean,no,6,"
            f"animals,,,,measured,Table 3,yes,,{note}: body mass not printed",
            f"heart_pc,sheep,adult,,female,,,all,heart,tissue_mass_fraction,tissue,dissection_weighing,,0.5,%,none,,,,mean,"
            f"no,6,animals,,,live_body,measured,Table 3,yes,,{note}: the same hearts as % of body mass"]}
    bib = ""
    for key, lines in rows.items():
        (root / "values" / f"{key}.csv").write_text(HEADER + "\n".join(lines) + "\n")
        bib += f"@misc{{{key},\n  title = {{Invented for tests {key}}},\n  year = {{2026}},\n  note = {{{note}}}\n}}\n\n"
    (root / "sources.bib").write_text(bib)
    return store_from_tree(root)


def test_the_same_animals_count_once_however_they_are_normalised(two_ways):
    """GFR printed as mL/min and as mL/min/kg of the same sheep: one row counts, the one that needs no
    borrowed body mass (per kg: 2 mL/min/kg, not 120 mL/min over the species' 50 kg = 2.4)."""
    resolved = Resolver(two_ways, "sheep").resolve("gfr")
    assert [r["row_id"] for r in resolved.rows] == ["gfr_kg"]
    assert resolved.estimate.value == pytest.approx(2 * 60 / 1000)  # L/h per kg
    left = dict(zip(*[trace(two_ways, "sheep", "gfr").rows[k] for k in ("row_id", "left_out")]))
    assert left["gfr_abs"] == "the same animals (group all) are counted by row gfr_kg of this source"


def test_a_share_of_body_mass_beats_a_mass_that_borrows_one(two_ways):
    """300 g hearts without their body mass over the species' 50 kg would say 0.6 %; the source's own
    0.5 % of the same animals' body mass is used."""
    resolved = Resolver(two_ways, "sheep").volume_per_kg("heart")
    assert [r["row_id"] for r in resolved.rows] == ["heart_pc"]
    density = Resolver(two_ways, "sheep").density("heart")[0]
    assert resolved.estimate.value * density == pytest.approx(0.005)


def test_read_sides_of_a_pair_beat_a_recalled_whole(store):
    """The dog's kidney: the store recalls a whole-pair share (a 1993 compilation, from memory) and reads the
    left and right kidneys of the same 20 kg dogs (sharif2025, 53.97 g and 50.05 g): read rows win, so
    the pair is the sum of the read sides, and the recalled whole says why it is left out."""
    resolved = Resolver(store, "dog").volume_per_kg("kidney")
    assert {r["row_id"] for r in resolved.rows} == {"kidney_l_dog", "kidney_r_dog"}
    assert resolved.verified_share == 1.0
    density = Resolver(store, "dog").density("kidney")[0]
    assert resolved.estimate.value * density == pytest.approx((53.97 + 50.05) / 1000 / 20, rel=1e-9)
    left = dict(zip(*[trace(store, "dog", "tissue_mass", "kidney").rows[k] for k in ("source", "left_out")]))
    assert "the sum of its parts, read in their sources, is used" in left["davies1993"]


def test_one_kidney_doubled_stands_for_the_pair_and_says_so(store):
    """Di Giantomasso et al. 2003 (abstract) give the left renal artery flow of conscious sheep, 214 mL/min,
    with their cardiac output: with no right kidney row, the pair is the left side doubled (kidneys
    alike: common practice, no source), and trace says so."""
    side = Resolver(store, "sheep").flow_fraction("left_kidney")
    pair = Resolver(store, "sheep").flow_fraction("kidney")
    assert pair.estimate.value == pytest.approx(2 * side.estimate.value, rel=1e-12)
    assert pair.estimate.method.startswith("one side × 2")
    assert any("one side doubled" in note for note in pair.notes)
    combined = trace(store, "sheep", "blood_flow", "kidney").combined
    assert "one side doubled" in combined[0]["method"]


def test_absolute_rows_without_any_body_mass_say_what_is_missing(store_from_tree, tmp_path):
    """Invented for tests: a pregnant stage with GFR printed in mL/min only, no body mass for its animals and
    none stored for the stage: the gap names the missing body mass, not a missing GFR."""
    (tmp_path / "values").mkdir()
    (tmp_path / "values" / "nomass2026.csv").write_text(
        HEADER + "gfr,rat,pregnant,,female,,,all,whole_body,gfr,,inulin_clearance,,2.7,mL/min,none,,,,mean,no,6,"
        "animals,,,,measured,Abstract,yes,,invented for tests: body mass not printed\n")
    (tmp_path / "sources.bib").write_text("@misc{nomass2026,\n  title = {Invented for tests nomass2026},\n"
                                          "  year = {2026},\n  note = {invented for tests}\n}\n")
    resolved = Resolver(store_from_tree(tmp_path), "rat", "pregnant").resolve("gfr")
    assert resolved.estimate is None
    assert resolved.reason == ("1 absolute gfr row(s) of rat (pregnant) lack their animals' body mass, and no body "
                               "mass is stored for this stage to stand in; curate the animals' body mass")


def test_a_hematocrit_of_an_arterial_sample_is_the_bloods(store):
    """Bushnell et al. 1998 (read in the abstract): dorsal-aortic hematocrit of adult rainbow trout, 24.5 %;
    a sample's hematocrit is the blood's, while an arterial blood volume would only be a part of the blood."""
    from bodyplan.schema.model import measured_compartment

    resolved = Resolver(store, "rainbow_trout").resolve("hematocrit")
    assert [r["compartment_id"] for r in resolved.rows] == ["arterial_blood"]
    assert resolved.estimate.value == pytest.approx(0.245)
    assert measured_compartment("hematocrit", "arterial_blood") == "blood"
    assert measured_compartment("blood_volume", "arterial_blood") == "arterial_blood"
    cover = store.gap_report(["rainbow_trout"], life_stage="adult").coverage.set_index("slot")
    assert cover.loc["hematocrit", "n_values"] == 1


def test_repeated_measures_of_one_group_are_averaged_and_counted_once(store_from_tree, tmp_path):
    """Invented for tests: six sheep whose GFR is measured on three days at rest (2, 3 and 4 mL/min/kg) and once
    anaesthetised (1 mL/min/kg), beside another source's independent group (5 mL/min/kg, n 6). The repeats
    are one estimate of the same animals (their mean, 3), not three studies and not only the first day;
    the anaesthetised row is not averaged in."""
    (tmp_path / "values").mkdir()
    note = "invented for tests"
    row = ("{id},sheep,adult,,female,,,{group},whole_body,gfr,,inulin_clearance,{condition},{value},mL/min/kg,sd,0.5,,,"
           "mean,no,6,animals,60 kg,,,measured,Table 1,yes,,{note}")
    files = {"repeats2026": [row.format(id=f"day{d}", group="all", condition="", value=v, note=note)
                             for d, v in ((1, 2), (2, 3), (3, 4))]
             + [row.format(id="anaesthetised", group="all", condition="anaesthesia", value=1, note=note)],
             "other2026": [row.format(id="gfr", group="all", condition="", value=5, note=note)]}
    bib = ""
    for key, lines in files.items():
        (tmp_path / "values" / f"{key}.csv").write_text(HEADER + "\n".join(lines) + "\n")
        bib += f"@misc{{{key},\n  title = {{Invented for tests {key}}},\n  year = {{2026}},\n  note = {{{note}}}\n}}\n\n"
    (tmp_path / "sources.bib").write_text(bib)
    store = store_from_tree(tmp_path)
    resolved = Resolver(store, "sheep").resolve("gfr")
    assert sorted(r["row_id"] for r in resolved.rows) == ["day1", "gfr"]
    assert resolved.estimate.value == pytest.approx((3 + 5) / 2 * 60 / 1000)  # L/h per kg: two groups of 6
    assert any("day1, day2, day3: the same animals measured again alike" in n for n in resolved.notes)
    used = trace(store, "sheep", "gfr").rows.set_index("row_id")
    assert used.loc[["day1", "day2", "day3", "gfr"], "used"].all() and not used.loc["anaesthetised", "used"]
