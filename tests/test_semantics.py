"""What each number means: groups, classes, parts, methods, statistics and the checks built on them.

Every row here is invented for tests and says so; the trees are copies of tests/data/good/ with the
bundled vocabularies laid over them, so the methods, parts and classes are the real ones.
"""

from __future__ import annotations

import csv
import io
import shutil
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.api.locate import bundled_data_dir
from bodyplan.errors import BodyplanError
from bodyplan.ingest import build, check
from bodyplan.ingest.baseline import CheckFilesError, check_files
from bodyplan.ingest.plausibility import ranges_in_text
from bodyplan.schema import descriptors

GOOD = Path(__file__).parent / "data" / "good"
V = "values/testsource2020.csv"
W = "values/testsource2021.csv"
BASE = {"species": "dog", "life_stage": "adult", "sex": "male", "strain": "Beagle", "uncertainty": "none",
        "basis": "measured", "locator": "Table 9", "verified": "no", "comment": "invented for tests"}


@pytest.fixture
def tree(tmp_path) -> Path:
    root = tmp_path / "tree"
    shutil.copytree(GOOD, root)
    shutil.rmtree(root / "vocab")
    shutil.copytree(bundled_data_dir() / "vocab", root / "vocab")
    return root


def add(root: Path, file: str, **cells: str) -> int:
    """Append a row (BASE plus ``cells``) to a values file; returns its line number."""
    path = root / file
    if not path.exists():
        path.write_text(",".join(descriptors.names(descriptors.VALUES)) + "\n")
    row = dict(BASE, **cells)
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerow([row.get(c, "") for c in descriptors.names(descriptors.VALUES)])
    text = path.read_text()
    path.write_text(text + out.getvalue())
    return text.count("\n") + 1


def errors(root: Path) -> list[tuple[str, str]]:
    findings, _t, _f = check(root)
    return [(str(f), f.code) for f in findings.errors]


def warnings(root: Path, code: str) -> list[str]:
    findings, _t, _f = check(root)
    assert not findings.errors, [str(f) for f in findings.errors]
    return [str(f) for f in findings.warnings if f.code == code]


def test_bundled_vocabularies_and_defaults_validate(tree):
    assert errors(tree) == []


# --- scenario tests: each bad input gives one located error with its code ------------------------------

def test_unknown_method(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg",
               method="guesswork")
    assert errors(tree) == [(f"{V}:{line}: method: unknown method 'guesswork'; use an id from vocab/methods.csv "
                             "or add it there", "V208")]


def test_method_not_for_this_quantity(tree):
    line = add(tree, V, id="x", compartment="whole_body", quantity="gfr", value="3.5", unit="mL/min/kg",
               method="thermodilution")
    assert errors(tree) == [(f"{V}:{line}: method: method 'thermodilution' does not measure gfr; it applies to "
                             "blood_flow, cardiac_output (vocab/methods.csv); pick the method the source used for this quantity",
                             "V227")]


def test_unknown_part(tree):
    line = add(tree, V, id="x", compartment="kidney", quantity="tissue_mass", value="0.05", unit="kg",
               part="left_half")
    assert errors(tree) == [(f"{V}:{line}: part: unknown part 'left_half'; use an id from vocab/parts.csv or add it "
                             "there", "V208")]


