"""Compound inputs for tissue:plasma partition coefficients: read, check, hold as arrays.

A compound is a name, its octanol:water log P (of the un-ionised form), optionally its
vegetable-oil:water log P, up to two pKa values each marked acid or base, its fraction
unbound in plasma and its blood:plasma concentration ratio. Files are TOML
(``[[compound]]`` tables) or CSV (one row per compound); every problem in a file is
reported at once as ``file:line: column: message``.
"""

from __future__ import annotations

import csv
import io
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import BodyplanError

# field → (lowest, highest) accepted; outside these the number is surely a typo or the wrong unit
RANGES = {
    "log_p": (-10.0, 15.0),
    "log_p_oil": (-12.0, 15.0),
    "pka": (-5.0, 20.0),
    "fu_plasma": (0.0, 1.0),           # lower bound excluded
    "blood_plasma_ratio": (0.0, 50.0),  # lower bound excluded
}
FIELDS = ["name", "log_p", "log_p_oil", "pka_acid", "pka_base", "fu_plasma", "blood_plasma_ratio"]
REQUIRED = ["name", "log_p", "fu_plasma", "blood_plasma_ratio"]
HELP = {
    "name": "a unique name",
    "log_p": "log10 octanol:water partition coefficient of the un-ionised form, e.g. 3.1",
    "log_p_oil": "log10 vegetable-oil:water partition coefficient of the un-ionised form (optional)",
    "pka_acid": "acidic pKa value(s), at most two pKa values in all, e.g. 4.2 or [2.1, 9.8]",
    "pka_base": "basic pKa value(s) (of the conjugate acid), e.g. 9.5",
    "fu_plasma": "fraction unbound in plasma, a number in (0, 1] or a percentage such as '13 %'",
    "blood_plasma_ratio": "blood:plasma concentration ratio, e.g. 0.8",
}
MAX_PKA = 2  # monoprotic and diprotic compounds


class CompoundError(BodyplanError, ValueError):
    """Compound inputs with problems; ``problems`` lists every one as file:line: column: message."""

    def __init__(self, problems: list[str]):
        self.problems = problems
        super().__init__(f"{len(problems)} problem(s) in the compound input:\n" + "\n".join(problems))


@dataclass(frozen=True)
class Compound:
    name: str
    log_p: float
    fu_plasma: float
    blood_plasma_ratio: float
    pka_acid: tuple[float, ...] = ()
    pka_base: tuple[float, ...] = ()
    log_p_oil: float | None = None

    @property
    def kind(self) -> str:
        """neutral, acid, base or zwitterion (one acidic and one basic group)."""
        if self.pka_acid and self.pka_base:
            return "zwitterion"
        return "acid" if self.pka_acid else "base" if self.pka_base else "neutral"

    def as_dict(self) -> dict:
        return {"name": self.name, "log_p": self.log_p, "log_p_oil": self.log_p_oil,
                "pka_acid": list(self.pka_acid), "pka_base": list(self.pka_base), "kind": self.kind,
                "fu_plasma": self.fu_plasma, "blood_plasma_ratio": self.blood_plasma_ratio}


@dataclass
class Compounds:
    """Compounds as numpy arrays (one element per compound; NaN where a pKa is absent)."""

    names: list[str]
    log_p: np.ndarray
    log_p_oil: np.ndarray  # NaN: estimate from log P (see kp_methods.oil_log_p)
    acid_low: np.ndarray   # the lower acidic pKa (first dissociation)
    acid_high: np.ndarray
    base_high: np.ndarray  # the higher basic pKa (first protonation)
    base_low: np.ndarray
    fu_plasma: np.ndarray
    blood_plasma_ratio: np.ndarray
    records: list[Compound] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.names)

    @classmethod
    def of(cls, compounds: list[Compound]) -> Compounds:
        def col(get):
            return np.array([get(c) for c in compounds], dtype=float)

        def nth(values, i, high):
            vals = sorted(values, reverse=high)
            return vals[i] if len(vals) > i else math.nan

        return cls(
            names=[c.name for c in compounds],
            log_p=col(lambda c: c.log_p),
            log_p_oil=col(lambda c: math.nan if c.log_p_oil is None else c.log_p_oil),
            acid_low=col(lambda c: nth(c.pka_acid, 0, False)),
            acid_high=col(lambda c: nth(c.pka_acid, 1, False)),
            base_high=col(lambda c: nth(c.pka_base, 0, True)),
            base_low=col(lambda c: nth(c.pka_base, 1, True)),
            fu_plasma=col(lambda c: c.fu_plasma),
            blood_plasma_ratio=col(lambda c: c.blood_plasma_ratio),
            records=list(compounds),
        )


