"""Validation in layers: shape (from the descriptors), then integrity across files.

Checks are vectorised over whole columns; only failing rows produce findings, so a
clean tree of many thousand rows costs a few array operations per rule.
"""

from __future__ import annotations

import hashlib
import re

import numpy as np
import pandas as pd

from ..schema import descriptors
from ..units import UnitError, conversion, forms, parse_unit, temperature_celsius
from .findings import Findings
from .read import BIB_FILE, CuratedTree, read_table

GROUPS_FILE = "groups.csv"


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
        if "pattern" in rules:  # matched once per distinct cell: ids and groups repeat over many rows
            pattern = re.compile(rules["pattern"])
            wrong = [v for v in pd.unique(col.to_numpy(dtype=object)) if v and not pattern.fullmatch(v)]
            _report(frame, col.isin(wrong) if wrong else np.zeros(len(frame), dtype=bool), name,
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
    scope = f" for this {keys[0]}" if len(keys) > 1 else ""
    _report(frame, dup, keys[-1], lambda v: f"{what} {v!r} appears more than once{scope}; make each {what} unique",
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
        check_unique(frame, descriptor["primaryKey"], findings, "id")
    if "compartments" in tree.vocab:
        comps = tree.vocab["compartments"]
        check_foreign(comps, "part_of", set(comps["id"]), "compartments", findings, tree.missing_columns)
    if "parts" in tree.vocab:
        parts = tree.vocab["parts"]
        check_foreign(parts, "part_of", set(parts["id"]), "parts", findings, tree.missing_columns)
    species = set(tree.vocab["species"]["id"]) if "species" in tree.vocab else set()
    for name in ("classes", "body_surface"):
        if name in tree.vocab:
            check_foreign(tree.vocab[name], "species", species, "species", findings, tree.missing_columns)
    if "body_surface" in tree.vocab:
        bsa = tree.vocab["body_surface"]
        _report(bsa, (bsa["formula"] == "meeh") & (bsa["k"] == ""), "k",
                "is empty; Meeh's formula needs the species' k (area in cm² for mass in g)", findings,
                tree.missing_columns, code="V240")
        _report(bsa, (bsa["formula"] != "meeh") & (bsa["k"] != ""), "k",
                "is only used with formula meeh; clear it", findings, tree.missing_columns, code="V241")
    if "methods" in tree.vocab and "quantities" in tree.vocab:
        quantities = set(tree.vocab["quantities"]["id"]) | {"*"}
        scopes = species | set(descriptors.TAXON_CLASSES)
        for row in tree.vocab["methods"].to_dict("records"):
            for q in row["quantities"].split():
                if q not in quantities:
                    findings.error(row["_file"], row["_line"], "quantities", f"unknown quantity {q!r}; use ids "
                                   "from vocab/quantities.csv, or * for any quantity", code="V238")
            for where in row["not_accepted_in"].split():
                scope, _, quantity = where.partition(":")
                if scope not in scopes:
                    findings.error(row["_file"], row["_line"], "not_accepted_in", f"{scope!r} is neither a taxon "
                                   f"class ({', '.join(descriptors.TAXON_CLASSES)}) nor a species id",
                                   code="V239")
                if quantity and quantity not in row["quantities"].split() and "*" not in row["quantities"].split():
                    findings.error(row["_file"], row["_line"], "not_accepted_in", f"{where!r} names quantity "
                                   f"{quantity!r}, which this method does not measure; use one of its quantities",
                                   code="V239")
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
    check_derived_from(tree.sources, keys, findings)
    check_one_entry_per_publication(tree.sources, findings)
    return keys


def _plain(text: str) -> str:
    """A title as letters and digits only (BibTeX braces, accents commands, case and spacing aside)."""
    return re.sub(r"[^a-z0-9]", "", re.sub(r"\\[a-zA-Z]+|\\.", "", text).lower())


SAME_PUBLICATION = {"doi": "DOI", "title": "title and year", "pages": "journal, volume and first page"}


def _publication_keys(fields: dict) -> dict[str, tuple]:
    """What names one publication: its DOI, its title and year, or where it is printed (an entry whose
    title was not seen is still one paper of one journal volume, starting on one page)."""
    keys = {}
    doi = fields.get("doi", "").strip().lower().removeprefix("https://doi.org/")
    if doi:
        keys["doi"] = (doi,)
    title = _plain(fields.get("title", ""))
    if len(title) > 20:
        keys["title"] = (title, fields.get("year", "").strip())
    journal, volume = _plain(fields.get("journal", "")), fields.get("volume", "").strip()
    first_page = re.split(r"\s*(?:-|–|--)\s*", fields.get("pages", "").strip())[0].lower()
    if journal and volume and first_page:
        keys["pages"] = (journal, volume, first_page)
    return keys


def check_one_entry_per_publication(sources: list[dict], findings: Findings) -> None:
    """One publication is one source: its rows would otherwise count the same animals twice. Two entries
    are one publication when they share a DOI, a title and year, or a journal, volume and first page."""
    first: dict[tuple, dict] = {}
    for src in sources:
        for column, key in _publication_keys(src["fields"]).items():
            key = (column, *key)
            if key in first and first[key]["key"] != src["key"]:
                findings.error(BIB_FILE, src["line"], column, f"entry {src['key']!r} has the "
                               f"{SAME_PUBLICATION[column]} of "
                               f"{first[key]['key']!r} (line {first[key]['line']}); one publication is one source: "
                               "keep one entry and move its rows into that source's values file", code="V242")
                break
            first.setdefault(key, src)


def check_derived_from(sources: list[dict], keys: set[str], findings: Findings) -> None:
    """``derived_from`` names another existing source, and following it never comes back."""
    parent = {}
    for src in sources:
        target = src["fields"].get("derived_from", "").strip()
        if not target:
            continue
        if target == src["key"]:
            findings.error(BIB_FILE, src["line"], "derived_from", f"entry {src['key']!r} names itself; give the "
                           "key of the source whose numbers it reprints", code="V236")
        elif target not in keys:
            findings.error(BIB_FILE, src["line"], "derived_from", f"entry {src['key']!r} names {target!r}, which "
                           f"is not in {BIB_FILE}; add that source first or fix the key", code="V235")
        else:
            parent[src["key"]] = target
    line = {src["key"]: src["line"] for src in sources}
    reported = set()
    for start in sorted(parent):
        path, key = [start], parent[start]
        while key in parent and key not in path:
            path.append(key)
            key = parent[key]
        if key in path and not reported & set(path):
            cycle = path[path.index(key):]
            reported |= set(cycle)
            findings.error(BIB_FILE, line[cycle[0]], "derived_from", "derived_from runs in a circle ("
                           + " → ".join(cycle + [cycle[0]]) + "); one of them must be the original",
                           code="V237")


def read_groups(tree: CuratedTree, findings: Findings) -> pd.DataFrame:
    """groups.csv at the tree's root (optional): which groups of a source contain which subgroups."""
    path = tree.root / GROUPS_FILE
    columns = descriptors.names(descriptors.GROUPS) + ["_file", "_line"]
    if not path.exists():
        return pd.DataFrame(columns=columns)
    tree.file_hashes[GROUPS_FILE] = hashlib.sha256(path.read_bytes()).hexdigest()
    frame = read_table(path, GROUPS_FILE, descriptors.GROUPS, findings, tree.missing_columns)
    return pd.DataFrame(columns=columns) if frame is None else frame


def check_groups(groups: pd.DataFrame, values: pd.DataFrame, source_keys: set[str], findings: Findings,
                 skip: set) -> None:
    """Group relations name existing sources and groups, and no group contains itself."""
    if groups.empty:
        return
    check_shape(groups, descriptors.GROUPS, findings, skip)
    check_unique(groups, ["source", "group", "contains"], findings, "subgroup list")
    used = values.groupby("_source")["_group"].agg(set).to_dict() if len(values) else {}
    children = {}
    for row in groups.to_dict("records"):
        src, group = row["source"], row["group"]
        if src not in source_keys:
            findings.error(row["_file"], row["_line"], "source", f"unknown source {src!r}; use a citation key "
                           f"from {BIB_FILE}", code="V233")
            continue
        children.setdefault((src, group), []).extend(row["contains"].split())
    for row in groups.to_dict("records"):
        src, group = row["source"], row["group"]
        if (src, group) not in children:
            continue
        known = used.get(src, set()) | {g for (s, g) in children if s == src}
        for name in [group, *row["contains"].split()]:
            if name not in known:
                column = "group" if name == group else "contains"
                findings.error(row["_file"], row["_line"], column, f"group {name!r} of {src} is used by no row of "
                               f"values/{src}.csv and declared nowhere in {GROUPS_FILE}; fix the id or the rows' "
                               "group", code="V232")
    # a group reached again through its own subgroups
    for (src, start) in sorted(children):
        seen, todo = set(), list(children[(src, start)])
        while todo:
            g = todo.pop()
            if g == start:
                row = groups[(groups["source"] == src) & (groups["group"] == start)].iloc[0]
                findings.error(row["_file"], row["_line"], "contains", f"group {start!r} of {src} contains itself "
                               "through its subgroups; a subgroup is smaller than its group", code="V234")
                break
            if g in seen:
                continue
            seen.add(g)
            todo.extend(children.get((src, g), []))


def subgroups(groups: pd.DataFrame) -> dict[tuple[str, str], set[str]]:
    """(source, group) → every group inside it, however deep."""
    children = {}
    for r in groups.to_dict("records"):
        children.setdefault((r["source"], r["group"]), []).extend(r["contains"].split())
    result = {}
    for (src, group) in children:
        seen, todo = set(), list(children[(src, group)])
        while todo:
            g = todo.pop()
            if g in seen or g == group:
                continue
            seen.add(g)
            todo.extend(children.get((src, g), []))
        result[(src, group)] = seen
    return result


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
    vocab_ids = {name: set(v["id"]) for name, v in tree.vocab.items() if "id" in v}
    for column, vocab in (("species", "species"), ("life_stage", "life_stages"),
                          ("compartment", "compartments"), ("quantity", "quantities"), ("part", "parts"),
                          ("method", "methods"), ("condition", "conditions")):
        check_foreign(frame, column, vocab_ids.get(vocab, set()), vocab, findings, skip)
    frame = frame.assign(**{f"_{name}": frame[name].where(frame[name] != "", default)
                            for name, default in descriptors.defaults(descriptors.VALUES).items()})
    check_semantics(frame, tree, findings, skip)

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


def check_semantics(frame: pd.DataFrame, tree: CuratedTree, findings: Findings, skip: set) -> None:
    """What a number means: its class names a class of its species, its method applies to its quantity,
    its denominator, statistic and assumed uncertainty fit the row."""
    classes = tree.vocab.get("classes")
    if classes is not None:
        known = set(zip(classes["species"], classes["id"]))
        has_class = (frame["class"] != "").to_numpy()
        unknown = np.zeros(len(frame), dtype=bool)
        unknown[has_class] = [pair not in known for pair in zip(frame["species"].to_numpy()[has_class],
                                                                frame["class"].to_numpy()[has_class])]
        _report(frame, unknown, "class",
                lambda v: f"unknown class {v!r} for this species; use a class of the row's species from "
                          "vocab/classes.csv or add it there", findings, skip, code="V208")
    methods, quantities = tree.vocab.get("methods"), tree.vocab.get("quantities")
    if methods is not None:
        applies = {m: set(q.split()) for m, q in zip(methods["id"], methods["quantities"])}
        rows = frame[(frame["method"] != "") & frame["method"].isin(list(applies))]
        wrong = [m and "*" not in applies[m] and q not in applies[m] for m, q in zip(rows["method"], rows["quantity"])]
        bad = rows[np.asarray(wrong, dtype=bool)]
        for file, line, method, quantity in zip(bad["_file"], bad["_line"], bad["method"], bad["quantity"]):
            findings.error(file, line, "method", f"method {method!r} does not measure {quantity}; it applies to "
                           f"{', '.join(sorted(applies[method]))} (vocab/methods.csv); pick the method the source "
                           "used for this quantity", code="V227")
    if quantities is not None:
        info = quantities.set_index("id")
        of_body = set(info.index[(info["fraction_of"] == "body_mass")])
        per = info["per"].fillna("").str.split()
        per_tissue = set(info.index[per.apply(lambda p: "tissue_mass" in p)])
        per_body = set(info.index[per.apply(lambda p: "body_mass" in p)]) | per_tissue  # a flow per kg body mass
        tissue = frame["_denominator"] == "tissue"
        denominated = (frame["_denominator"] != "live_body") & ~tissue
        fits = frame["quantity"].isin(of_body) | frame["quantity"].isin(per_body)
        _report(frame, denominated & ~fits, "denominator",
                lambda v: f"{v!r} is only for fractions of body mass or per-kg-body-mass values; clear it",
                findings, skip, code="V228")
        _report(frame, tissue & ~frame["quantity"].isin(per_tissue), "denominator",
                lambda v: f"{v!r} is only for a blood flow per kg of its tissue; clear it",
                findings, skip, code="V228")
    kind = frame["uncertainty"]
    _report(frame, (frame["_uncertainty_assumed"] == "yes") & ~kind.isin(["sd", "se"]), "uncertainty_assumed",
            "is yes, but only an sd or se read from an unlabelled ± can be assumed; set uncertainty to sd or se, "
            "or this to no", findings, skip, code="V229")
    species = tree.vocab.get("species")
    if species is not None:
        warm = set(species["id"][~species["taxon_class"].isin(descriptors.ECTOTHERMS)])
        _report(frame, (frame["temperature"] != "") & frame["species"].isin(warm), "temperature",
                lambda v: f"{v!r} is given for a mammal or bird, whose body keeps its own temperature; clear it "
                          "(heat or cold stress goes in condition)", findings, skip, code="V244")
    n = numeric(frame, "n")
    _report(frame, (frame["_statistic"] == "single_animal") & (n > 1), "statistic",
            "is single_animal but n is above 1; give the group's statistic or n = 1", findings, skip,
            code="V230")


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
        if form.normalisation == "tissue_mass":  # per kg of its tissue, or per kg of body mass: the row says
            said = frame["denominator"].str.strip().to_numpy()[index]
            normalisation[index[said != "tissue"]] = "body_mass"
            canonical[index[said != "tissue"]] = form.canonical_unit  # the same unit, per kg body mass
            _report(frame.iloc[index], said == "", "denominator",
                    "is empty, but a blood flow per mass must say per which mass: tissue (per kg of the "
                    "compartment's own tissue, e.g. mL/min/100 g) or live_body (per kg of body mass)",
                    findings, skip, code="V243")
    with np.errstate(over="ignore"):  # a number that overflows in the canonical unit is reported (V226)
        return frame.assign(
            _factor=factor, _unit_canonical=canonical, _normalisation=normalisation, _kind=kind,
            _value_canonical=frame["_value"].to_numpy() * factor,
            _low_canonical=frame["_low"].to_numpy() * factor,
            _high_canonical=frame["_high"].to_numpy() * factor,
        )


def _measure(frame, column, dimension, unit, findings, skip, what, code="") -> np.ndarray:
    """Parse 'number unit' cells of one column per distinct text, into ``unit``."""
    out = np.full(len(frame), np.nan)
    for text, index in frame.groupby(column, sort=False).indices.items():
        if not text.strip():
            continue
        if text.lstrip().startswith("-"):  # the grammar has no sign: say what is wrong in the trade's words
            _report(frame.iloc[index], np.ones(len(index)), column,
                    f"{text!r} is negative; give {what} of zero or more", findings, skip, code="V231")
            continue
        try:
            try:
                q = parse_unit(text)
            except UnitError:
                raise ValueError(text) from None  # pint's words are about units; this cell is an amount
            if q.dimensionality != parse_unit(unit).dimensionality:
                raise UnitError(f"{text!r} is not {what}; write e.g. {dimension}")
            amount = float(q.to(unit).magnitude)
            if not np.isfinite(amount):
                raise UnitError(f"{text!r} is not a finite amount; write e.g. {dimension}")
            out[index] = amount
        except (UnitError, Exception) as exc:  # pint's own errors included
            message = str(exc) if isinstance(exc, UnitError) else f"cannot read {text!r}; write e.g. {dimension}"
            _report(frame.iloc[index], np.ones(len(index)), column, message, findings, skip, code=code or "V225")
    return out


def attach_measures(frame: pd.DataFrame, findings: Findings, skip: set) -> pd.DataFrame:
    body_kg = _measure(frame, "body_mass", "'0.25 kg'", "kg", findings, skip, "a mass", "V225")
    _report(frame, body_kg <= 0, "body_mass", lambda v: f"{v!r} is not positive; give the subjects' mass",
            findings, skip, code="V225")
    age_days = _measure(frame, "age", "'10 year'", "day", findings, skip, "an age", "V225")
    _report(frame, age_days < 0, "age", lambda v: f"{v!r} is negative; give the age since birth or hatching",
            findings, skip, code="V231")
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
    return frame.assign(_body_mass_kg=body_kg, _age_days=age_days, _sd_canonical=sd,
                        _temperature_c=_temperatures(frame, findings, skip))


def _temperatures(frame: pd.DataFrame, findings: Findings, skip: set) -> np.ndarray:
    """The temperature column in °C, read once per distinct text (a temperature may be below zero)."""
    out = np.full(len(frame), np.nan)
    for text, index in frame.groupby("temperature", sort=False).indices.items():
        if not text.strip():
            continue
        try:
            out[index] = temperature_celsius(text)
        except UnitError as exc:
            _report(frame.iloc[index], np.ones(len(index)), "temperature", str(exc), findings, skip, code="V225")
    return out


def validate(tree: CuratedTree, findings: Findings) -> pd.DataFrame:
    check_vocab(tree, findings)
    keys = check_sources(tree, findings)
    frame = check_values(tree, keys, findings)
    tree.groups = read_groups(tree, findings)
    check_groups(tree.groups, frame, keys, findings, tree.missing_columns)
    return frame
