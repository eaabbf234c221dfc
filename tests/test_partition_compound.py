"""Compound input files: every problem reported once, as file:line: column: message (numbers invented for tests)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.api.compound import CompoundError, Compounds, compounds_from, read_compounds

GOOD_TOML = """\
[[compound]]
name = "base_a"
log_p = 3.0
pka_base = 9.5
fu_plasma = 0.2
blood_plasma_ratio = 0.9

[[compound]]
name = "zwit_b"
log_p = 1.0
pka_acid = [3.1]
pka_base = 8.2
fu_plasma = "40 %"
blood_plasma_ratio = 1.1
"""


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_reads_toml(tmp_path):
    got = read_compounds(write(tmp_path, "c.toml", GOOD_TOML))
    assert [c.name for c in got] == ["base_a", "zwit_b"]
    assert got[1].fu_plasma == pytest.approx(0.4)  # '40 %' through pint
    assert got[1].kind == "zwitterion" and got[0].kind == "base"
    arrays = Compounds.of(got)
    assert arrays.base_high.tolist() == [9.5, 8.2]
    assert math.isnan(arrays.acid_low[0]) and arrays.acid_low[1] == 3.1


def test_reads_csv_with_diprotic(tmp_path):
    text = ("name,log_p,log_p_oil,pka_acid,pka_base,fu_plasma,blood_plasma_ratio\n"
            "diacid,1.5,,2.1;4.5,,0.05,0.6\n"
            "dibase,2.5,1.2,,9.8 8.1,0.7,1.3\n")
    got = read_compounds(write(tmp_path, "c.csv", text))
    arrays = Compounds.of(got)
    assert arrays.acid_low[0] == 2.1 and arrays.acid_high[0] == 4.5
    assert arrays.base_high[1] == 9.8 and arrays.base_low[1] == 8.1
    assert got[1].log_p_oil == 1.2


BAD_TOML = """\
[[compound]]
name = "a"
log_p = 1e3
pka_base = [9.5, 8.0, 3.0]
fu_plasma = "13 mg"
blood_plasma_ratio = 0

[[compound]]
name = "a"
logp = 2
fu_plasma = 1.5
pka_acid = "4.2 mmol"
"""


def test_every_toml_problem_in_one_run(tmp_path):
    path = write(tmp_path, "bad.toml", BAD_TOML)
    with pytest.raises(CompoundError) as err:
        read_compounds(path)
    p = err.value.problems
    expected_starts = [
        f"{path}:3: log_p: 1000 is outside [-10, 15]",
        f"{path}:4: pka_base: 3 pKa values given",
        f"{path}:5: fu_plasma: '13 mg' has the unit mg",
        f"{path}:6: blood_plasma_ratio: 0 is outside (0, 50]",
        f"{path}:8: log_p: missing",
        f"{path}:8: blood_plasma_ratio: missing",
        f"{path}:9: name: 'a' is given twice",
        f"{path}:10: logp: unknown field",
        f"{path}:11: fu_plasma: 1.5 is outside (0, 1]",
        f"{path}:12: pka_acid:",
    ]
    assert len(p) == len(expected_starts), p
    for line, start in zip(p, expected_starts):
        assert line.startswith(start), (line, start)


def test_csv_problems_name_row_and_column(tmp_path):
    text = ("name,log_p,pka_acid,pka_base,fu_plasma,blood_plasma_ratio\n"
            "ok,1,,,0.5,1\n"
            "badfu,1,,,13,1\n"
            ",abc,,,0.5,1\n"
            "toomany,1,2;3,9,0.5,1\n"
            "extra,1,,,0.5,1,7\n")
    path = write(tmp_path, "c.csv", text)
    with pytest.raises(CompoundError) as err:
        read_compounds(path)
    p = err.value.problems
    assert p[0].startswith(f"{path}:3: fu_plasma: 13 is outside (0, 1]; a percentage needs its unit")
    assert any(x.startswith(f"{path}:4: name: missing") for x in p)
    assert any(x.startswith(f"{path}:4: log_p: expected a number, got 'abc'") for x in p)
    assert any(x.startswith(f"{path}:5: pka_acid: 3 pKa values given") for x in p)
    assert any(x.startswith(f"{path}:6: row: 7 cells for 6 columns") for x in p)


@pytest.mark.parametrize("text, message", [
    ("[[compound]\nname = 1", ":1: toml: not valid TOML"),
    ("title = 'x'\n", ":1: title: unknown top-level key"),
])
def test_toml_shape_problems(tmp_path, text, message):
    with pytest.raises(CompoundError) as err:
        read_compounds(write(tmp_path, "c.toml", text))
    assert message in str(err.value)


def test_other_extension_and_missing_file(tmp_path):
    with pytest.raises(CompoundError, match="give a .toml file"):
        read_compounds(write(tmp_path, "c.json", "{}"))
    with pytest.raises(FileNotFoundError):
        read_compounds(tmp_path / "nope.toml")


def test_api_dicts_are_checked_like_files():
    with pytest.raises(CompoundError) as err:
        compounds_from([{"name": "x", "log_p": 2, "fu_plasma": 0, "blood_plasma_ratio": 1}])
    assert err.value.problems == ["<compound 1>:1: fu_plasma: 0 is outside (0, 1]"]


@settings(max_examples=80, deadline=None)
@given(fu=st.floats(0.0001, 1.0), logp=st.floats(-9.9, 14.9), pkas=st.lists(st.floats(-4.9, 19.9), max_size=2),
       bp=st.floats(0.01, 49.0), acid_first=st.booleans())
def test_valid_toml_round_trips(tmp_path_factory, fu, logp, pkas, bp, acid_first):
    acid, base = (pkas[:1], pkas[1:]) if acid_first else (pkas[1:], pkas[:1])
    text = (f"[[compound]]\nname = \"c\"\nlog_p = {logp!r}\nfu_plasma = {fu!r}\nblood_plasma_ratio = {bp!r}\n"
            f"pka_acid = {acid!r}\npka_base = {base!r}\n")
    path = tmp_path_factory.mktemp("rt") / "c.toml"
    path.write_text(text)
    (c,) = read_compounds(path)
    assert (c.log_p, c.fu_plasma, c.blood_plasma_ratio) == (logp, fu, bp)
    assert c.pka_acid == tuple(acid) and c.pka_base == tuple(base)


@settings(max_examples=80, deadline=None)
@given(fu=st.one_of(st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=8)))
def test_out_of_range_or_garbage_fu_is_one_problem(fu):
    record = {"name": "x", "log_p": 1.0, "fu_plasma": fu, "blood_plasma_ratio": 1.0}
    try:
        (c,) = compounds_from(record)
    except CompoundError as err:
        assert len(err.problems) == 1 and err.problems[0].startswith("<compound 1>:1: fu_plasma: ")
    else:
        assert 0 < c.fu_plasma <= 1