# ---- checking one value -------------------------------------------------------------------------

def _number(raw, key: str) -> tuple[float | None, str | None]:
    """A plain number, or for fu_plasma a dimensionless quantity string such as '13 %'."""
    if isinstance(raw, bool):
        return None, f"expected a number, got {raw!r}"
    if isinstance(raw, (int, float)):
        value = float(raw)
    elif isinstance(raw, str):
        text = raw.strip()
        try:
            value = float(text)
        except ValueError:
            from bodyplan.units import ureg

            try:
                q = ureg.Quantity(text)
            except Exception:  # pint raises several kinds for unparsable text
                return None, f"expected a number, got {raw!r}"
            if not q.dimensionless:
                return None, (f"{raw!r} has the unit {q.units:~}; {key} is a dimensionless ratio "
                              "(give a plain number, or a percentage such as '13 %')")
            value = float(q.to("dimensionless").magnitude)
    else:
        return None, f"expected a number, got {type(raw).__name__} {raw!r}"
    if not math.isfinite(value):
        return None, f"expected a finite number, got {raw!r}"
    return value, None


def _in_range(key: str, value: float) -> str | None:
    low, high = RANGES["pka" if key.startswith("pka") else key]
    open_low = key in ("fu_plasma", "blood_plasma_ratio")
    if value < low or value > high or (open_low and value <= low):
        bracket = "(" if open_low else "["
        hint = ""
        if key == "fu_plasma" and 1 < value <= 100:
            hint = "; a percentage needs its unit, e.g. '13 %'"
        elif key == "log_p" and value > high:
            hint = "; give log10 of the partition coefficient, not the coefficient itself"
        return f"{value:g} is outside {bracket}{low:g}, {high:g}]{hint}"
    return None


def _pkas(raw) -> list:
    if raw is None or raw == "":
        return []
    if isinstance(raw, str):
        return [p for p in re.split(r"[;\s]+", raw.strip()) if p]
    return list(raw) if isinstance(raw, (list, tuple)) else [raw]


def check_record(record: dict, where, seen: set[str]) -> tuple[Compound | None, list[str]]:
    """One compound from a mapping of field → raw value; ``where(key)`` gives 'file:line' for a field."""
    problems: list[str] = []

    def bad(key, message):
        problems.append(f"{where(key)}: {key}: {message}")

    for key in record:
        if key not in FIELDS:
            close = [f for f in FIELDS if f.split("_")[0] in key or key in f]
            bad(key, f"unknown field; use one of {', '.join(FIELDS)}" +
                (f" (did you mean {close[0]}?)" if close else ""))
    for key in REQUIRED:
        if record.get(key) in (None, ""):
            bad(key, f"missing; give {HELP[key]}")
    name = record.get("name")
    if name not in (None, ""):
        if not isinstance(name, str) or not name.strip():
            bad("name", f"expected text, got {name!r}")
        elif name.strip() in seen:
            bad("name", f"{name.strip()!r} is given twice; names must be unique")
    values = {}
    for key in ("log_p", "log_p_oil", "fu_plasma", "blood_plasma_ratio"):
        raw = record.get(key)
        if raw in (None, ""):
            continue
        value, error = _number(raw, key)
        if error is None and key in ("log_p", "log_p_oil") and isinstance(raw, str) and "%" in raw:
            error = f"{raw!r}: {key} is a log10 value without unit"
        error = error or _in_range(key, value)
        if error:
            bad(key, error)
        else:
            values[key] = value
    pkas = {}
    for key in ("pka_acid", "pka_base"):
        got = []
        for raw in _pkas(record.get(key)):
            value, error = _number(raw, key)
            if error is None and isinstance(raw, str) and not re.fullmatch(r"[-+0-9.eE]+", raw.strip()):
                error = f"{raw!r}: a pKa is a plain number without unit"
            error = error or _in_range(key, value)
            if error:
                bad(key, error)
            else:
                got.append(value)
        pkas[key] = tuple(got)
    if len(pkas["pka_acid"]) + len(pkas["pka_base"]) > MAX_PKA:
        bad("pka_acid" if len(pkas["pka_acid"]) > 1 else "pka_base",
            f"{len(pkas['pka_acid']) + len(pkas['pka_base'])} pKa values given; at most {MAX_PKA} "
            "(monoprotic or diprotic compounds) are supported; keep the two nearest physiological pH")
    if isinstance(name, str) and name.strip():
        seen.add(name.strip())
    if problems:
        return None, problems
    return Compound(name.strip(), values["log_p"], values["fu_plasma"], values["blood_plasma_ratio"],
                    pkas["pka_acid"], pkas["pka_base"], values.get("log_p_oil")), []


