"""Fuzzing the two parsers that meet raw text: the quantity grammar and the CSV reader.

The property of both: a located error or the exact result, never silence. CI runs a few hundred
examples; set BODYPLAN_FUZZ_EXAMPLES=10000 for a long run (the number of examples of each test).
"""

from __future__ import annotations

import atexit
import csv
import io
import math
import os
import re
import shutil
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bodyplan.ingest.findings import CODES, Findings
from bodyplan.ingest.read import read_table
from bodyplan.schema import descriptors
from bodyplan.units import UnitError, to_quantity

EXAMPLES = int(os.environ.get("BODYPLAN_FUZZ_EXAMPLES", "300"))
FUZZ = settings(max_examples=EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# ---- the quantity grammar ----------------------------------------------------------------------------
PIECES = ["1", "12", "0.5", ".5", "4,5", "1e3", "1e308", "1e400", "-", "+", "±", "+/-", " ", "  ", "kg", "g", "lb",
          "mL", "min", "/", "*", "**", "^", "9", "2", "-1", "(", ")", "%", "nan", "inf", "e", "\U0001f415", "x",
          "m", "\t", "100 g", "1.73 m^2"]
UNITS = ["kg", "g", "lb", "mg", "oz"]  # masses in the registry; the factors come from pint itself


@FUZZ
@given(st.lists(st.sampled_from(PIECES), min_size=0, max_size=10).map("".join))
def test_quantity_text_is_read_exactly_or_refused(text):
    try:
        q = to_quantity(text)
    except UnitError as exc:
        assert str(exc)  # the error names the text and the fix
        return
    # accepted: the text began with an unsigned decimal number, the unit came from the registry, and
    # the magnitude is exactly that number, finite and not negative
    m = re.match(r"\s*((?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)", text)
    assert m, text
    number = float(m.group(1))
    unit = re.sub(r"^\s*(?:±|\+/-)\s*[\d.]+(?:[eE][+-]?\d+)?", "", text[m.end():])  # the optional spread
    assert q.magnitude == number and math.isfinite(q.magnitude) and q.magnitude >= 0
    # the only other numbers are exponents and the scale opening a bracket after '/' (mL/min/(100 g))
    assert not re.search(r"\d", re.sub(r"/\s*\(\s*[\d.]+(?:[eE][+-]?\d+)?|(?:\^|\*\*)\s*-?\d+", "", unit)), text
    assert "," not in text and "nan" not in text.lower()
    assert not q.dimensionless


@FUZZ
@given(st.floats(min_value=0, max_value=1e12, allow_nan=False), st.sampled_from(UNITS),
       st.sampled_from([" ", "  ", ""]))
def test_well_formed_mass_round_trips(number, unit, gap):
    q = to_quantity(f"{number!r}{gap}{unit}")
    assert q.to(unit).magnitude == pytest.approx(number, rel=1e-12, abs=0)


# ---- the CSV reader ----------------------------------------------------------------------------------
COLUMNS = descriptors.names(descriptors.VALUES)
CELL = st.text(st.sampled_from(list("ab 1.,\"\r\n\t;é") + ["\u00a0", "\U0001f415"]), max_size=6)
DIR = Path(tempfile.mkdtemp(prefix="bodyplan-fuzz-"))
atexit.register(shutil.rmtree, DIR, True)  # one scratch folder for every example, removed at exit


def _written(rows, terminator, encoding) -> bytes:
    out = io.StringIO(newline="")
    writer = csv.writer(out, lineterminator=terminator)
    writer.writerow(COLUMNS)
    writer.writerows(rows)
    return out.getvalue().encode(encoding)


def _as_read(cell: str) -> str:
    """A cell as the reader gives it back: line breaks inside quotes become LF (as lint writes them), trimmed."""
    return cell.replace("\r\n", "\n").replace("\r", "\n").strip()


@st.composite
def csv_files(draw):
    n = draw(st.integers(0, 6))
    rows = [[f"r{i}"] + [draw(CELL) for _ in COLUMNS[1:]] for i in range(n)]
    terminator = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    encoding = draw(st.sampled_from(["utf-8", "utf-8", "utf-8-sig", "utf-16"]))
    stray = draw(st.none() | st.tuples(st.integers(0, max(n - 1, 0)), st.integers(1, len(COLUMNS) - 1)))
    return rows, terminator, encoding, stray


@FUZZ
@given(csv_files())
def test_csv_reader_gives_exact_rows_or_a_located_error(generated):
    rows, terminator, encoding, stray = generated
    raw = _written(rows, terminator, encoding)
    if stray is not None and rows:  # a quote where none belongs: after the comma before a non-id cell
        row, column = stray
        lines = raw.decode(encoding).split(terminator)
        start = next(i for i, line in enumerate(lines) if line.startswith(f"r{row},"))
        cut = lines[start].split(",")
        at = min(column, len(cut) - 1)
        if at > 0:
            cut[at] = '"' + cut[at]
            lines[start] = ",".join(cut)
        raw = terminator.join(lines).encode(encoding)
    path = DIR / "values.csv"
    path.write_bytes(raw)
    findings = Findings()
    frame = read_table(path, "values/x.csv", descriptors.VALUES, findings, set())
    if findings.items:  # located: a real line of the file, and a registered code
        total = raw.count(b"\n") + raw.count(b"\r") + 1
        for f in findings.items:
            assert f.file == "values/x.csv" and 1 <= f.line <= total and f.code in CODES, str(f)
        return
    assert encoding != "utf-16"  # never read as if it were UTF-8
    ids = frame["id"].tolist()
    assert ids == [f"r{i}" for i in range(len(rows))]  # no row swallowed, none invented
    if stray is None:
        assert frame[COLUMNS].values.tolist() == [[_as_read(c) for c in r] for r in rows]


PLAIN_CELL = st.text(st.sampled_from(list("ab1. _;#%/-")), max_size=5).map(str.strip)


@FUZZ
@given(st.lists(st.lists(PLAIN_CELL, min_size=3, max_size=3), max_size=6), st.booleans())
def test_fast_reader_agrees_with_the_strict_reader(rows, final_newline):
    """Files with nothing to interpret go through pandas' C reader: the same rows as the record reader."""
    from bodyplan.ingest.read import _plain_frame, read_records

    text = "\n".join(",".join(r) for r in [["x", "y", "z"], *rows]) + ("\n" if final_newline else "")
    records, _ = read_records(text)
    fast = _plain_frame(text)
    if fast is None:  # refused: the strict reader decides (e.g. a blank line)
        return
    header, frame = fast
    assert [header, *frame.values.tolist()] == records
