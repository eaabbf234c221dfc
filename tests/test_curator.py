"""The curator's workflow: add a source, plausibility warnings, trace a parameter to its rows."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from bodyplan.cli import cli
from bodyplan.ingest import build, check
from bodyplan.schema import descriptors

FIXTURE = Path(__file__).parent / "data" / "curator"
HEADER = ",".join(descriptors.names(descriptors.VALUES))
GOOD_BIB = """@Article{new2024,
  Author = {Tester, Dee},
  title = {Invented source D for the bodyplan tests},
  journal = {Nowhere}, year = 2024,
}
"""


@pytest.fixture
def tree(tmp_path) -> Path:
    root = tmp_path / "tree"
    shutil.copytree(FIXTURE, root)
    return root


def snapshot(root: Path) -> dict[str, bytes]:
    return {str(p.relative_to(root)): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


# the columns every row has; the others (group, method, part …) stay empty here, meaning their defaults
BASIC = ["id", "species", "life_stage", "age", "sex", "strain", "compartment", "quantity", "value", "unit",
         "uncertainty", "spread", "low", "high", "n", "body_mass", "basis", "locator", "verified", "missing_reason",
         "comment"]


def append(root: Path, source: str, line: str, **more: str) -> int:
    """Append a row given in the BASIC columns (plus any other column by name); returns its line number."""
    import csv
    import io

    cells = dict(zip(BASIC, next(csv.reader([line])), strict=True), **more)
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerow([cells.get(c, "") for c in descriptors.names(descriptors.VALUES)])
    path = root / "values" / f"{source}.csv"
    text = path.read_text()
    path.write_text(text + out.getvalue())
    return text.count("\n") + 1


def warnings_of(root: Path) -> list[str]:
    findings, _tree, _frame = check(root)
    assert not findings.errors, findings.errors
    return [str(f) for f in findings.warnings]


# --- add -------------------------------------------------------------------------------------------

def test_add_scaffolds_a_valid_source(tree, tmp_path):
    bib = tmp_path / "new.bib"
    bib.write_text(GOOD_BIB)
    result = CliRunner().invoke(cli, ["add", "new2024", "--data", str(tree), "--bibtex", str(bib)])
    assert result.exit_code == 0, result.output
    assert (tree / "values" / "new2024.csv").read_text() == HEADER + "\n"
    assert "@article{new2024," in (tree / "sources.bib").read_text()
    assert HEADER in result.output and "next steps" in result.output
    findings, _t, _f = check(tree)
    assert not findings.errors
    lint = CliRunner().invoke(cli, ["lint", "--check", str(tree)])
    assert lint.exit_code == 0, lint.output  # the entry went in its sorted place


def test_add_reads_a_pasted_entry(tree):
    result = CliRunner().invoke(cli, ["add", "new2024", "--data", str(tree), "--bibtex", "-"], input=GOOD_BIB)
    assert result.exit_code == 0, result.output
    assert (tree / "values" / "new2024.csv").exists()


@pytest.mark.parametrize("key, bibtex, message", [
    ("testa2000", GOOD_BIB.replace("new2024", "testa2000"), "already exists"),
    ("new2024", "@article{new2024, title = {Unclosed", "malformed"),
    ("other2024", GOOD_BIB, "key is 'new2024' but the source is 'other2024'"),
    ("new2024", "@article{new2024, journal = {J}, year = 2024}", "has no title"),
    ("new2024", GOOD_BIB + "\n" + GOOD_BIB.replace("new2024", "two2024"), "exactly one BibTeX entry"),
    ("New-2024", GOOD_BIB, "must be lowercase"),
])
def test_add_refuses_and_writes_nothing(tree, key, bibtex, message):
    before = snapshot(tree)
    result = CliRunner().invoke(cli, ["add", key, "--data", str(tree), "--bibtex", "-"], input=bibtex)
    assert result.exit_code != 0
    assert message in str(result.exception)
    assert snapshot(tree) == before


def test_add_refuses_a_key_only_in_sources_bib(tree):
    (tree / "values" / "testc2002.csv").unlink()  # the entry stays in sources.bib
    before = snapshot(tree)
    result = CliRunner().invoke(cli, ["add", "testc2002", "--data", str(tree), "--bibtex", "-"],
                                input=GOOD_BIB.replace("new2024", "testc2002"))
    assert "already exists in sources.bib" in str(result.exception)
    assert snapshot(tree) == before


def test_add_without_bibtex_refuses(tree):
    before = snapshot(tree)
    result = CliRunner().invoke(cli, ["add", "new2024", "--data", str(tree)])
    assert result.exit_code != 0 and "--bibtex" in str(result.exception)
    assert snapshot(tree) == before


# --- plausibility warnings ---------------------------------------------------------------------------

def test_fixture_is_clean(tree):
    assert warnings_of(tree) == []


def test_planted_outlier(tree):
    line = append(tree, "testc2002", "liver2,dog,adult,,mixed,,liver,tissue_mass,1.5,kg,none,,,,5,,measured,"
                                     "Table 9,no,,invented for tests: planted outlier")
    found = [w for w in warnings_of(tree) if "times" in w or "×" in w]
    assert found == [
        f"values/testc2002.csv:{line}: value: warning: 1.5 kg (1.5 kg) is 4.69× above the median 0.32 kg of "
        "3 sources (testa2000, testb2001, testc2002) for dog adult liver tissue_mass; check the number, its unit, "
        "the compartment, life stage and strain against the source"]


def test_two_sources_far_apart_are_both_named(tree):
    line = append(tree, "testa2000", "co,human,adult,,mixed,,whole_body,cardiac_output,25,L/min,none,,,,3,,"
                                     "measured,p. 3,no,,invented for tests: planted outlier")
    found = [w for w in warnings_of(tree) if "cardiac_output" in w]
    assert len(found) == 1  # the median of three sources is not dragged by the planted row
    assert found[0].startswith(f"values/testa2000.csv:{line}: value: warning: 25 L/min (1500 L/h) is 4.46× above "
                               "the median 336 L/h of 3 sources")


def test_organ_fractions_above_one(tree):
    line = append(tree, "testa2000", "heart_f,dog,adult,,mixed,Beagle,heart,tissue_mass_fraction,97,%,none,,,,6,"
                                     "10 kg,measured,Table 3,no,,invented for tests: planted sum above 1")
    found = [w for w in warnings_of(tree) if "sum to" in w]
    assert found == [
        "values/testa2000.csv:4: value: warning: organ mass fractions of dog (adult) in this source sum to 1.008, "
        "above 1; check for a part counted with its whole or a % read as 1"]
    assert line == 9


def test_suspicious_unit(tree):
    line = append(tree, "testb2001", "heart,dog,adult,,male,,heart,tissue_mass,0.08,g,none,,,,8,,measured,"
                                     "Table 1,no,,invented for tests: planted unit typo")
    found = [w for w in warnings_of(tree) if ": unit: " in w]
    assert found == [
        f"values/testb2001.csv:{line}: unit: warning: 0.08 g (8e-05 kg) is about 1/2,344 of the median 0.1875 kg "
        "of 2 other tissue_mass row(s) of dog in this file, which use 'kg'; is 'g' a typo for 'kg'? "
        "check the unit in the source"]


def test_a_small_organ_in_grams_is_not_a_typo(tree):
    append(tree, "testb2001", "thyroid,dog,adult,,male,,brain,tissue_mass,80,g,none,,,,8,,measured,"
                              "Table 1,no,,invented for tests: plausible small organ in g")
    assert [w for w in warnings_of(tree) if ": unit: " in w] == []


def test_check_cli_prints_warnings_and_exits_2(tree):
    line = append(tree, "testc2002", "liver2,dog,adult,,mixed,,liver,tissue_mass,1.5,kg,none,,,,5,,measured,"
                                     "Table 9,no,,invented for tests: planted outlier")
    result = CliRunner().invoke(cli, ["check", str(tree)])
    assert result.exit_code == 2
    assert f"values/testc2002.csv:{line}: value: warning: 1.5 kg" in result.output


# --- trace -----------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def store_path(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("store") / "bodyplan.sqlite"
    build(FIXTURE, out)
    return out


def test_trace_lists_every_row_with_provenance(store_path):
    from bodyplan.api import open_store
    from bodyplan.api.trace import trace

    result = trace(open_store(store_path), "dog", "gfr")
    rows = result.rows
    assert list(rows["source"]) == ["testa2000", "testb2001", "testc2002"]
    assert list(rows["value"]) == [3.5, 3.2, 4.0]
    assert rows["value_canonical"].round(6).tolist() == [0.21, 0.192, 0.24]
    assert list(rows["uncertainty"]) == ["sd", "se", "range"]
    assert list(rows["locator"]) == ["p. 12", "Fig. 2", "Table 2"]
    assert list(rows["verified"]) == [False, False, False]
    assert rows["citation"].str.contains("Invented source").all()
    assert list(rows["file"] + ":" + rows["line"].astype(str)) == [
        "values/testa2000.csv:3", "values/testb2001.csv:3", "values/testc2002.csv:3"]


def test_trace_cli_table_and_json(store_path):
    import json

    runner = CliRunner()
    result = runner.invoke(cli, ["trace", "dog", "tissue_mass", "liver", "--store", str(store_path)])
    assert result.exit_code == 0, result.output
    assert "values/testb2001.csv:5" in result.output and "testa2000: Tester (2000)" in result.output
    assert "research modelling only" in result.output
    data = json.loads(runner.invoke(cli, ["trace", "dog", "tissue_mass", "liver", "--store", str(store_path),
                                          "--format", "json"]).output)
    assert [r["value_canonical"] for r in data["rows"]] == [0.3, 0.32, 0.29]
    assert "caution" in data


def test_trace_unknown_id_is_one_clean_error(store_path):
    result = CliRunner().invoke(cli, ["trace", "dog", "kidney_mass", "--store", str(store_path)])
    assert result.exit_code != 0 and "unknown quantity 'kidney_mass'" in str(result.exception)


def test_trace_numbers_are_the_parameter_sets(store_path):
    from bodyplan.api import open_store
    from bodyplan.api.trace import trace

    store = open_store(store_path)
    layout = str(FIXTURE / "layouts" / "organs.toml")
    dog = store.parameter_set("dog", layout=layout)
    bw = dog.body_mass.value
    combined = {c["compartment"]: c for c in trace(store, "dog", "tissue_mass").combined}
    assert set(combined) == {"kidney", "liver"}
    for organ, entry in combined.items():
        cell = dog.volumes[organ]
        assert entry["value"] * bw == pytest.approx(cell.value, rel=1e-12)
        assert entry["method"] == cell.method
        assert tuple(entry["sources"]) == cell.sources
    # a mass with its subjects' body mass is the more direct route; a mass without it would borrow the
    # species' typical body mass, so testb2001's own share of the same dogs' body mass is used instead
    rows = trace(store, "dog", "tissue_mass_fraction").rows
    assert list(zip(rows["source"], rows["used"])) == [("testa2000", False), ("testa2000", False), ("testb2001", True)]
    assert sorted(r["at"] for r in combined["liver"]["rows_used"]) == [
        "values/testa2000.csv:7", "values/testb2001.csv:6", "values/testc2002.csv:6"]

    human = store.parameter_set("human", body_mass="70 kg", layout=layout)
    [co] = trace(store, "human", "cardiac_output").combined
    assert co["value"] * 70 == pytest.approx(human.cardiac_output.value, rel=1e-12)
    assert co["se"] * 70 == pytest.approx(human.cardiac_output.se, rel=1e-12)


def test_trace_of_one_sex_keeps_mixed_rows_like_the_parameter_set(store_path):
    from bodyplan.api import open_store
    from bodyplan.api.trace import trace

    store = open_store(store_path)
    result = trace(store, "dog", "tissue_mass", "liver", sex="male")
    assert list(result.rows["source"]) == ["testa2000", "testb2001", "testc2002"]  # male and mixed rows
    assert trace(store, "dog", "tissue_mass", "liver", sex="female").rows["source"].tolist() == [
        "testa2000", "testc2002"]
    [combined] = result.combined
    assert sorted(r["source"] for r in combined["rows_used"]) == ["testa2000", "testb2001", "testc2002"]


def test_trace_of_nothing_is_a_gap(store_path):
    from bodyplan.api import open_store
    from bodyplan.api.trace import trace

    result = trace(open_store(store_path), "rat", "tissue_mass", "heart")
    assert result.rows.empty and result.combined == []
    assert result.note == "no curated rows for rat adult tissue_mass in heart: a gap"


def test_trace_follows_the_model_declaration(store_path):
    from bodyplan.api import open_store
    from bodyplan.api.trace import trace

    from bodyplan.schema.model import parameter_of

    store = open_store(store_path)
    result = trace(store, "human", "hematocrit")  # hematocrit joined the sets: traced as they pool it
    assert list(result.rows["value"]) == [44.0] and list(result.rows["used"]) == [True]
    [combined] = result.combined
    assert combined["value"] == pytest.approx(0.44) and combined["unit"] == "fraction of blood volume"
    organs = store.parameter_set("human", layout=str(FIXTURE / "layouts" / "organs.toml"))
    assert combined["value"] == pytest.approx(organs.physiology["hematocrit"].value)
    assert parameter_of("milk_yield") is None and parameter_of("urine_flow") is None


# --- DEVELOPERS.md stays true ----------------------------------------------------------------------

DEVELOPERS = Path(__file__).parent.parent / "DEVELOPERS.md"


def test_developers_column_table_is_generated_from_the_descriptors():
    from bodyplan.ingest.scaffold import columns_markdown

    text = DEVELOPERS.read_text(encoding="utf-8")
    table = text.split("<!-- columns:start -->\n")[1].split("<!-- columns:end -->")[0]
    assert table == columns_markdown()


def test_developers_names_only_real_commands():
    import re

    from bodyplan.cli import COMMANDS

    named = set(re.findall(r"^\$ bodyplan ([a-z]+)", DEVELOPERS.read_text(encoding="utf-8"), re.M))
    assert named and named <= set(COMMANDS)


def _session_steps(text: str) -> list[tuple[str, str, int]]:
    """(command, printed output, exit status) of every '$ …' line in DEVELOPERS.md's session."""
    import re

    session = text.split("### The session")[1].split("### What the warnings")[0]
    steps = []
    for block in re.findall(r"```\n(.*?)```", session, re.S):
        for m in re.finditer(r"^\$ ([^\n]+)\n(.*?)^# exit status (\d+)\n", block, re.S | re.M):
            steps.append((m.group(1), m.group(2), int(m.group(3))))
    return steps


