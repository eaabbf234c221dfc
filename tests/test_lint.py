"""Lint: canonical form of curated files, idempotent, never changing a value."""

from __future__ import annotations

import csv
import io
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.cli import cli
from bodyplan.ingest import check
from bodyplan.ingest.lint import canonical_bibtex, canonical_csv, canonical_number, lint_tree, natural_key
from bodyplan.schema import descriptors

FIXTURE = Path(__file__).parent / "data" / "curator"
COLUMNS = descriptors.names(descriptors.VALUES)


def test_canonical_number_keeps_printed_precision():
    assert canonical_number(" +3.20 ") == "3.20"
    assert canonical_number("- 0.5") == "-0.5"
    assert canonical_number(".5") == "0.5"
    assert canonical_number("007") == "7"
    assert canonical_number("1E+03") == "1e03"
    assert canonical_number("0") == "0"
    assert canonical_number("3,2") == "3,2"  # not a number: left for check to report
    assert canonical_number("") == ""


def test_natural_order():
    assert sorted(["t10", "t2", "t1b", "a"], key=natural_key) == ["a", "t1b", "t2", "t10"]


def test_messy_file_becomes_canonical(tmp_path):
    shuffled = COLUMNS[::-1]
    rows = [
        {**dict.fromkeys(COLUMNS, ""), "id": "t10", "species": " dog ", "value": " +3.20", "unit": "%",
         "comment": "has, a comma"},
        {**dict.fromkeys(COLUMNS, ""), "id": "t2", "species": "dog", "value": ".5", "body_mass": " 12   kg "},
    ]
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n", quoting=csv.QUOTE_ALL)
    writer.writerow(shuffled)
    for r in rows:
        writer.writerow([r[c] for c in shuffled])
    writer.writerow([""] * len(shuffled))  # a blank row is dropped
    raw = ("\ufeff" + out.getvalue()).encode("utf-8")
    text = canonical_csv(raw, "values/x.csv", descriptors.VALUES)
    lines = text.split("\n")
    assert lines[0] == ",".join(COLUMNS)
    assert lines[1].startswith("t2,dog,") and ",0.5," in lines[1] and ",12 kg," in lines[1]
    assert lines[2].startswith("t10,dog,") and ",3.20,%," in lines[2] and lines[2].endswith('"has, a comma"')
    assert lines[3] == "" and len(lines) == 4 and "\r" not in text
    assert canonical_csv(text.encode(), "values/x.csv", descriptors.VALUES) == text


def test_lint_refuses_ragged_rows_and_unknown_columns(tmp_path):
    root = tmp_path / "tree"
    shutil.copytree(FIXTURE, root)
    ragged = root / "values" / "testa2000.csv"
    ragged.write_text(ragged.read_text() + "oops,dog\n")
    odd = root / "values" / "testb2001.csv"
    odd.write_text(odd.read_text().replace("comment\n", "comment,extra\n", 1))
    before = {p: p.read_bytes() for p in (ragged, odd)}
    report = lint_tree(root)
    assert any(p.startswith("values/testa2000.csv:9:") for p in report.problems)
    assert any(p.startswith("values/testb2001.csv:1:") and "extra" in p for p in report.problems)
    assert all(p.read_bytes() == b for p, b in before.items())


def test_bibtex_sorted_and_formatted():
    raw = ("@Article{zed2001,\n Title={A  title},\n YEAR = 2001,}\n\n"
           "@book{abe1999, title = {B}, year = {1999}, publisher={P}}\n").encode()
    text = canonical_bibtex(raw, "sources.bib")
    assert text == ("@book{abe1999,\n  title     = {B},\n  year      = {1999},\n  publisher = {P}\n}\n\n"
                    "@article{zed2001,\n  title = {A title},\n  year  = {2001}\n}\n")
    assert canonical_bibtex(text.encode(), "sources.bib") == text


def test_fixture_tree_is_canonical_and_cli_check(tmp_path):
    root = tmp_path / "tree"
    shutil.copytree(FIXTURE, root)
    runner = CliRunner()
    result = runner.invoke(cli, ["lint", "--check", str(root)])
    assert result.exit_code == 0, result.output
    path = root / "values" / "testb2001.csv"
    lines = path.read_text().splitlines()
    path.write_text("\r\n".join([lines[0], lines[2], lines[1], *lines[3:]]) + "\r\n")
    result = runner.invoke(cli, ["lint", "--check", str(root)])
    assert result.exit_code == 1
    assert "would rewrite values/testb2001.csv (first difference at line 1)" in result.output
    changed = path.read_bytes()
    assert changed.count(b"\r\n") == len(lines)  # --check wrote nothing
    result = runner.invoke(cli, ["lint", str(root)])
    assert result.exit_code == 0 and "rewrote values/testb2001.csv" in result.output
    assert path.read_text() == "\n".join(lines) + "\n"
    assert runner.invoke(cli, ["lint", "--check", str(root)]).exit_code == 0


def _values(root):
    findings, _tree, frame = check(root)
    assert not findings.errors
    cols = ["_source", "id", "species", "compartment", "quantity", "_value", "unit", "_spread", "_low", "_high"]
    return sorted(map(repr, frame[cols].astype(str).itertuples(index=False)))


def test_lint_keeps_every_value(tmp_path):
    root = tmp_path / "tree"
    shutil.copytree(FIXTURE, root)
    path = root / "values" / "testc2002.csv"
    lines = path.read_text().splitlines()
    messy = [lines[0]] + [ln.replace(",4.0,", ", +4.0 ,") for ln in reversed(lines[1:])]
    path.write_text("\n".join(messy) + "\n")
    before = _values(root)
    lint_tree(root)
    assert _values(root) == before
    assert lint_tree(root, write=False).changed == []


