"""Property tests of the ingest: unit round trips through the store, and malformed rows.

Every row written here is invented for tests (the good tree's rows, edited at random).
"""

from __future__ import annotations

import csv
import io
import math
import re
import shutil
import sqlite3
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bodyplan.ingest import CuratedDataError, build
from bodyplan.schema import descriptors
from bodyplan.units import conversion, parse_unit, ureg

GOOD = Path(__file__).parent / "data" / "good"
VALUES = "values/testsource2020.csv"
COLUMNS = descriptors.names(descriptors.VALUES)
LOCATED = re.compile(r"^(values|vocab)/[a-z0-9_]+\.csv:\d+: [a-z_]+: .+$|^sources\.bib:\d+: [a-z_]+: .+$")
SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def good_rows() -> list[dict]:
    with open(GOOD / VALUES, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def write_rows(path: Path, rows: list[dict]) -> None:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=COLUMNS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    path.write_bytes(out.getvalue().encode("utf-8"))


class Tree:
    """A scratch copy of the good tree plus a previous store, for one hypothesis example."""

    def __enter__(self):
        self.dir = Path(tempfile.mkdtemp(prefix="bodyplan-prop-"))
        self.root = self.dir / "curated"
        shutil.copytree(GOOD, self.root)
        self.store = self.dir / "store.sqlite"
        shutil.copyfile(PREVIOUS_STORE, self.store)
        return self

    def __exit__(self, *exc):
        shutil.rmtree(self.dir, ignore_errors=True)


PREVIOUS_STORE: Path


@pytest.fixture(scope="module", autouse=True)
def previous_store(tmp_path_factory):
    global PREVIOUS_STORE
    PREVIOUS_STORE = build(GOOD, tmp_path_factory.mktemp("previous") / "store.sqlite").path
    return PREVIOUS_STORE


def assert_refused_unchanged(tree: Tree) -> list:
    """The build fails with located findings only, and the previous store is byte-identical."""
    before = tree.store.read_bytes()
    with pytest.raises(CuratedDataError) as caught:
        build(tree.root, tree.store)
    errors = caught.value.findings.errors
    assert errors
    for finding in caught.value.findings.items:
        assert LOCATED.match(str(finding)), str(finding)
    assert tree.store.read_bytes() == before
    assert [p.name for p in tree.dir.iterdir()] != [] and not list(tree.dir.glob(".store.sqlite.*"))
    return errors


# --- round trip: reported → canonical (in the store) → reported ------------------------------------------

UNIT_CHOICES = {
    "body_mass": ["kg", "g", "lb"],
    "tissue_mass": ["g", "mg", "kg", "oz"],
    "tissue_mass_fraction": ["%", "1", "g/kg"],
    "blood_flow": ["mL/min", "L/h", "mL/min/(100 g)", "mL/min/g", "L/h/kg"],
    "blood_flow_fraction": ["%", "1"],
    "cardiac_output": ["L/min", "mL/min/kg", "L/min/m^2", "mL/min/(1.73 m^2)"],
    "hematocrit": ["%", "L/L", "1"],
}
COMPARTMENT = {"body_mass": "whole_body", "cardiac_output": "whole_body", "hematocrit": "blood"}

reported = st.tuples(
    st.sampled_from(sorted(UNIT_CHOICES)).flatmap(lambda q: st.tuples(st.just(q), st.sampled_from(UNIT_CHOICES[q]))),
    st.floats(min_value=1e-6, max_value=1.0, allow_nan=False, allow_infinity=False),
)


@SETTINGS
@given(st.lists(reported, min_size=1, max_size=12))
def test_round_trip_through_the_store(picks):
    quantities = {}
    with open(GOOD / "vocab" / "quantities.csv", newline="", encoding="utf-8") as fh:
        for q in csv.DictReader(fh):
            quantities[q["id"]] = q
    template = good_rows()[0]
    rows = []
    for i, ((quantity, unit), value) in enumerate(picks):
        # fractions stay within 0..1 whatever the unit; other values may be larger
        q = quantities[quantity]
        per_tissue = conversion(unit, q["canonical_unit"], q["per"])[0].normalisation == "tissue_mass"
        rows.append({**template, "id": f"r{i}", "quantity": quantity, "unit": unit,
                     "compartment": COMPARTMENT.get(quantity, "liver"), "value": repr(value),
                     "uncertainty": "none", "spread": "", "n": "", "comment": "invented for tests",
                     "denominator": "tissue" if per_tissue else template.get("denominator", "")})
    with Tree() as tree:
        write_rows(tree.root / VALUES, rows)
        result = build(tree.root, tree.store)
        stored = sqlite3.connect(result.path).execute(
            "SELECT row_id, value, unit, value_canonical, unit_canonical FROM curated_values "
            "WHERE source_id = 'testsource2020' ORDER BY line").fetchall()
    assert len(stored) == len(rows)
    for row, (row_id, value, unit, canonical, canonical_unit) in zip(rows, stored):
        assert (row_id, value, unit) == (row["id"], float(row["value"]), row["unit"])
        q = quantities[row["quantity"]]
        form, _ = conversion(unit, q["canonical_unit"], q["per"])
        assert canonical_unit == form.canonical_unit
        # back to the reported unit with pint itself, not with the ingest's factor
        rep = parse_unit(unit)
        back = ureg.Quantity(canonical, canonical_unit).to(rep.units).magnitude / rep.magnitude
        assert math.isclose(back, value, rel_tol=1e-9)


# --- malformed rows: always a located error on that row, never a crash, never a changed store ------------

def _not_a_number(text: str) -> bool:
    try:
        return not math.isfinite(float(text))
    except ValueError:
        return True


words = st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=12)
MALFORMATIONS = {
    "species": words.filter(lambda s: s not in {"dog", "human", "rat"}),
    "compartment": words.map(lambda s: "zz" + s),
    "quantity": words.map(lambda s: "zz" + s),
    "sex": words.filter(lambda s: s not in descriptors.SEXES),
    "basis": words.filter(lambda s: s not in descriptors.BASES),
    "verified": words.filter(lambda s: s not in descriptors.YES_NO),
    "uncertainty": words.filter(lambda s: s not in descriptors.UNCERTAINTY_KINDS),
    "value": st.one_of(st.text(min_size=1).filter(lambda s: s.strip() and _not_a_number(s.strip())),
                       st.floats(max_value=-1e-6, allow_nan=False, allow_infinity=False).map(repr),
                       st.just(""), st.sampled_from(["inf", "-inf", "1e400"])),
    "unit": st.one_of(st.sampled_from(["degC", "m", "s", "mol", "cd", "A", "kg*m", "0", "nan"]),
                      words.map(lambda s: "zz" + s)),
    "n": st.one_of(st.integers(max_value=0).map(str), st.floats(0.01, 1e6).filter(lambda x: x != int(x)).map(repr)),
    "locator": st.just(""),
    "id": st.text(alphabet="ABC !@#", min_size=1, max_size=5).filter(lambda s: s.strip()),
    "body_mass": st.one_of(st.sampled_from(["12", "12 m", "-3 kg", "0 kg", "12 zzkg", "1e400 kg"])),
    "spread": st.floats(max_value=-1e-6, allow_nan=False, allow_infinity=False).map(repr),
}