def test_developers_session_replays_exactly(tmp_path, monkeypatch):
    """Run the curator session of DEVELOPERS.md again and compare every printed line."""
    import contextlib
    import io
    import shlex
    import subprocess

    from bodyplan.cli import main

    text = DEVELOPERS.read_text(encoding="utf-8")
    bib = text.split("`testd2003.bib`:\n\n```\n")[1].split("```")[0]
    rows = text.split("**3. Add the rows**")[1].split("```\n")[1]
    shutil.copytree(FIXTURE, tmp_path / "data")
    (tmp_path / "testd2003.bib").write_text(bib)
    monkeypatch.chdir(tmp_path)
    steps = _session_steps(text)
    assert len(steps) >= 15
    checks = 0
    for command, expected, status in steps:
        if command.startswith("bodyplan check"):  # the session's edits between the commands
            if checks == 0:
                with open(tmp_path / "data" / "values" / "testd2003.csv", "a") as f:
                    f.write(rows)
            else:
                path = tmp_path / "data" / "values" / "testd2003.csv"
                path.write_text(path.read_text().replace(",0.085,g,", ",0.085,kg,"))
            checks += 1
        argv = shlex.split(command)
        if argv[0] != "bodyplan":  # cat, ls
            done = subprocess.run(argv, capture_output=True, text=True)
            printed, code = done.stdout + done.stderr, done.returncode
        else:
            out = io.StringIO()
            code = 0
            with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
                try:
                    main(argv[1:])
                except SystemExit as exc:
                    code = exc.code or 0
            printed = out.getvalue()
        assert (code, sorted(printed.splitlines())) == (status, sorted(expected.splitlines())), command


def test_trace_counts_the_sources_of_the_rows_used_not_of_a_borrowed_density():
    """Two groups of one source, combined with a tissue density from another source: 'from 1 source'."""
    from bodyplan.commands.curation import _combination_line

    rows = [{"source": "groups2026", "row_id": r} for r in ("males", "females")]
    line = _combination_line({"compartment": "brain", "parameter": "volume", "value": 0.015, "unit": "L per kg",
                              "se": None, "sd": None, "low": None, "high": None, "method": "mean of study values",
                              "n_studies": 2, "sources": ["groups2026", "density2026"], "rows_used": rows})
    assert "2 independent groups from 1 source;" in line
