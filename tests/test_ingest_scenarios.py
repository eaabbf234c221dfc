"""Each kind of bad input, as a small overlay of tests/data/good/, gives exactly one located finding.

The overlays live in tests/data/bad/<scenario>/ (errors) and tests/data/warn/<scenario>/ (plausibility
warnings); every number in them is invented for tests.
"""

from __future__ import annotations

import shutil

import pytest

from bodyplan.ingest import CuratedDataError, build, check

HEADER = ("id,species,life_stage,age,sex,strain,class,group,compartment,quantity,part,method,condition,value,unit,uncertainty,"
          "spread,low,high,statistic,uncertainty_assumed,n,n_counts,body_mass,temperature,denominator,basis,locator,verified,"
          "missing_reason,comment")
V = "values/testsource2020.csv"

ERRORS = {
    "unknown_unit": f"{V}:6: unit: cannot read unit 'mL/mni/(100 g)' ('mni' is not defined in the unit "
                    "registry); write it in pint syntax, e.g. 'mL/min/kg'",
    "wrong_dimension": f"{V}:6: unit: unit 'kg' has dimension [mass] but this quantity needs [length] ** 3 / [time] "
                       "(absolute, e.g. L/h) or [length] ** 3 / [time] / [mass] (per kg tissue mass, e.g. L/h/kg)",
    "fraction_above_1": f"{V}:4: value: 290 is a fraction above 1 (above 100 %); check the unit ('%' or '1')",
    "negative_mass": f"{V}:3: value: -350 is negative; physiological amounts are never below 0",
    "unknown_species": f"{V}:7: species: unknown species 'dgo'; use an id from vocab/species.csv or add it there",
    "unknown_source_key": "values/nosuchsource1999.csv:1: file: no BibTeX entry 'nosuchsource1999' in sources.bib; "
                          "the file name must be the source's citation key",
    "duplicate_id": f"{V}:9: id: id 'dog_co' appears more than once; make each id unique",
    "missing_column": f"{V}:1: locator: missing column 'locator'; the header must be: {HEADER}",
    "non_utf8": f"{V}:5: file: byte 0xe9 is not UTF-8; save the file as UTF-8",
    "empty_value_without_reason": f"{V}:2: value: is empty without a missing_reason; give the value, or say why "
                                  "the source lacks it",
}

WARNINGS = {
    "out_of_range": f"{V}:2: value: warning: 12000 kg lies outside the plausible range 0.001..10000 kg for "
                    "body_mass; check the unit and the number against the source",
    "mass_fractions_above_1": f"{V}:4: value: warning: organ mass fractions of dog (adult) in this source sum to "
                              "1.070, above 1; check for a part counted with its whole or a % read as 1",
}


def test_good_tree_is_clean(fixture_tree):
    findings, tree, frame = check(fixture_tree)
    assert [str(f) for f in findings.sorted()] == []
    assert len(frame) == 12


def test_every_scenario_folder_has_an_expectation():
    from pathlib import Path

    data = Path(__file__).parent / "data"
    assert {p.name for p in (data / "bad").iterdir()} == set(ERRORS)
    assert {p.name for p in (data / "warn").iterdir()} == set(WARNINGS)


@pytest.mark.parametrize("scenario", sorted(ERRORS))
def test_bad_input_gives_one_located_error(scenario, scenario_tree):
    findings, _, _ = check(scenario_tree(f"bad/{scenario}"))
    assert [str(f) for f in findings.sorted()] == [ERRORS[scenario]]


@pytest.mark.parametrize("scenario", sorted(ERRORS))
def test_bad_input_blocks_the_build(scenario, scenario_tree, tmp_path):
    out = tmp_path / "store.sqlite"
    with pytest.raises(CuratedDataError) as caught:
        build(scenario_tree(f"bad/{scenario}"), out)
    assert [str(f) for f in caught.value.findings.errors] == [ERRORS[scenario]]
    assert not out.exists()
    assert list(tmp_path.glob(".store.sqlite.*")) == []  # no temporary file left behind


@pytest.mark.parametrize("scenario", sorted(WARNINGS))
def test_plausibility_warning(scenario, scenario_tree, tmp_path):
    tree = scenario_tree(f"warn/{scenario}")
    findings, _, _ = check(tree)
    assert findings.errors == []
    assert [str(f) for f in findings.warnings] == [WARNINGS[scenario]]
    result = build(tree, tmp_path / "store.sqlite", plausibility=True)  # warnings do not block a build
    assert [str(f) for f in result.warnings] == [WARNINGS[scenario]]
    assert build(tree, tmp_path / "quiet.sqlite").warnings == []  # a plain build leaves them to check


def test_empty_value_with_reason_is_kept_as_a_gap(fixture_tree, tmp_path):
    import sqlite3

    out = build(fixture_tree, tmp_path / "store.sqlite").path
    row = sqlite3.connect(out).execute(
        "SELECT value, value_canonical, missing_reason FROM curated_values WHERE row_id = 'rat_brain_mass'").fetchone()
    assert row == (None, None, "not determined")


def test_reason_beside_a_value_is_an_error(fixture_tree):
    path = fixture_tree / V
    path.write_text(path.read_text().replace(",measured,Table 1,no,,", ",measured,Table 1,no,not reported,"))
    findings, _, _ = check(fixture_tree)
    assert [str(f) for f in findings.errors] == [
        f"{V}:2: missing_reason: is given but the value is not empty; clear one of them"]