def test_class_of_another_species(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg", **{"class": "broiler"})
    assert errors(tree) == [(f"{V}:{line}: class: unknown class 'broiler' for this species; use a class of the "
                             "row's species from vocab/classes.csv or add it there", "V208")]


def test_class_of_its_species_is_fine(tree):
    add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg", **{"class": "beagle"})
    assert errors(tree) == []


@pytest.mark.parametrize("age, message, code", [
    ("-3 week", "'-3 week' is negative; give an age of zero or more", "V231"),
    ("3 kg", "'3 kg' is not an age; write e.g. '10 year'", "V225"),
    ("3 weeks old", "cannot read '3 weeks old'; write e.g. '10 year'", "V225"),
])
def test_bad_age(tree, age, message, code):
    line = add(tree, V, id="x", age=age, compartment="liver", quantity="tissue_mass", value="0.3", unit="kg")
    assert errors(tree) == [(f"{V}:{line}: age: {message}", code)]


def test_age_is_stored_in_days(tree, tmp_path):
    add(tree, V, id="x", age="8 week", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg")
    import sqlite3

    build(tree, tmp_path / "s.sqlite")
    with sqlite3.connect(tmp_path / "s.sqlite") as conn:
        assert conn.execute("SELECT age_days FROM curated_values WHERE row_id = 'x'").fetchone() == (56.0,)


def test_denominator_only_for_body_mass_fractions(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg",
               denominator="empty_body")
    assert errors(tree) == [(f"{V}:{line}: denominator: 'empty_body' is only for fractions of body mass or "
                             "per-kg-body-mass values; clear it", "V228")]


def test_a_flow_per_mass_says_per_which_mass(tree):
    """mL/min/100 g is per organ tissue by custom, mL/min/kg often per body mass: the row must say which."""
    silent = add(tree, V, id="f1", compartment="kidney", quantity="blood_flow", value="400", unit="mL/min/(100 g)")
    add(tree, V, id="f2", compartment="kidney", quantity="blood_flow", value="400", unit="mL/min/(100 g)",
        denominator="tissue")
    add(tree, V, id="f3", compartment="portal_vein", quantity="blood_flow", value="34", unit="mL/min/kg",
        denominator="live_body")
    wrong = add(tree, V, id="c1", compartment="whole_body", quantity="cardiac_output", value="120",
                unit="mL/min/kg", denominator="tissue")
    assert errors(tree) == [
        (f"{V}:{silent}: denominator: is empty, but a blood flow per mass must say per which mass: tissue (per kg "
         "of the compartment's own tissue, e.g. mL/min/100 g) or live_body (per kg of body mass)", "V243"),
        (f"{V}:{wrong}: denominator: 'tissue' is only for a blood flow per kg of its tissue; clear it", "V228")]


def test_a_flow_per_kg_body_mass_is_a_share_of_its_own_cardiac_output(tree, tmp_path):
    """Portal flow 34.5 mL/min per kg body mass with the same animals' cardiac output 138 mL/min/kg:
    a quarter of the cardiac output, however heavy the animals were (invented for tests)."""
    from bodyplan import open_store
    from bodyplan.api.resolve import Resolver

    add(tree, V, id="bw", compartment="whole_body", quantity="body_mass", value="40", unit="kg", species="pig")
    add(tree, V, id="pv", compartment="portal_vein", quantity="blood_flow", value="34.5", unit="mL/min/kg",
        denominator="live_body", species="pig", group="pigs")
    add(tree, V, id="co", compartment="whole_body", quantity="cardiac_output", value="138", unit="mL/min/kg",
        species="pig", group="pigs")
    add(tree, V, id="kf", compartment="kidney", quantity="blood_flow", value="400", unit="mL/min/(100 g)",
        denominator="tissue", species="pig", group="pigs")
    build(tree, tmp_path / "s.sqlite")
    resolver = Resolver(open_store(tmp_path / "s.sqlite"), "pig")
    portal = resolver.flow_fraction("portal_vein")
    assert portal.estimate.value == pytest.approx(0.25) and "own source's cardiac output" in portal.notes[0]
    assert resolver.rows("blood_flow", "kidney")[0]["normalisation"] == "tissue_mass"


def test_assumed_uncertainty_needs_sd_or_se(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg",
               uncertainty_assumed="yes")
    assert [code for _m, code in errors(tree)] == ["V229"]
    assert errors(tree)[0][0].startswith(f"{V}:{line}: uncertainty_assumed: is yes, but")


def test_single_animal_with_n_above_1(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg", n="5",
               statistic="single_animal")
    assert errors(tree) == [(f"{V}:{line}: statistic: is single_animal but n is above 1; give the group's "
                             "statistic or n = 1", "V230")]


def test_unknown_statistic_and_n_counts(tree):
    line = add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg",
               statistic="average", n_counts="cages")
    assert [m for m, _c in errors(tree)] == [
        f"{V}:{line}: n_counts: 'cages' is not one of: {', '.join(descriptors.N_COUNTS)}",
        f"{V}:{line}: statistic: 'average' is not one of: {', '.join(descriptors.STATISTICS)}"]


def write_groups(root: Path, *rows: str) -> None:
    (root / "groups.csv").write_text("source,group,contains,label,note\n" + "".join(r + "\n" for r in rows))


def test_group_relation_to_a_missing_group(tree):
    add(tree, V, id="x_m", group="male", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg")
    write_groups(tree, "testsource2020,all,male femal,,")
    assert errors(tree) == [("groups.csv:2: contains: group 'femal' of testsource2020 is used by no row of "
                             "values/testsource2020.csv and declared nowhere in groups.csv; fix the id or the rows' "
                             "group", "V232")]


def test_group_relation_of_a_missing_source(tree):
    write_groups(tree, "nosuchsource,all,male female,,")
    assert errors(tree) == [("groups.csv:2: source: unknown source 'nosuchsource'; use a citation key from "
                             "sources.bib", "V233")]


def test_groups_in_a_circle(tree):
    for g in ("a", "b"):
        add(tree, V, id=f"x_{g}", group=g, compartment="liver", quantity="tissue_mass", value="0.3", unit="kg")
    write_groups(tree, "testsource2020,a,b,,", "testsource2020,b,a,,")
    found = errors(tree)
    assert {code for _m, code in found} == {"V234"}
    assert found[0][0] == ("groups.csv:2: contains: group 'a' of testsource2020 contains itself through its "
                           "subgroups; a subgroup is smaller than its group")


def test_a_group_split_two_ways_is_fine(tree):
    for g in ("male", "female", "young", "old"):
        add(tree, V, id=f"x_{g}", group=g, compartment="liver", quantity="tissue_mass", value="0.3", unit="kg")
    write_groups(tree, "testsource2020,all,male female,by sex,", "testsource2020,all,young old,by age,")
    assert errors(tree) == []


def add_bib_field(root: Path, key: str, field: str) -> None:
    bib = root / "sources.bib"
    text = bib.read_text()
    start = text.index(f"@misc{{{key},")
    end = text.index("\n}", start)
    bib.write_text(text[:end] + f",\n  {field}" + text[end:])


def test_derived_from_a_missing_source(tree):
    add_bib_field(tree, "testsource2021", "derived_from = {nosuch1999}")
    assert errors(tree) == [("sources.bib:8: derived_from: entry 'testsource2021' names 'nosuch1999', which is not "
                             "in sources.bib; add that source first or fix the key", "V235")]


def test_derived_from_itself(tree):
    add_bib_field(tree, "testsource2020", "derived_from = {testsource2020}")
    assert errors(tree) == [("sources.bib:1: derived_from: entry 'testsource2020' names itself; give the key of the "
                             "source whose numbers it reprints", "V236")]


def test_derived_from_in_a_circle(tree):
    add_bib_field(tree, "testsource2020", "derived_from = {testsource2021}")
    add_bib_field(tree, "testsource2021", "derived_from = {testsource2020}")
    assert errors(tree) == [("sources.bib:1: derived_from: derived_from runs in a circle (testsource2020 → "
                             "testsource2021 → testsource2020); one of them must be the original",
                             "V237")]


def test_one_publication_is_one_source(tree):
    """The same DOI under two keys would count the same animals twice; case and the resolver prefix do not hide it."""
    add_bib_field(tree, "testsource2020", "doi = {10.1000/ABC.1}")
    add_bib_field(tree, "testsource2021", "doi = {https://doi.org/10.1000/abc.1}")
    assert errors(tree) == [("sources.bib:9: doi: entry 'testsource2021' has the DOI of 'testsource2020' (line 1); "
                             "one publication is one source: keep one entry and move its rows into that source's "
                             "values file", "V242")]


def test_one_publication_is_one_source_by_title_and_year(tree):
    """Without a DOI, the same title (case, braces and spacing aside) in the same year is the same paper."""
    bib = tree / "sources.bib"
    bib.write_text(bib.read_text().replace(
        "title  = {Invented for tests: a second source that does not exist},\n  year   = {2021},",
        "title  = {{INVENTED} for tests:  a source that does not exist},\n  year   = {2020},"))
    assert errors(tree) == [("sources.bib:8: title: entry 'testsource2021' has the title and year of "
                             "'testsource2020' (line 1); one publication is one source: keep one entry and move its "
                             "rows into that source's values file", "V242")]


def test_one_publication_is_one_source_by_journal_volume_and_first_page(tree):
    """An entry whose title was not seen (only a table caption) is still the paper printed in that journal
    volume from that page; a page range and a bare first page name the same paper."""
    add_bib_field(tree, "testsource2020", "journal = {J. Invented Tests},\n  volume = {40},\n  pages = {795--812}")
    add_bib_field(tree, "testsource2021", "journal = {J. invented  tests},\n  volume = {40},\n  pages = {795}")
    assert errors(tree) == [("sources.bib:11: pages: entry 'testsource2021' has the journal, volume and first page "
                             "of 'testsource2020' (line 1); one publication is one source: keep one entry and move "
                             "its rows into that source's values file", "V242")]


def test_two_papers_of_one_volume_are_two_sources(tree):
    add_bib_field(tree, "testsource2020", "journal = {J. Invented Tests},\n  volume = {40},\n  pages = {795--812}")
    add_bib_field(tree, "testsource2021", "journal = {J. Invented Tests},\n  volume = {40},\n  pages = {813--820}")
    assert errors(tree) == []


def test_derived_from_reaches_the_store(tree, tmp_path):
    import sqlite3

    add_bib_field(tree, "testsource2021", "derived_from = {testsource2020}")
    build(tree, tmp_path / "s.sqlite")
    with sqlite3.connect(tmp_path / "s.sqlite") as conn:
        assert conn.execute("SELECT id, derived_from FROM sources ORDER BY id").fetchall() == [
            ("testsource2020", None), ("testsource2021", "testsource2020")]


def test_method_vocabulary_names_known_quantities(tree):
    path = tree / "vocab" / "methods.csv"
    path.write_text(path.read_text().replace("thermodilution,thermodilution,cardiac_output blood_flow,",
                                             "thermodilution,thermodilution,cardiac_outptu,"))
    found = errors(tree)
    assert [code for _m, code in found] == ["V238"]
    assert ": quantities: unknown quantity 'cardiac_outptu'" in found[0][0]


def test_new_columns_reach_the_store_with_defaults(tree, tmp_path):
    import sqlite3

    add(tree, V, id="x", compartment="liver", quantity="tissue_mass", value="0.3", unit="kg", group="control",
        method="dissection_weighing", part="with_blood", **{"class": "beagle"})
    build(tree, tmp_path / "s.sqlite")
    with sqlite3.connect(tmp_path / "s.sqlite") as conn:
        got = conn.execute("SELECT class_id, group_id, part_id, method_id, statistic, uncertainty_assumed, n_counts, "
                           "denominator FROM curated_values WHERE row_id IN ('x', 'dog_bm') ORDER BY row_id").fetchall()
        assert got == [(None, "all", "tissue", None, "mean", 0, "animals", "live_body"),
                       ("beagle", "control", "with_blood", "dissection_weighing", "mean", 0, "animals", "live_body")]
        with pytest.raises(sqlite3.IntegrityError):  # the store refuses what validation refuses
            conn.execute("UPDATE curated_values SET statistic = 'average' WHERE row_id = 'x'")


# --- plausibility: each error class caught by a warning with its code -----------------------------------

def test_organ_above_body_mass(tree):
    line = add(tree, V, id="x", compartment="muscle", quantity="tissue_mass", value="15", unit="kg", body_mass="12 kg")
    assert warnings(tree, "W305") == [
        f"{V}:{line}: value: warning: 15 kg of muscle is more than the body mass 12 kg of its animals; check the "
        "unit, the number and the body mass"]


def test_organ_above_the_sources_body_mass_row(tree):
    # the good tree's dog_bm row (12 kg, 3 year, male Beagle) is the body mass of these animals
    line = add(tree, V, id="x", age="3 year", compartment="muscle", quantity="tissue_mass", value="13", unit="kg")
    assert warnings(tree, "W305") == [
        f"{V}:{line}: value: warning: 13 kg of muscle is more than the body mass 12 kg of its animals; check the "
        "unit, the number and the body mass"]


def test_parts_above_their_whole(tree):
    whole = add(tree, V, id="k", compartment="kidney", quantity="tissue_mass", value="60", unit="g")
    add(tree, V, id="kl", compartment="left_kidney", quantity="tissue_mass", value="35", unit="g")
    add(tree, V, id="kr", compartment="right_kidney", quantity="tissue_mass", value="34", unit="g")
    assert warnings(tree, "W306") == [
        f"{V}:{whole}: value: warning: the parts left_kidney + right_kidney of these animals sum to 0.069 kg, above "
        "the whole kidney (tissue) 0.06 kg; check the compartments and parts of these rows"]


def test_contents_above_organ_with_contents(tree):
    whole = add(tree, V, id="s", compartment="stomach", quantity="tissue_mass", value="200", unit="g",
                part="with_contents")
    add(tree, V, id="sc", compartment="stomach", quantity="tissue_mass", value="150", unit="g", part="contents")
    add(tree, V, id="st", compartment="stomach", quantity="tissue_mass", value="80", unit="g")
    assert warnings(tree, "W306") == [
        f"{V}:{whole}: value: warning: the parts stomach (contents) + stomach of these animals sum to 0.23 kg, above "
        "the whole stomach (with_contents) 0.2 kg; check the compartments and parts of these rows"]


def test_parts_of_other_animals_are_not_summed(tree):
    add(tree, V, id="k", group="a", compartment="kidney", quantity="tissue_mass", value="60", unit="g")
    add(tree, V, id="kl", group="b", compartment="left_kidney", quantity="tissue_mass", value="35", unit="g")
    add(tree, V, id="kr", group="b", compartment="right_kidney", quantity="tissue_mass", value="34", unit="g")
    assert warnings(tree, "W306") == []


def test_method_not_accepted_for_birds(tree):
    line = add(tree, V, id="x", species="chicken", strain="", compartment="whole_body", quantity="gfr",
               value="8.4", unit="mL/min/kg", method="exogenous_creatinine_clearance")
    add(tree, V, id="y", compartment="whole_body", quantity="gfr", value="3.5", unit="mL/min/kg",
        method="exogenous_creatinine_clearance")  # a dog: accepted
    found = warnings(tree, "W307")
    assert len(found) == 1 and found[0].startswith(
        f"{V}:{line}: method: warning: exogenous_creatinine_clearance is not accepted for gfr of chicken (birds:")
    assert "(Gasthuys et al. 2019)" in found[0]


def test_method_refused_for_one_quantity_only(tree):
    bv = add(tree, V, id="bv", species="rainbow_trout", strain="", compartment="blood", quantity="blood_volume",
             value="45", unit="mL/kg", method="dye_dilution")
    add(tree, V, id="co", species="rainbow_trout", strain="", compartment="whole_body", quantity="cardiac_output",
        value="1.1", unit="L/h/kg", method="dye_dilution")
    found = warnings(tree, "W307")
    assert [f.split(": warning")[0] for f in found] == [f"{V}:{bv}: method"]


def test_same_group_counted_twice(tree):
    first = add(tree, V, id="a", compartment="spleen", quantity="tissue_mass", value="30", unit="g")
    second = add(tree, V, id="b", compartment="spleen", quantity="tissue_mass", value="32", unit="g")
    add(tree, V, id="c", group="other", compartment="spleen", quantity="tissue_mass", value="31", unit="g")
    assert warnings(tree, "W308") == [
        f"{V}:{second}: group: warning: group 'all' already has tissue_mass of spleen by the same method at line "
        f"{first} (row a); sets average them as repeated measures of the same animals: if they are other animals, "
        "give each set its own group (e.g. one per diet or age); if they are repeats, accept this in "
        "check_baseline.csv"]


def test_two_forms_of_one_measurement_are_not_a_duplicate(tree):
    # the good tree gives human cardiac output per m² and per kg for the same group: one number, two forms
    assert warnings(tree, "W308") == []


def test_group_and_its_subgroup_overlap(tree):
    whole = add(tree, V, id="a", compartment="spleen", quantity="tissue_mass", value="30", unit="g")
    sub = add(tree, V, id="m", group="male", compartment="spleen", quantity="tissue_mass", value="32", unit="g")
    add(tree, V, id="f", group="female", compartment="heart", quantity="tissue_mass", value="80", unit="g")
    write_groups(tree, "testsource2020,all,male female,,")
    assert warnings(tree, "W309") == [
        f"{V}:{sub}: group: warning: group 'male' lies within group 'all' (groups.csv), which also gives tissue_mass "
        f"of spleen at line {whole}; pooling uses one of them; accept this warning in check_baseline.csv once reviewed"]


def test_range_end_stored_as_value(tree):
    line = add(tree, V, id="x", compartment="spleen", quantity="tissue_mass", value="40", unit="g",
               uncertainty="range", low="25", high="40")
    assert warnings(tree, "W310") == [
        f"{V}:{line}: value: warning: 40 equals the range's high end; a range end is not a central value: give the "
        "source's mean or median, or the midpoint with statistic reference_midpoint"]


def test_range_end_quoted_in_the_comment(tree):
    line = add(tree, V, id="x", compartment="spleen", quantity="tissue_mass", value="25", unit="g",
               comment="invented for tests; spleen mass from 25 to 40 g")
    assert warnings(tree, "W310") == [
        f"{V}:{line}: value: warning: 25 is an end of the range 25 to 40 the comment quotes; a range goes in low and "
        "high (uncertainty range), the value is the central value or the midpoint with statistic reference_midpoint"]


def test_midpoint_off_the_middle(tree):
    line = add(tree, V, id="x", compartment="spleen", quantity="tissue_mass", value="30", unit="g",
               uncertainty="range", low="25", high="45", statistic="reference_midpoint")
    add(tree, V, id="y", compartment="heart", quantity="tissue_mass", value="35", unit="g",
        uncertainty="range", low="25", high="45", statistic="reference_midpoint")
    assert warnings(tree, "W311") == [
        f"{V}:{line}: value: warning: 30 is marked reference_midpoint but the middle of 25..45 is 35; give the "
        "midpoint, or the statistic the source prints"]


def test_fraction_of_empty_body_needs_the_ratio(tree):
    line = add(tree, W, id="x", compartment="liver", quantity="tissue_mass_fraction", value="1.4", unit="%",
               denominator="empty_body")
    assert warnings(tree, "W312") == [
        f"{W}:{line}: denominator: warning: a fraction of empty body mass, but this source gives no "
        "empty_body_mass_fraction of dog; add the source's ratio (whole_body, empty_body_mass_fraction) so the row "
        "can be converted to live body mass"]
    add(tree, W, id="ebm", compartment="whole_body", quantity="empty_body_mass_fraction", value="0.92", unit="1")
    assert warnings(tree, "W312") == []


# --- checking named files, and the baseline of accepted warnings -------------------------------------------

def test_check_files_reports_only_the_named_file(tree):
    add(tree, V, id="x", compartment="muscle", quantity="tissue_mass", value="15", unit="kg", body_mass="12 kg")
    add(tree, W, id="y", compartment="muscle", quantity="tissue_mass", value="90", unit="kg", body_mass="70 kg")
    result = check_files([tree / W])
    assert {f.file for f in result.warnings} == {W} and result.accepted == []
    assert [f.code for f in result.warnings if f.code == "W305"] == ["W305"]
    assert result.rows == 4 and result.root == tree.resolve()


def test_baseline_sets_reviewed_warnings_apart(tree):
    a = add(tree, V, id="a", compartment="spleen", quantity="tissue_mass", value="30", unit="g")
    b = add(tree, V, id="b", compartment="spleen", quantity="tissue_mass", value="32", unit="g")
    c = add(tree, V, id="c", compartment="spleen", quantity="tissue_mass", value="33", unit="g")
    assert [f.line for f in check_files([tree / V]).warnings if f.code == "W308"] == [b, c]
    (tree / "check_baseline.csv").write_text("file,row_id,code,note\n"
                                             f"{V},b,W308,invented for tests: reviewed\n")
    result = check_files([tree / V])
    assert [f.line for f in result.warnings if f.code == "W308"] == [c]
    assert [(f.line, f.code) for f in result.accepted] == [(b, "W308")]
    assert a < b and result.stale == []
    (tree / "check_baseline.csv").write_text("file,row_id,code,note\n"
                                             f"{V},a,W308,invented for tests: no longer warned\n")
    assert check_files([tree / V]).stale == [(V, "a", "W308")]


def test_a_malformed_baseline_is_one_clean_error_with_every_bad_line(tree):
    """A merge left half done, or a note with an unquoted comma: each bad line named, nothing crashes."""
    from bodyplan.cli import main

    (tree / "check_baseline.csv").write_text("file,row_id,code,note\n"
                                             f"{V},b,W308,invented for tests: fine\n"
                                             "<<<<<<< HEAD\n"
                                             f"{V},c,W308,invented, with, commas\n")
    with pytest.raises(BodyplanError) as exc:
        check_files([tree / V])
    assert str(exc.value).splitlines() == [
        f"check_baseline.csv:{n}: expected file,row_id,code,note (a note with a comma is quoted); fix the line or "
        "delete it" for n in (3, 4)]
    with pytest.raises(SystemExit) as exit_:
        main(["check", str(tree)])
    assert exit_.value.code == 1


def test_check_files_refuses_files_of_two_trees(tree, tmp_path):
    other = tmp_path / "other"
    shutil.copytree(tree, other)
    with pytest.raises(CheckFilesError, match="2 curated trees"):
        check_files([tree / V, other / V])
    with pytest.raises(CheckFilesError, match="no such file"):
        check_files([tree / "values" / "nosuch.csv"])


# --- parsers: property tests -------------------------------------------------------------------------------

numbers = st.decimals(min_value=0, max_value=10000, places=2, allow_nan=False).map(lambda d: f"{d.normalize():f}")


@settings(max_examples=200, deadline=None)
@given(low=numbers, high=numbers, form=st.sampled_from(["from {} to {}", "{} to {}", "{}–{}", "{} – {}"]),
       before=st.sampled_from(["", "range ", "the values ran "]), after=st.sampled_from(["", " g", " mL/kg; n = 8"]))
def test_a_quoted_range_is_read_back(low, high, form, before, after):
    text = before + form.format(low, high) + after
    assert (float(low), float(high)) in ranges_in_text(text)


@settings(max_examples=200, deadline=None)
@given(text=st.text(alphabet=st.characters(blacklist_characters="0123456789"), max_size=60))
def test_text_without_digits_has_no_range(text):
    assert ranges_in_text(text) == []


@settings(max_examples=60, deadline=None)
@given(amount=st.floats(min_value=0, max_value=100, allow_nan=False, allow_infinity=False),
       unit=st.sampled_from(["day", "week", "month", "year", "h"]))
def test_any_age_with_a_time_unit_is_stored_in_days(tmp_path_factory, amount, unit):
    from bodyplan.units import ureg

    root = tmp_path_factory.mktemp("age") / "tree"
    shutil.copytree(GOOD, root)
    add(root, V, id="x", age=f"{amount:g} {unit}", compartment="liver", quantity="tissue_mass", value="0.3",
        unit="kg")
    findings, _t, frame = check(root, plausibility=False)
    assert not findings.errors, [str(f) for f in findings.errors]
    days = frame.loc[frame["id"] == "x", "_age_days"].iloc[0]
    assert days == pytest.approx(float(ureg.Quantity(float(f"{amount:g}"), unit).to("day").magnitude))


def test_lint_keeps_groups_and_baseline_canonical(tree):
    from bodyplan.ingest.lint import lint_tree

    write_groups(tree, "testsource2021,all,male female , by sex,", "testsource2020,all,male female,,")
    (tree / "check_baseline.csv").write_text("file,row_id,code,note\nvalues/b.csv, x ,duplicate-group,\n"
                                             "values/a.csv,y,duplicate-group,\n")
    report = lint_tree(tree)
    assert {"groups.csv", "check_baseline.csv"} <= set(report.changed)
    assert (tree / "groups.csv").read_text() == ("source,group,contains,label,note\n"
                                                 "testsource2020,all,male female,,\n"
                                                 "testsource2021,all,male female,by sex,\n")
    assert (tree / "check_baseline.csv").read_text() == ("file,row_id,code,note\n"
                                                         "values/a.csv,y,duplicate-group,\n"
                                                         "values/b.csv,x,duplicate-group,\n")


# --- condition and temperature ---------------------------------------------------------------------------

def test_unknown_condition(tree):
    line = add(tree, V, id="x", compartment="whole_body", quantity="cardiac_output", value="2", unit="L/min",
               condition="running")
    assert errors(tree) == [(f"{V}:{line}: condition: unknown condition 'running'; use an id from "
                             "vocab/conditions.csv or add it there", "V208")]


def test_one_group_under_several_conditions_is_not_a_duplicate(tree):
    """The same dogs at rest and running: two conditions, not the same measurement twice (no W308)."""
    add(tree, V, id="rest", compartment="whole_body", quantity="cardiac_output", value="2", unit="L/min", group="g")
    add(tree, V, id="run", compartment="whole_body", quantity="cardiac_output", value="6", unit="L/min", group="g",
        condition="exercise")
    assert warnings(tree, "W308") == []


def test_sets_use_animals_at_rest(tree, tmp_path):
    """Of one group's cardiac output at rest and while running, the set takes the resting row and trace
    says why the other is left out (invented for tests)."""
    from bodyplan import open_store
    from bodyplan.api.resolve import Resolver

    add(tree, V, id="run", compartment="whole_body", quantity="cardiac_output", value="6", unit="L/min", group="g",
        condition="exercise")
    add(tree, V, id="rest", compartment="whole_body", quantity="cardiac_output", value="2", unit="L/min", group="g")
    build(tree, tmp_path / "s.sqlite")
    resolver = Resolver(open_store(tmp_path / "s.sqlite"), "dog")
    assert "rest" in [r["row_id"] for r in resolver.rows("cardiac_output", "whole_body")]
    assert "run" not in [r["row_id"] for r in resolver.rows("cardiac_output", "whole_body")]
    assert resolver.left_out[("testsource2020", "run")] == ("measured in condition exercise: sets describe "
                                                            "animals at rest (vocab/conditions.csv)")


@pytest.mark.parametrize("text, message", [
    ("15 kg", "'15 kg' is not a temperature; write e.g. '15 degC' (units: degC, degF, K)"),
    ("-300 degC", "'-300 degC' is below absolute zero; check the number and its unit"),
])
def test_bad_temperature(tree, text, message):
    line = add(tree, V, id="x", species="rainbow_trout", compartment="whole_body", quantity="body_mass",
               value="300", unit="g", temperature=text)
    assert errors(tree) == [(f"{V}:{line}: temperature: {message}", "V225")]


def test_temperature_of_a_mammal(tree):
    line = add(tree, V, id="x", compartment="whole_body", quantity="body_mass", value="12", unit="kg",
               temperature="20 degC")
    assert errors(tree) == [(f"{V}:{line}: temperature: '20 degC' is given for a mammal or bird, whose body keeps "
                             "its own temperature; clear it (heat or cold stress goes in condition)", "V244")]


def test_a_set_at_a_temperature_uses_rows_measured_near_it(tree, tmp_path):
    """Trout body mass at 4, 12 and 13 °C and one row without a temperature (invented for tests): a set at
    12 °C pools the 12 and 13 °C rows and the silent one, leaves the 4 °C row out and says so."""
    from bodyplan import open_store

    for i, (grams, temp) in enumerate([(100, "4 degC"), (300, "12 degC"), (500, "13 degC"), (400, "")]):
        add(tree, V, id=f"bm{i}", species="rainbow_trout", group=f"g{i}", compartment="whole_body",
            quantity="body_mass", value=str(grams), unit="g", n="10", temperature=temp)
    build(tree, tmp_path / "s.sqlite")
    store = open_store(tmp_path / "s.sqlite")
    warm = store.parameter_set("rainbow_trout", temperature="53.6 degF")  # 12 °C
    assert warm.temperature == pytest.approx(12) and warm.body_mass.value == pytest.approx(0.4)
    check = next(c for c in warm.checks if c["check"] == "temperature")
    assert check["detail"] == ("rows measured at 12–13 °C for a set at 12 °C; 1 row(s) measured more than 3 °C "
                               "away left out; 1 row(s) state no temperature")
    everything = store.parameter_set("rainbow_trout")
    assert everything.body_mass.value == pytest.approx(0.325)
    assert "ask for one temperature" in next(c for c in everything.checks if c["check"] == "temperature")["detail"]
    with pytest.raises(BodyplanError, match="keeps its own body temperature"):
        store.parameter_set("dog", temperature=20)


def test_a_population_at_a_temperature_draws_from_rows_measured_near_it(tree, tmp_path):
    """Trout cardiac output of one group at 4 °C and another at 12 °C (invented for tests): a population at
    12 °C centres its cardiac output on the 12 °C row, and its sidecar says at which temperature."""
    import json

    from bodyplan import open_store

    add(tree, V, id="bm", species="rainbow_trout", group="g", compartment="whole_body", quantity="body_mass",
        value="500", unit="g", n="10")
    for i, (flow, temp) in enumerate([(10, "4 degC"), (30, "12 degC")]):
        add(tree, V, id=f"co{i}", species="rainbow_trout", group=f"c{i}", compartment="whole_body",
            quantity="cardiac_output", value=str(flow), unit="mL/min/kg", n="8", temperature=temp,
            denominator="live_body")
    build(tree, tmp_path / "s.sqlite")
    store = open_store(tmp_path / "s.sqlite")
    out = tmp_path / "trout.csv"
    pop = store.population("rainbow_trout", 20, 1, temperature="12 degC", out=str(out), workers=1)
    co = next(v for v in pop.spec.variables if v.column == "cardiac_output")
    assert co.mean == pytest.approx(30 * 60 / 1000 * 0.5)  # L/h at 0.5 kg
    assert json.loads(out.with_name("trout.csv.json").read_text())["temperature_c"] == pytest.approx(12)
    with pytest.raises(BodyplanError, match="keeps its own body temperature"):
        store.population("dog", 5, 1, temperature="12 degC")


def test_anaesthetised_rows_give_way_to_conscious_ones(tree, tmp_path):
    """Cardiac output of anaesthetised dogs counts only where no conscious dogs' value exists; their heart
    mass, which no conscious dog's row gives, counts (invented for tests)."""
    from bodyplan import open_store
    from bodyplan.api.resolve import Resolver

    add(tree, V, id="co_an", compartment="whole_body", quantity="cardiac_output", value="1.5", unit="L/min",
        group="a", condition="anaesthesia")
    add(tree, V, id="heart_an", compartment="heart", quantity="tissue_mass", value="0.1", unit="kg", group="a",
        condition="anaesthesia", body_mass="10 kg")
    build(tree, tmp_path / "with.sqlite")
    resolver = Resolver(open_store(tmp_path / "with.sqlite"), "dog")
    used = {r["row_id"] for key in (("cardiac_output", "whole_body"), ("tissue_mass", "heart"))
            for r in resolver.rows(*key)}
    assert "co_an" not in used and "heart_an" in used  # the good tree holds a conscious dog's cardiac output
    assert resolver.left_out[("testsource2020", "co_an")] == ("measured in condition anaesthesia: rows of animals "
                                                              "at rest exist (vocab/conditions.csv)")
    add(tree, W, id="co_read", compartment="whole_body", quantity="cardiac_output", value="1.6", unit="L/min",
        condition="anaesthesia", verified="yes")
    build(tree, tmp_path / "read.sqlite")  # a row read in its source does not give way to unread ones
    resolver = Resolver(open_store(tmp_path / "read.sqlite"), "dog")
    assert "co_read" in {r["row_id"] for r in resolver.rows("cardiac_output", "whole_body")}
    (tree / W).unlink()
    for path in (tree / "values").glob("*.csv"):  # without the conscious rows the anaesthetised one counts
        lines = path.read_text().splitlines(keepends=True)
        path.write_text("".join(l for l in lines if ",cardiac_output," not in l or ",anaesthesia," in l))
    build(tree, tmp_path / "without.sqlite")
    resolver = Resolver(open_store(tmp_path / "without.sqlite"), "dog")
    assert [r["row_id"] for r in resolver.rows("cardiac_output", "whole_body")] == ["co_an"]
    # and every output says so: the cell, its JSON and SBML, and a check naming the numbers
    ps = open_store(tmp_path / "without.sqlite").parameter_set("dog", body_mass="10 kg")
    assert ps.cardiac_output.conditions == ("anaesthesia",)
    assert ps.to_dict()["cardiac_output"]["conditions"] == ["anaesthesia"]
    assert 'conditions="anaesthesia"' in ps.to_sbml(allow_gaps=True)
    check = next(c for c in ps.checks if c["check"] == "condition")
    assert check["status"] == "warn" and check["detail"].startswith("cardiac_output") and "heart.volume" in check["detail"]
    # co_an prints no body mass: its per-kg value is taken at the species' typical mass, and the set says so
    assert "co_an: the source prints no body mass for these animals; taken at the species' typical" in \
        ps.cardiac_output.method


def test_gaps_point_only_to_rows_another_stage_would_count(tree, tmp_path):
    """A juvenile dog's single fat depot is no row to point an adult's adipose gap to; a juvenile dog's
    whole adipose tissue is (invented for tests)."""
    from bodyplan import open_store

    add(tree, V, id="depot", life_stage="juvenile", compartment="adipose", quantity="tissue_mass_fraction",
        part="segment", value="2", unit="%")
    build(tree, tmp_path / "piece.sqlite")
    gap = open_store(tmp_path / "piece.sqlite").parameter_set("dog").volumes["adipose"]
    assert gap.origin == "gap" and "other stages" not in gap.reason
    add(tree, V, id="whole", life_stage="juvenile", compartment="adipose", quantity="tissue_mass_fraction",
        value="12", unit="%")
    build(tree, tmp_path / "whole.sqlite")
    gap = open_store(tmp_path / "whole.sqlite").parameter_set("dog").volumes["adipose"]
    assert gap.reason.endswith("rows exist at other stages (1 at juvenile): ask for the stage fallback, or another "
                               "life stage")


def _pig_brain_at_40_kg(tree, tmp_path, percents):
    """Pig brain as % of body mass at 10, 40 and 100 kg (invented for tests), resolved for a 40 kg set."""
    from bodyplan import open_store
    from bodyplan.api.resolve import Resolver

    for i, (kg, pct) in enumerate(zip((10, 40, 100), percents)):
        add(tree, V, id=f"br{i}", species="pig", group=f"g{i}", compartment="brain", quantity="tissue_mass_fraction",
            value=pct, unit="%", n="6", body_mass=f"{kg} kg")
    build(tree, tmp_path / "s.sqlite")
    resolver = Resolver(open_store(tmp_path / "s.sqlite"), "pig")
    resolver.target_mass = 40.0
    return resolver.volume_per_kg("brain")


def test_a_within_species_fit_too_scattered_to_scale_on_gives_way_to_pooling(tree, tmp_path):
    """0.5, 0.05 and 0.2 %: a power law through three scattered points has a prediction interval far wider
    than ×10, so the set pools the per-kg values instead and says why."""
    from bodyplan.schema.model import MAX_INTERVAL_RATIO

    pooled = _pig_brain_at_40_kg(tree, tmp_path, ["0.5", "0.05", "0.2"])
    assert "within-species" not in pooled.estimate.method
    assert any(f"spans more than ×{MAX_INTERVAL_RATIO:g}" in note for note in pooled.notes)


def test_a_within_species_fit_close_to_its_rows_is_scaled_on(tree, tmp_path):
    """0.5, 0.3 and 0.2 %: nearly a power law of body mass, so the set scales on it at 40 kg."""
    fitted = _pig_brain_at_40_kg(tree, tmp_path, ["0.5", "0.3", "0.2"])
    assert fitted.estimate.method.startswith("within-species allometry")
    assert fitted.estimate.high / fitted.estimate.low <= 10


def test_flows_that_already_exceed_the_cardiac_output_fail_before_the_balance_closes(tree, tmp_path):
    """Goat kidney 70 % and muscle 60 % of cardiac output, other flows gaps (invented for tests): the flow
    balance cannot close, yet the set already fails the cardiac-output check and names the gaps."""
    from bodyplan import open_store

    for row, comp, quantity, value, unit in [("bw", "whole_body", "body_mass", "50", "kg"),
                                             ("co", "whole_body", "cardiac_output", "5", "L/min"),
                                             ("qk", "kidney", "blood_flow_fraction", "70", "%"),
                                             ("qm", "muscle", "blood_flow_fraction", "60", "%")]:
        add(tree, V, id=row, species="goat", group="g", compartment=comp, quantity=quantity, value=value, unit=unit,
            n="6", body_mass="50 kg" if row == "co" else "")
    build(tree, tmp_path / "s.sqlite")
    ps = open_store(tmp_path / "s.sqlite").parameter_set("goat")
    assert ps.flows["rest_of_body"].origin == "gap"
    check = next(c for c in ps.checks if c["check"] == "systemic_flows_within_cardiac_output")
    assert check["status"] == "fail" and "still gaps" in check["detail"] and "heart" in check["detail"]


def test_a_breed_unlike_the_usual_animals_counts_only_when_asked_or_alone(tree, tmp_path):
    """Dog heart as % of body mass: mongrels 0.8 %, greyhounds 1.2 % (invented for tests). Sighthounds are a
    fallback class (vocab/classes.csv): a set for dogs in general leaves them out and says why, a set for
    sighthounds uses them, and without any other dogs' row they count."""
    from bodyplan import open_store
    from bodyplan.api.resolve import Resolver

    vocab = tree / "vocab" / "classes.csv"
    assert ",sighthound,sighthound,fallback," in vocab.read_text()
    add(tree, V, id="h_mongrel", group="m", compartment="adipose", quantity="tissue_mass_fraction", value="0.8",
        unit="%", n="10", **{"class": "mongrel"})
    add(tree, V, id="h_grey", group="s", compartment="adipose", quantity="tissue_mass_fraction", value="1.2", unit="%",
        n="10", **{"class": "sighthound"})
    build(tree, tmp_path / "s.sqlite")
    store = open_store(tmp_path / "s.sqlite")
    general = Resolver(store, "dog")
    assert [r["row_id"] for r in general.rows("tissue_mass_fraction", "adipose")] == ["h_mongrel"]
    assert general.left_out[("testsource2020", "h_grey")].startswith("class sighthound: rows of the species' usual")
    hounds = Resolver(store, "dog", animal_class="sighthound")
    assert [r["row_id"] for r in hounds.rows("tissue_mass_fraction", "adipose")] == ["h_grey"]
    lines = (tree / V).read_text().splitlines(keepends=True)
    (tree / V).write_text("".join(line for line in lines if not line.startswith("h_mongrel,")))
    build(tree, tmp_path / "alone.sqlite")
    alone = Resolver(open_store(tmp_path / "alone.sqlite"), "dog")
    assert [r["row_id"] for r in alone.rows("tissue_mass_fraction", "adipose")] == ["h_grey"]


def test_a_piece_of_an_organ_is_compared_only_with_the_same_piece(tree):
    """Whole dog hearts of 100 and 110 g and one right ventricle of 20 g (invented for tests): the ventricle
    is not an outlier among whole hearts (W303 compares the same piece only), but the other source's 200 g
    ventricle is ten times the first."""
    for file, row, part, grams in [(V, "whole_a", "tissue", "100"), (W, "whole_b", "tissue", "110"),
                                   (V, "rv", "ventricle", "20")]:
        add(tree, file, id=row, group=row, compartment="heart", quantity="tissue_mass", part=part, value=grams,
            unit="g", n="5", body_mass="10 kg")
    assert [w for w in warnings(tree, "W303") if "heart" in w] == []
    line = add(tree, W, id="rv2", group="rv2", compartment="heart", quantity="tissue_mass", part="ventricle",
               value="200", unit="g", n="5", body_mass="10 kg")
    assert [w for w in warnings(tree, "W303") if w.startswith(f"{W}:{line}:")]