# --- idempotence over generated rows ---------------------------------------------------------------

number_text = st.builds(
    lambda sign, whole, frac, pad: f"{pad}{sign}{whole}{frac}{pad}",
    st.sampled_from(["", "+", "-", "+ "]), st.from_regex(r"[0-9]{1,4}", fullmatch=True),
    st.sampled_from(["", ".", ".0", ".20", ".125"]), st.sampled_from(["", " ", "  "]))
free_text = st.text(st.characters(blacklist_categories=("Cs", "Cc")) | st.sampled_from([",", '"', "\n", " "]),
                    max_size=12)
row_id = st.from_regex(r"[a-z0-9][a-z0-9_.\-]{0,6}", fullmatch=True)


@st.composite
def value_files(draw):
    n = draw(st.integers(0, 6))
    ids = draw(st.lists(row_id, min_size=n, max_size=n, unique=True))
    rows = []
    for rid in ids:
        row = {c: draw(free_text) for c in COLUMNS}
        row.update(id=rid, value=draw(number_text), spread=draw(number_text | st.just("")),
                   n=draw(st.from_regex(r"[1-9][0-9]?", fullmatch=True)))
        rows.append(row)
    order = draw(st.permutations(COLUMNS))
    ending = draw(st.sampled_from(["\n", "\r\n"]))
    quoting = draw(st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_ALL]))
    out = io.StringIO()
    writer = csv.writer(out, lineterminator=ending, quoting=quoting)
    writer.writerow(order)
    writer.writerows([[r[c] for c in order] for r in rows])
    return out.getvalue().encode("utf-8"), rows


@settings(max_examples=150, deadline=None)
@given(value_files())
def test_lint_is_idempotent_and_lossless(generated):
    raw, rows = generated
    once = canonical_csv(raw, "values/g.csv", descriptors.VALUES)
    assert canonical_csv(once.encode("utf-8"), "values/g.csv", descriptors.VALUES) == once
    parsed = list(csv.DictReader(io.StringIO(once, newline="")))
    assert list(parsed[0]) == COLUMNS if parsed else once == ",".join(COLUMNS) + "\n"
    assert [r["id"] for r in parsed] == sorted((r["id"] for r in rows), key=natural_key)
    by_id = {r["id"]: r for r in rows}
    for r in parsed:
        src = by_id[r["id"]]
        assert float(r["value"]) == float(src["value"].replace(" ", ""))
        assert r["comment"] == src["comment"].strip()
        assert r["value"].lstrip("-").lstrip("0").rstrip("0") in src["value"].replace(" ", "")


bib_text = st.text(st.sampled_from(list("abcXYZ019 .,:;-()'/&")), min_size=1, max_size=20).filter(str.strip)


@st.composite
def bib_files(draw):
    keys = draw(st.lists(st.from_regex(r"[a-z][a-z0-9_]{0,7}", fullmatch=True), min_size=1, max_size=5,
                         unique=True))
    entries = []
    for key in keys:
        names = draw(st.lists(st.sampled_from(["author", "title", "journal", "year", "pages", "note"]),
                              min_size=1, max_size=5, unique=True))
        fields = ",\n".join(f"  {draw(st.sampled_from([n, n.upper(), n.title()]))} = {{{draw(bib_text)}}}"
                            for n in names)
        kind = draw(st.sampled_from(["article", "Book", "MISC"]))
        entries.append(f"@{kind}{{{key},\n{fields}{draw(st.sampled_from(['', ',']))}\n}}")
    return draw(st.sampled_from(["\n", "\n\n"])).join(entries) + "\n", keys


@settings(max_examples=60, deadline=None)
@given(bib_files())
def test_bibtex_lint_is_idempotent_and_keeps_fields(generated):
    from bodyplan.ingest.lint import initials, parse_bibtex

    raw, keys = generated
    once = canonical_bibtex(raw.encode(), "sources.bib")
    assert canonical_bibtex(once.encode(), "sources.bib") == once
    before, after = parse_bibtex(raw), parse_bibtex(once)
    assert [e.key for e in after.entries] == sorted(keys, key=natural_key)
    fields = {e.key: {f.key.lower(): (initials if f.key.lower() == "author" else str)(" ".join(str(f.value).split()))
                      for f in e.fields} for e in before.entries}
    assert {e.key: {f.key: f.value for f in e.fields} for e in after.entries} == fields


# Given names as initials (the project's BibTeX rule); names invented or of the form BibTeX documents.
@pytest.mark.parametrize("written, canonical", [
    ("Tester, Ann", "Tester, A."),
    ("Tester, Ann B. and Other, Cora", "Tester, A. B. and Other, C."),
    ("Dupont, Jean-Luc", "Dupont, J.-L."),
    ("Dupont, J.-L.", "Dupont, J.-L."),
    ("Tester, {\\'E}mile", "Tester, {\\'E}."),
    ("Tester, Ann and others", "Tester, A. and others"),
    ("{Invented Organisation for Tests}", "{Invented Organisation for Tests}"),
    ("Ann Tester", "Ann Tester"),  # no comma: lint cannot tell the surname, so it keeps the name
])
def test_author_given_names_become_initials(written, canonical):
    from bodyplan.ingest.lint import initials

    assert initials(written) == canonical
    assert initials(canonical) == canonical
