"""Validation in layers: shape (from the descriptors), then integrity across files.

Checks are vectorised over whole columns; only failing rows produce findings, so a
clean tree of many thousand rows costs a few array operations per rule.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from ..schema import descriptors
from ..units import UnitError, conversion, forms, parse_unit
from .findings import Findings
from .read import BIB_FILE, CuratedTree


def _report(frame: pd.DataFrame, mask, column: str, message, findings: Findings, skip: set, *, code: str) -> None:
    """One finding per row where ``mask`` holds; ``message`` may be a function of the row's cell."""
    bad = frame.loc[np.asarray(mask, dtype=bool)]
    for file, line, cell in zip(bad["_file"], bad["_line"], bad[column] if column in bad else [""] * len(bad)):
        if (file, column) in skip:
            continue
        findings.error(file, line, column, message(cell) if callable(message) else message, code=code)


def numeric(frame: pd.DataFrame, column: str) -> pd.Series:
    number = pd.to_numeric(frame[column].replace("", np.nan), errors="coerce")
    return number.where(np.isfinite(number))  # 'inf' or '1e400' is reported by check_shape, not used


def check_shape(frame: pd.DataFrame, descriptor: dict, findings: Findings, skip: set) -> None:
    for spec in descriptor["fields"]:
        name = spec["name"]
        col = frame[name]
        empty = col == ""
        rules = spec.get("constraints", {})
        if rules.get("required"):
            _report(frame, empty, name, f"is empty; {spec['description'][0].lower()}{spec['description'][1:]}",
                    findings, skip, code="V201")
        if "enum" in rules:
            allowed = rules["enum"]
            _report(frame, ~empty & ~col.isin(allowed), name,
                    lambda v, a=allowed: f"{v!r} is not one of: {', '.join(a)}", findings, skip, code="V202")
        if "pattern" in rules:
            ok = col.str.fullmatch(rules["pattern"])
            _report(frame, ~empty & ~ok.astype(bool), name,
                    lambda v, s=spec: f"{v!r} is not well formed; {s['description'][0].lower()}"
                                      f"{s['description'][1:]}", findings, skip, code="V203")
        if spec["type"] in ("number", "integer"):
            as_number = pd.to_numeric(col.where(~empty), errors="coerce")
            _report(frame, ~empty & ~np.isfinite(as_number), name,
                    lambda v: f"{v!r} is not a number; write digits with '.' as decimal point", findings, skip,
                    code="V204")
            if spec["type"] == "integer":
                fractional = as_number.notna() & (as_number != np.floor(as_number))
                _report(frame, fractional, name, lambda v: f"{v!r} is not a whole number", findings, skip, code="V205")
            if "minimum" in rules:
                _report(frame, as_number < rules["minimum"], name,
                        lambda v, m=rules["minimum"]: f"{v} is below the minimum {m}", findings, skip, code="V206")


def check_unique(frame: pd.DataFrame, keys: list[str], findings: Findings, what: str) -> None:
    dup = frame.duplicated(keys + (["_file"] if "_file" in frame and what == "id" else []), keep="first")
    _report(frame, dup, keys[0], lambda v: f"{what} {v!r} appears more than once; make each {what} unique",
            findings, set(), code="V207")


def check_foreign(frame: pd.DataFrame, column: str, known: set, vocab: str, findings: Findings,
                  skip: set) -> None:
    col = frame[column]
    _report(frame, (col != "") & ~col.isin(known), column,
            lambda v: f"unknown {column} {v!r}; use an id from vocab/{vocab}.csv or add it there", findings, skip,
            code="V208")


def check_vocab(tree: CuratedTree, findings: Findings) -> None:
    for name, frame in tree.vocab.items():
        descriptor = descriptors.VOCABULARIES[name]
        check_shape(frame, descriptor, findings, tree.missing_columns)
        check_unique(frame, ["id"], findings, "id")
    if "compartments" in tree.vocab:
        comps = tree.vocab["compartments"]
        check_foreign(comps, "part_of", set(comps["id"]), "compartments", findings, tree.missing_columns)
    if "quantities" in tree.vocab:
        for row in tree.vocab["quantities"].to_dict("records"):
            try:
                forms(row["canonical_unit"], row["per"])
                for _low, _high, unit in plausible_ranges(row["plausible_range"]):
                    conversion(unit, row["canonical_unit"], row["per"])
            except (UnitError, KeyError, ValueError) as exc:
                findings.error(row["_file"], row["_line"], "canonical_unit", f"{exc}", code="V209")
            if row["kind"] == "fraction" and row["canonical_unit"].strip() != "1":
                findings.error(row["_file"], row["_line"], "canonical_unit",
                               "a fraction's canonical unit must be '1'; use kind 'ratio' for other units", code="V210")