@SETTINGS
@given(index=st.integers(0, len(good_rows()) - 1), column=st.sampled_from(sorted(MALFORMATIONS)),
       data=st.data())
def test_malformed_cell_gives_located_error(index, column, data):
    rows = good_rows()
    bad = data.draw(MALFORMATIONS[column], label=column)
    rows[index][column] = bad
    if column == "value" and bad == "":
        rows[index]["missing_reason"] = ""
    if column == "spread" and rows[index]["uncertainty"] not in ("sd", "se", "cv"):
        rows[index]["uncertainty"] = "sd"
        rows[index]["low"] = rows[index]["high"] = ""
    with Tree() as tree:
        write_rows(tree.root / VALUES, rows)
        errors = assert_refused_unchanged(tree)
    line = index + 2  # header is line 1 and the good rows hold no line breaks
    assert any(f.file == VALUES and f.line == line for f in errors), [str(f) for f in errors]


@SETTINGS
@given(index=st.integers(0, len(good_rows()) - 1), fields=st.integers(1, 40).filter(lambda n: n != len(COLUMNS)))
def test_row_of_wrong_width_gives_located_error(index, fields):
    lines = (GOOD / VALUES).read_text(encoding="utf-8").splitlines(keepends=True)
    cells = lines[index + 1].rstrip("\n").split(",")
    cells = (cells + ["x"] * fields)[:fields]
    lines[index + 1] = ",".join(cells) + "\n"
    with Tree() as tree:
        (tree.root / VALUES).write_text("".join(lines), encoding="utf-8")
        errors = assert_refused_unchanged(tree)
    assert [str(f) for f in errors] == [f"{VALUES}:{index + 2}: row: has {fields} fields but the header has {len(COLUMNS)}; "
                                        "quote fields that contain commas"]


@SETTINGS
@given(column=st.sampled_from(COLUMNS), index=st.integers(0, 8), text=st.text(max_size=30))
def test_any_text_in_any_cell_never_crashes(column, index, text):
    """Arbitrary text (line breaks, quotes, NUL, any script): a store or located findings, nothing else."""
    rows = good_rows()
    rows[index][column] = text
    with Tree() as tree:
        write_rows(tree.root / VALUES, rows)
        before = tree.store.read_bytes()
        try:
            build(tree.root, tree.store)
        except CuratedDataError as exc:
            for finding in exc.findings.items:
                assert LOCATED.match(str(finding)), str(finding)
            assert tree.store.read_bytes() == before


@SETTINGS
@given(position=st.integers(1, 10), junk=st.binary(min_size=1, max_size=60))
def test_any_bytes_line_never_crashes(position, junk):
    lines = (GOOD / VALUES).read_bytes().splitlines(keepends=True)
    lines.insert(position, junk + b"\n")
    with Tree() as tree:
        (tree.root / VALUES).write_bytes(b"".join(lines))
        before = tree.store.read_bytes()
        try:
            build(tree.root, tree.store)
        except CuratedDataError as exc:
            for finding in exc.findings.items:
                assert LOCATED.match(str(finding)), str(finding)
            assert tree.store.read_bytes() == before