# ---- files ---------------------------------------------------------------------------------------

def _toml_lines(text: str) -> list[tuple[int, dict[str, int]]]:
    """For each [[compound]] table: its header line and the line of each key (for messages)."""
    blocks: list[tuple[int, dict[str, int]]] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if re.match(r"^\[\[\s*compound\s*\]\]", stripped):
            blocks.append((number, {}))
        elif blocks and (m := re.match(r"^([A-Za-z_][A-Za-z0-9_]*)\s*=", stripped)):
            blocks[-1][1].setdefault(m.group(1), number)
    return blocks


def read_compounds(path: str | Path) -> list[Compound]:
    """Compounds from a .toml or .csv file; raises CompoundError listing every problem."""
    path = Path(path)
    if not path.exists():
        raise FileNotFoundError(f"compound file {path} does not exist")
    text = path.read_text(encoding="utf-8-sig")
    if path.suffix.lower() == ".toml":
        return _from_toml(text, str(path))
    if path.suffix.lower() == ".csv":
        return _from_csv(text, str(path))
    raise CompoundError([(f"{path}:1: file: give a .toml file ([[compound]] tables) or a .csv file "
                          f"with the columns {', '.join(FIELDS)}")])


def _from_toml(text: str, name: str) -> list[Compound]:
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        line = re.search(r"line (\d+)", str(exc))
        raise CompoundError([f"{name}:{line.group(1) if line else 1}: toml: not valid TOML ({exc})"]) from None
    tables = data.get("compound")
    other = [k for k in data if k != "compound"]
    problems = [f"{name}:1: {k}: unknown top-level key; put each compound in a [[compound]] table" for k in other]
    if not isinstance(tables, list) or not tables:
        raise CompoundError(problems + [(f"{name}:1: compound: no [[compound]] table; add one per compound "
                                         f"with {', '.join(REQUIRED)}")])
    lines = _toml_lines(text)
    seen: set[str] = set()
    compounds = []
    for i, record in enumerate(tables):
        header, keys = lines[i] if i < len(lines) else (1, {})
        compound, found = check_record(record, lambda key, k=keys, h=header: f"{name}:{k.get(key, h)}", seen)
        problems += found
        if compound:
            compounds.append(compound)
    if problems:
        raise CompoundError(sorted(problems, key=_line_of))
    return compounds


def _line_of(problem: str) -> int:
    m = re.match(r"^.*?:(\d+): ", problem)
    return int(m.group(1)) if m else 0


def _from_csv(text: str, name: str) -> list[Compound]:
    reader = csv.DictReader(io.StringIO(text))
    header = [h.strip() for h in (reader.fieldnames or [])]
    problems = []
    if not header:
        raise CompoundError([f"{name}:1: header: empty file; the header is {','.join(FIELDS)}"])
    reader.fieldnames = header
    seen: set[str] = set()
    compounds = []
    for number, row in enumerate(reader, start=2):
        if None in row:
            problems.append(f"{name}:{number}: row: {len(header) + len(row[None])} cells for {len(header)} columns")
            continue
        record = {k: (v.strip() if isinstance(v, str) else v) for k, v in row.items() if v not in (None, "")}
        if not record:
            continue
        for key in REQUIRED:
            record.setdefault(key, "")
        compound, found = check_record(record, lambda key, n=number: f"{name}:{n}", seen)
        problems += found
        if compound:
            compounds.append(compound)
    if not compounds and not problems:
        problems.append(f"{name}:2: row: no compounds; add one row per compound")
    if problems:
        raise CompoundError(problems)
    return compounds


def compounds_from(items) -> list[Compound]:
    """Compound objects, dicts of fields, or a path; dicts are checked like file rows."""
    if isinstance(items, (str, Path)):
        return read_compounds(items)
    if isinstance(items, (Compound, dict)):
        items = [items]
    problems, out, seen = [], [], set()
    for i, item in enumerate(items, start=1):
        if isinstance(item, Compound):
            item = item.as_dict()
            item.pop("kind")
            item = {k: v for k, v in item.items() if v not in (None, [])}
        compound, found = check_record(dict(item), lambda key, i=i: f"<compound {i}>:{i}", seen)
        problems += found
        if compound:
            out.append(compound)
    if problems:
        raise CompoundError(problems)
    return out