RANGE = re.compile(r"\s*([0-9.eE+\-]+)\s*\.\.\s*([0-9.eE+\-]+)\s+(.+?)\s*$")


def plausible_ranges(text: str) -> list[tuple[float, float, str]]:
    """Parse 'LOW..HIGH UNIT; LOW..HIGH UNIT'."""
    result = []
    for part in filter(None, (p.strip() for p in (text or "").split(";"))):
        m = RANGE.match(part)
        if not m:
            raise ValueError(f"plausible range {part!r} is not 'LOW..HIGH UNIT'")
        result.append((float(m.group(1)), float(m.group(2)), m.group(3)))
    return result


def check_sources(tree: CuratedTree, findings: Findings) -> set[str]:
    keys = set()
    for src in tree.sources:
        if not re.fullmatch(r"[a-z0-9_]+", src["key"]):
            findings.error(BIB_FILE, src["line"], "key", f"citation key {src['key']!r} must be lowercase "
                           "letters, digits and _ (it names the values file)", code="V211")
        for required in ("title", "year"):
            if required not in src["fields"]:
                findings.error(BIB_FILE, src["line"], required, f"entry {src['key']!r} has no {required}; add it", code="V212")
        keys.add(src["key"])
    return keys


def check_values(tree: CuratedTree, source_keys: set[str], findings: Findings) -> pd.DataFrame:
    """Shape and integrity of every value row; returns the rows with unit conversion attached."""
    frame = tree.values
    skip = tree.missing_columns
    check_shape(frame, descriptors.VALUES, findings, skip)
    check_unique(frame, ["id"], findings, "id")
    for file, stem in frame[["_file", "_source"]].drop_duplicates().itertuples(index=False):
        if stem not in source_keys:
            findings.error(file, 1, "file", f"no BibTeX entry {stem!r} in {BIB_FILE}; the file name must be "
                           "the source's citation key", code="V213")
    vocab_ids = {name: set(v["id"]) for name, v in tree.vocab.items()}
    for column, vocab in (("species", "species"), ("life_stage", "life_stages"),
                          ("compartment", "compartments"), ("quantity", "quantities")):
        check_foreign(frame, column, vocab_ids.get(vocab, set()), vocab, findings, skip)

    value, spread, low, high, n = (numeric(frame, c) for c in ("value", "spread", "low", "high", "n"))
    empty_value = frame["value"] == ""
    reason = frame["missing_reason"] != ""
    _report(frame, empty_value & ~reason, "value",
            "is empty without a missing_reason; give the value, or say why the source lacks it", findings, skip, code="V214")
    _report(frame, ~empty_value & reason, "missing_reason",
            "is given but the value is not empty; clear one of them", findings, skip, code="V215")
    _report(frame, value < 0, "value", lambda v: f"{v} is negative; physiological amounts are never below 0",
            findings, skip, code="V216")

    kind = frame["uncertainty"]
    needs_spread = kind.isin(["sd", "se", "cv"])
    needs_bounds = kind.isin(["ci95", "range"])
    _report(frame, needs_spread & spread.isna(), "spread",
            lambda v: "is empty but the uncertainty kind needs it; give the sd, se or cv", findings, skip, code="V217")
    _report(frame, needs_bounds & (low.isna() | high.isna()), "low",
            "low and high are needed for a ci95 or range; give both bounds", findings, skip, code="V218")
    _report(frame, (kind == "none") & (spread.notna() | low.notna() | high.notna()), "uncertainty",
            "is 'none' but spread or bounds are filled; name the kind (sd, se, cv, ci95, range)", findings, skip,
            code="V219")
    _report(frame, ~needs_spread & ~(kind == "none") & spread.notna(), "spread",
            "is only used with sd, se or cv; use low and high for a range or ci95", findings, skip,
            code="V220")
    _report(frame, (low > value) | (value > high), "value",
            lambda v: f"{v} lies outside its own low..high bounds; check the bounds", findings, skip, code="V221")
    _report(frame, low > high, "low", "is above high; swap the bounds", findings, skip, code="V222")

    frame = frame.assign(_value=value, _spread=spread, _low=low, _high=high, _n=n)
    frame = attach_conversion(frame, tree, findings, skip)
    frac = frame["_kind"] == "fraction"
    _report(frame, frac & (frame["_value_canonical"] > 1), "value",
            lambda v: f"{v} is a fraction above 1 (above 100 %); check the unit ('%' or '1')", findings, skip, code="V223")
    frame = attach_measures(frame, findings, skip)
    return frame