def test_missing_vocabulary_file(fixture_tree):
    (fixture_tree / "vocab" / "life_stages.csv").unlink()
    findings, _, _ = check(fixture_tree)
    assert "vocab/life_stages.csv:0: file: is missing; every curated tree needs vocab/life_stages.csv" in \
        [str(f) for f in findings.errors]


def test_row_with_too_many_fields(fixture_tree):
    path = fixture_tree / V
    lines = path.read_text().splitlines(keepends=True)
    lines[2] = lines[2].replace("invented for tests", "invented, for tests")
    path.write_text("".join(lines))
    findings, _, _ = check(fixture_tree)
    assert [str(f) for f in findings.errors] == [
        f"{V}:3: row: has 32 fields but the header has 31; quote fields that contain commas"]


def test_line_numbers_count_quoted_line_breaks(fixture_tree):
    path = fixture_tree / V
    lines = path.read_text().splitlines(keepends=True)
    lines[1] = lines[1].replace("invented for tests", '"invented for tests\nover two lines"')
    lines[3] = lines[3].replace(",tissue_mass_fraction,", ",tissue_mas_fraction,")
    path.write_text("".join(lines))
    findings, _, _ = check(fixture_tree)
    assert [str(f) for f in findings.errors] == [
        f"{V}:5: quantity: unknown quantity 'tissue_mas_fraction'; use an id from vocab/quantities.csv or add it there"]


def test_source_without_values_file_is_allowed(fixture_tree):
    shutil.rmtree(fixture_tree / "values")
    (fixture_tree / "values").mkdir()
    findings, _, frame = check(fixture_tree)
    assert findings.errors == [] and len(frame) == 0


@pytest.mark.parametrize("species_cell", [" dog", "dog ", '" dog"', '"dog\n"', "dog\u00a0"])
def test_cells_are_compared_stripped(fixture_tree, tmp_path, species_cell):
    import sqlite3

    path = fixture_tree / V
    text = path.read_text()
    path.write_text(text.replace("dog_co,dog,", f"dog_co,{species_cell},"))
    result = build(fixture_tree, tmp_path / "store.sqlite")
    species = sqlite3.connect(result.path).execute(
        "SELECT species_id FROM curated_values WHERE row_id = 'dog_co'").fetchone()[0]
    assert species == "dog"


def _scenario_findings(scenario_tree):
    from pathlib import Path

    data = Path(__file__).parent / "data"
    for kind in ("bad", "warn"):
        for folder in sorted((data / kind).iterdir()):
            findings, _, _ = check(scenario_tree(f"{kind}/{folder.name}"))
            yield from findings.items


def test_every_scenario_finding_has_a_registered_code(scenario_tree):
    from bodyplan.ingest.findings import CODES

    items = list(_scenario_findings(scenario_tree))
    assert len(items) >= len(ERRORS) + len(WARNINGS)
    assert [str(f) for f in items if f.code not in CODES] == []


# The code of each scenario's finding: tests assert codes, the sentences may be reworded.
SCENARIO_CODES = {
    "unknown_unit": "V224", "wrong_dimension": "V224", "fraction_above_1": "V223", "negative_mass": "V216",
    "unknown_species": "V208", "unknown_source_key": "V213", "duplicate_id": "V207", "missing_column": "R108",
    "non_utf8": "R101", "empty_value_without_reason": "V214", "out_of_range": "W301",
    "mass_fractions_above_1": "W302",
}


@pytest.mark.parametrize("scenario", sorted(SCENARIO_CODES))
def test_scenario_code(scenario, scenario_tree):
    kind = "bad" if scenario in ERRORS else "warn"
    findings, _, _ = check(scenario_tree(f"{kind}/{scenario}"))
    assert [f.code for f in findings.sorted()] == [SCENARIO_CODES[scenario]]


@pytest.mark.parametrize("fields, text", [
    ({"author": "Tester, A. and Other, B.", "year": "1990", "title": "A study", "journal": "J Test",
      "volume": "12", "pages": "3--9"}, "Tester & Other (1990). A study. J Test 12:3–9."),
    ({"author": "Tester, A.", "year": "1990", "title": "A study", "journal": "J Test", "pages": "3--9"},
     "Tester (1990). A study. J Test, 3–9."),
    ({"author": "Tester, A.", "year": "1990", "title": "A study", "pages": "316--322"},
     "Tester (1990). A study. pp. 316–322."),
    ({"title": "An abstract read without its authors", "journal": "J Test"},
     "Authors not seen (n.d.). An abstract read without its authors. J Test."),
])
def test_citation_with_and_without_volume(fields, text):
    """Pages follow the volume after a colon; without a volume there is no stray colon; without authors it
    says they were not seen, not that the work is anonymous (invented entries)."""
    from bodyplan.ingest.build_store import format_citation

    assert format_citation(fields) == text


def test_bare_percent_in_bibtex(fixture_tree):
    """BibTeX reads a bare % as the start of a comment, which cut a stored title short (invented entry)."""
    bib = fixture_tree / "sources.bib"
    text = bib.read_text()
    start = text.index("@", text.index("@") + 1)  # the second entry
    line = text[:start].count("\n") + 2
    bib.write_text(text[:start] + "@misc{percent2020,\n  title = {Fat (23%) in invented rats},\n  year = {2020}\n}\n\n"
                   + text[start:])
    findings, _, _ = check(fixture_tree)
    assert [str(f) for f in findings.errors] == [
        f"sources.bib:{line}: entry: has a bare % that cuts the field off there (BibTeX reads the rest of the line "
        "as a comment); write \\% instead"]