def attach_conversion(frame: pd.DataFrame, tree: CuratedTree, findings: Findings, skip: set) -> pd.DataFrame:
    """Convert to canonical units once per (quantity, unit) group, with numpy."""
    quantities = tree.vocab.get("quantities")
    qinfo = {} if quantities is None else quantities.set_index("id")[["canonical_unit", "per", "kind"]].to_dict("index")
    factor = np.full(len(frame), np.nan)
    canonical = np.empty(len(frame), dtype=object)
    normalisation = np.empty(len(frame), dtype=object)
    kind = np.empty(len(frame), dtype=object)
    for (quantity, unit), index in frame.groupby(["quantity", "unit"], sort=False).indices.items():
        info = qinfo.get(quantity.strip())
        if info is None or not unit.strip():
            continue  # unknown quantity or empty unit is reported already
        try:
            form, f = conversion(unit.strip(), info["canonical_unit"], info["per"])
        except UnitError as exc:
            _report(frame.iloc[index], np.ones(len(index)), "unit", str(exc), findings, skip, code="V224")
            continue
        factor[index] = f
        canonical[index] = form.canonical_unit
        normalisation[index] = form.normalisation
        kind[index] = info["kind"]
    return frame.assign(
        _factor=factor, _unit_canonical=canonical, _normalisation=normalisation, _kind=kind,
        _value_canonical=frame["_value"].to_numpy() * factor,
        _low_canonical=frame["_low"].to_numpy() * factor,
        _high_canonical=frame["_high"].to_numpy() * factor,
    )


def _measure(frame, column, dimension, unit, findings, skip, what) -> np.ndarray:
    """Parse 'number unit' cells of one column per distinct text, into ``unit``."""
    out = np.full(len(frame), np.nan)
    for text, index in frame.groupby(column, sort=False).indices.items():
        if not text.strip():
            continue
        try:
            q = parse_unit(text)
            if q.dimensionality != parse_unit(unit).dimensionality:
                raise UnitError(f"{text!r} is not {what}; write e.g. {dimension}")
            amount = float(q.to(unit).magnitude)
            if not np.isfinite(amount):
                raise UnitError(f"{text!r} is not a finite amount; write e.g. {dimension}")
            out[index] = amount
        except (UnitError, Exception) as exc:  # pint's own errors included
            message = str(exc) if isinstance(exc, UnitError) else f"cannot read {text!r}; write e.g. {dimension}"
            _report(frame.iloc[index], np.ones(len(index)), column, message, findings, skip, code="V225")
    return out


def attach_measures(frame: pd.DataFrame, findings: Findings, skip: set) -> pd.DataFrame:
    body_kg = _measure(frame, "body_mass", "'0.25 kg'", "kg", findings, skip, "a mass")
    _report(frame, body_kg <= 0, "body_mass", lambda v: f"{v!r} is not positive; give the subjects' mass",
            findings, skip, code="V225")
    age_days = _measure(frame, "age", "'10 year'", "day", findings, skip, "an age")
    # sd in canonical units: from sd, se·√n, cv·value, or a ci95 of a mean (width / 3.92 · √n)
    kind = frame["uncertainty"].to_numpy()
    f, spread, n = frame["_factor"].to_numpy(), frame["_spread"].to_numpy(), frame["_n"].to_numpy()
    with np.errstate(invalid="ignore", over="ignore"):  # malformed n or spreads are reported, not used
        sd = np.select(
            [kind == "sd", kind == "se", kind == "cv", kind == "ci95"],
            [spread * f, spread * np.sqrt(n) * f, frame["_value_canonical"].to_numpy() * spread / 100,
             (frame["_high_canonical"].to_numpy() - frame["_low_canonical"].to_numpy()) / 3.92 * np.sqrt(n)],
            default=np.nan,
        )
    return frame.assign(_body_mass_kg=body_kg, _age_days=age_days, _sd_canonical=sd)


def validate(tree: CuratedTree, findings: Findings) -> pd.DataFrame:
    check_vocab(tree, findings)
    keys = check_sources(tree, findings)
    return check_values(tree, keys, findings)
