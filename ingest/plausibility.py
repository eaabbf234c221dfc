"""Plausibility warnings: values that are valid but worth a second look by a curator."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from ..schema.model import LIVER, PARTS_FOR_THE_WHOLE, PORTAL_ORGANS, SHARES_OF_A_WHOLE
from ..units import UnitError, conversion
from .findings import Findings
from .read import CuratedTree
from .validate import plausible_ranges, subgroups

GROUP = ["_source", "_group", "species", "life_stage", "sex", "class", "strain", "age", "_denominator"]


def check_ranges(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    quantities = tree.vocab["quantities"].set_index("id")
    have = frame["_value_canonical"].notna()
    for (quantity, canonical), group in frame.loc[have, _Rows.COLUMNS].groupby(["quantity", "_unit_canonical"]):
        info = quantities.loc[quantity]
        for low, high, unit in plausible_ranges(info["plausible_range"]):
            try:
                form, f = conversion(unit, info["canonical_unit"], info["per"])
            except UnitError:
                continue
            if form.canonical_unit != canonical:
                continue
            out = group[(group["_value_canonical"] < low * f) | (group["_value_canonical"] > high * f)]
            for row in out.to_dict("records"):
                findings.warn(row["_file"], row["_line"], "value",
                              f"{row['value']} {row['unit']} lies outside the plausible range {low:g}..{high:g} {unit} "
                              f"for {quantity}; check the unit and the number against the source",
                              code="W301")


def _sum_warnings(frame, quantity, compartments, findings, total_if_odd, message, code) -> None:
    """Per source, animal group and quantity: sum the top-level compartments' fractions with numpy;
    ``total_if_odd(values, compartments)`` gives the total when it deserves a warning, else None."""
    rows = frame[(frame["quantity"] == quantity) & frame["_value_canonical"].notna()
                 & frame["compartment"].isin(compartments)]
    value = rows["_value_canonical"].to_numpy(dtype=float)
    place = rows["compartment"].to_numpy(dtype=object)
    line = rows["_line"].to_numpy()
    for _, idx in rows.groupby(GROUP, dropna=False).indices.items():
        if len(idx) < 2:
            continue
        total = total_if_odd(value[idx], place[idx])
        if total is not None:
            first = rows.iloc[idx[np.argmin(line[idx])]]
            findings.warn(first["_file"], first["_line"], "value", message(first, total), code=code)


def check_sums(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    comps = tree.vocab["compartments"]
    top_level = set(comps.loc[(comps["part_of"].str.strip() == "") & (comps["kind"] != "whole_body"), "id"])

    mass_share, flow_share = SHARES_OF_A_WHOLE  # the same limits parameter sets check (schema/model.py)

    def masses(values, places):
        total = values.sum()
        return total if total > SHARES_OF_A_WHOLE[mass_share] + 1e-9 else None

    def flows(values, places):
        counted = np.ones(len(values), dtype=bool)
        if LIVER in set(places):  # liver flow is total hepatic flow, which already carries the portal organs
            counted = ~np.isin(places, list(PORTAL_ORGANS))
        total = values[counted].sum()
        return total if total > SHARES_OF_A_WHOLE[flow_share] or (counted.sum() >= 8 and total < 0.9) else None

    _sum_warnings(frame, mass_share, top_level, findings, masses,
                  lambda first, total: f"organ mass fractions of {first['species']} ({first['life_stage']}) in this "
                                       f"source sum to {total:.3f}, above 1; check for a part counted with its whole "
                                       "or a % read as 1", "W302")
    _sum_warnings(frame, flow_share, top_level, findings, flows,
                  lambda first, total: f"blood flow fractions of {first['species']} ({first['life_stage']}) in this "
                                       f"source sum to {total:.3f} of cardiac output (portal organs counted within "
                                       "liver); a full set should be near 1", "W302")


OUTLIER_FACTOR = 3.0  # common practice, no source: a 3-fold gap between studies of one parameter is worth a look
GROWING = {"neonate", "juvenile"}
AGE_FACTOR = 1.5  # common practice, no source: ages within 1.5-fold count as the same point of growth
PARAMETER = ["species", "life_stage", "compartment", "quantity", "_unit_canonical", "_amount"]


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _times(ratio: float) -> str:
    """4.69 → '4.69× above', 0.00047 → '1/2,128 of'."""
    x = ratio if ratio >= 1 else 1 / ratio
    text = f"{x:.3g}" if x < 1000 else f"{x:,.0f}"
    return f"{text}× above" if ratio >= 1 else f"1/{text} of"


class _Rows:
    """Rows of a frame by position as plain dicts, without a pandas row lookup per warning."""

    COLUMNS = ["_file", "_line", "value", "unit", "_value_canonical", "_unit_canonical", "species", "life_stage",
               "compartment", "quantity"]

    def __init__(self, frame: pd.DataFrame):
        self.columns = {c: frame[c].to_numpy(dtype=object) for c in self.COLUMNS}

    def __getitem__(self, position: int) -> dict:
        return {c: cells[position] for c, cells in self.columns.items()}


def _positive(frame: pd.DataFrame) -> pd.DataFrame:
    have = frame["_value_canonical"].notna() & (frame["_value_canonical"] > 0)
    return frame[have]


def _source_medians(sources: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each source's median value, sources in sorted order (as a pandas groupby gives them)."""
    names, codes = np.unique(sources, return_inverse=True)
    return names, np.array([np.median(values[codes == i]) for i in range(len(names))])


def check_outliers(frame: pd.DataFrame, findings: Findings, factor: float = OUTLIER_FACTOR) -> None:
    """A value more than ``factor`` times away from the other sources for the same parameter.

    Same species, stage, compartment, quantity and canonical unit (so per-kg and absolute
    forms are never compared); neonates and juveniles only against rows of a similar stated age.
    Each source counts once, by its own median, so a source with many rows does not outvote
    the rest. With three or more sources the reference is the median of all of them (one
    outlier cannot drag it); with two, each is compared with the other.

    Rows sharing a comparison set (the whole parameter, or one stated age of a growing stage)
    are compared at once, with numpy, so the cost grows with the number of parameters, not rows².
    """
    # a piece of an organ (a ventricle, a segment, one side) is compared only with the same piece
    rows = _positive(frame).assign(_amount=lambda f: f["_part"].where(~f["_part"].isin(PARTS_FOR_THE_WHOLE), "whole"))
    source = rows["_source"].to_numpy(dtype=object)
    value = rows["_value_canonical"].to_numpy(dtype=float)
    age = rows["_age_days"].to_numpy(dtype=float)
    row_at = _Rows(rows)
    for key, idx in rows.groupby(PARAMETER, sort=True).indices.items():
        if len(set(source[idx])) < 2:
            continue
        if key[1] in GROWING:  # a growing animal is only comparable at a similar age
            sets = [(idx[age[idx] == a], idx[(age[idx] >= a / AGE_FACTOR) & (age[idx] <= a * AGE_FACTOR)])
                    for a in np.unique(age[idx][~np.isnan(age[idx])])]
        else:
            sets = [(idx, idx)]
        for members, comparable in sets:
            names, medians = _source_medians(source[comparable], value[comparable])
            if len(names) < 2:
                continue
            if len(names) == 2:
                own_first = source[members] == names[0]
                reference = np.where(own_first, medians[1], medians[0])
            else:
                reference = np.full(len(members), float(np.median(medians)))
            ratio = value[members] / reference
            for i in np.flatnonzero((ratio < 1 / factor) | (ratio > factor)):
                row = row_at[members[i]]
                if len(names) == 2:
                    other = names[1] if source[members[i]] == names[0] else names[0]
                    what = (f"the value {_fmt(reference[i])} {row['_unit_canonical']} of the only other source "
                            f"({other})")
                else:
                    listed = ", ".join(names[:5]) + (" …" if len(names) > 5 else "")
                    what = (f"the median {_fmt(reference[i])} {row['_unit_canonical']} of {len(names)} sources "
                            f"({listed})")
                how = _times(ratio[i])
                findings.warn(row["_file"], row["_line"], "value",
                              f"{row['value']} {row['unit']} ({_fmt(row['_value_canonical'])} {row['_unit_canonical']}) "
                              f"is {how} {what} for {row['species']} {row['life_stage']} {row['compartment']} "
                              f"{row['quantity']}; check the number, its unit, the compartment, life stage and strain "
                              "against the source", code="W303")


def check_unit_typos(frame: pd.DataFrame, findings: Findings) -> None:
    """A row whose reported unit differs from the file's other rows of that quantity and species, and
    whose value is off from them by about the ratio of the two units (e.g. 'g' typed for 'kg').
    Only the rarer unit of the file is suspected.

    Compared with the same compartment's rows when there are any, else with all rows of the quantity.
    Rows of one unit and compartment share their comparison set, so each such set is computed once.
    """
    rows = _positive(frame)
    keys = ["_source", "species", "quantity", "_unit_canonical"]
    rows = rows[rows.groupby(keys)["unit"].transform("nunique").to_numpy() >= 2]  # one unit: nothing to suspect
    unit_of = rows["unit"].to_numpy(dtype=object)
    place = rows["compartment"].to_numpy(dtype=object)
    value = rows["_value_canonical"].to_numpy(dtype=float)
    scale = rows["_factor"].to_numpy(dtype=float)
    row_at = _Rows(rows)
    for _key, idx in rows.groupby(keys, sort=True).indices.items():
        units = unit_of[idx]
        names, counts = np.unique(units, return_counts=True)
        if len(names) < 2:
            continue
        count = dict(zip(names, counts))
        comps = place[idx]
        for unit, comp in sorted(set(zip(units, comps))):
            others = units != unit
            same_place = others & (comps == comp)
            others = same_place if same_place.any() else others
            other_names, other_counts = np.unique(units[others], return_counts=True)
            other_unit = other_names[np.argmax(other_counts)]  # the mode; ties go to the first name, as pandas
            if count[unit] >= count[other_unit]:
                continue  # only the file's rarer unit can be the typo
            members = idx[(units == unit) & (comps == comp)]
            reference = float(np.median(value[idx[others]]))
            unit_ratio = scale[members[0]] / scale[idx[others & (units == other_unit)][0]]
            if abs(np.log10(unit_ratio)) < 2:
                continue  # units of similar size
            ratio = value[members] / reference
            suspect = (np.abs(np.log10(ratio)) >= 2) & (np.abs(np.log10(ratio) - np.log10(unit_ratio)) <= 1)
            for i in np.flatnonzero(suspect):  # off from the others by about the ratio of the units
                row = row_at[members[i]]
                how = _times(ratio[i])
                findings.warn(row["_file"], row["_line"], "unit",
                              f"{row['value']} {unit} ({_fmt(row['_value_canonical'])} {row['_unit_canonical']}) is "
                              f"about {how} the median {_fmt(reference)} {row['_unit_canonical']} of "
                              f"{int(others.sum())} other {row['quantity']} row(s) of {row['species']} in this file, "
                              f"which use {other_unit!r}; is {unit!r} a typo for {other_unit!r}? check the unit in "
                              "the source", code="W304")


# --- what a number means: animals, parts, methods ---------------------------------------------------

ANIMALS = ["_source", "_group", "species", "life_stage", "sex", "class", "strain", "age"]
# Quantities whose parts add up to their whole (a per-kg-tissue flow or a concentration does not).
ADDITIVE = {"tissue_mass", "tissue_volume", "tissue_mass_fraction", "blood_flow", "blood_flow_fraction",
            "lumen_content_volume"}
PARTS_TOLERANCE = 0.02  # common practice, no source: printed values rounded to 2-3 digits may sum 2 % high


def _where(row) -> str:
    return f"{row['_file']}:{row['_line']}"


def check_organ_above_body(frame: pd.DataFrame, findings: Findings) -> None:
    """An organ's mass above the mass of the animals it came from (the row's body_mass, or the source's
    body_mass row of the same group)."""
    organs = frame[(frame["quantity"] == "tissue_mass") & (frame["compartment"] != "whole_body")
                   & (frame["_normalisation"] == "none") & frame["_value_canonical"].notna()]
    if organs.empty:
        return
    bodies = frame[(frame["quantity"] == "body_mass") & (frame["_normalisation"] == "none")
                   & frame["_value_canonical"].notna()]
    body_of = bodies.groupby(ANIMALS, dropna=False)["_value_canonical"].median().to_dict()
    for row in organs.to_dict("records"):
        body = row["_body_mass_kg"]
        if not np.isfinite(body):
            body = body_of.get(tuple(row[c] for c in ANIMALS), np.nan)
        if np.isfinite(body) and row["_value_canonical"] > body:
            findings.warn(row["_file"], row["_line"], "value",
                          f"{row['value']} {row['unit']} of {row['compartment']} is more than the body mass "
                          f"{_fmt(body)} kg of its animals; check the unit, the number and the body mass",
                          code="W305")


def check_parts_above_whole(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    """Within one group of animals and one quantity: sub-compartments (compartments part_of) and parts
    (parts part_of) must not sum above their whole."""
    comp_parent = dict(zip(tree.vocab["compartments"]["id"], tree.vocab["compartments"]["part_of"]))
    parts = tree.vocab.get("parts")
    part_parent = dict(zip(parts["id"], parts["part_of"])) if parts is not None else {}
    rows = frame[frame["quantity"].isin(ADDITIVE) & frame["_normalisation"].isin(["none", "body_mass"])
                 & frame["_value_canonical"].notna()]
    keys = [*ANIMALS, "quantity", "_unit_canonical", "_denominator"]
    for _key, group in rows.groupby(keys, dropna=False, sort=True):
        if len(group) < 2:
            continue
        value = group.groupby(["compartment", "_part"])["_value_canonical"].median().to_dict()
        first = {}
        for r in group.sort_values("_line").to_dict("records"):
            first.setdefault((r["compartment"], r["_part"]), r)
        wholes = {}
        for (comp, part), v in value.items():  # group the parts under each whole present
            if comp_parent.get(comp) and (comp_parent[comp], part) in value:
                wholes.setdefault((comp_parent[comp], part), []).append((comp, part))
            if part_parent.get(part) and (comp, part_parent[part]) in value:
                wholes.setdefault((comp, part_parent[part]), []).append((comp, part))
        for whole, members in sorted(wholes.items()):
            total = sum(value[m] for m in members)
            if total > value[whole] * (1 + PARTS_TOLERANCE):
                row = first[whole]
                names = " + ".join(f"{c} ({p})" if p != "tissue" else c for c, p in members)
                findings.warn(row["_file"], row["_line"], "value",
                              f"the parts {names} of these animals sum to {_fmt(total)} {row['_unit_canonical']}, "
                              f"above the whole {whole[0]} ({whole[1]}) {_fmt(value[whole])} "
                              f"{row['_unit_canonical']}; check the compartments and parts of these rows",
                              code="W306")


def _refused(tree: CuratedTree) -> dict[str, tuple[str, set[str]]]:
    """method → (reason, the taxon classes and species ids where pooling refuses it; '*' for everywhere)."""
    methods = tree.vocab.get("methods")
    if methods is None:
        return {}
    return {m: (reason, {"*"} if accepted == "no" else set(where.split()))
            for m, accepted, where, reason in zip(methods["id"], methods["accepted"], methods["not_accepted_in"],
                                                  methods["reason"])}


def check_methods_accepted(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    refused = _refused(tree)
    species = tree.vocab["species"].set_index("id")["taxon_class"].to_dict() if "species" in tree.vocab else {}
    rows = frame[frame["method"].isin([m for m, (_r, where) in refused.items() if where])]
    for row in rows.to_dict("records"):
        reason, where = refused[row["method"]]
        taxa = (row["species"], species.get(row["species"]))
        if "*" in where or any(t in where or f"{t}:{row['quantity']}" in where for t in taxa):
            findings.warn(row["_file"], row["_line"], "method",
                          f"{row['method']} is not accepted for {row['quantity']} of {row['species']} ({reason}); "
                          "pooling leaves this row out; keep it when the source prints it",
                          code="W307")


SAME_MEASUREMENT = [*ANIMALS, "compartment", "quantity", "_part", "_denominator", "method", "_condition", "_statistic",
                    "_normalisation"]


def check_duplicate_groups(frame: pd.DataFrame, findings: Findings) -> None:
    """The same animals, quantity, compartment, part and method given twice in one form: sets average them
    as repeated measures (api/rows.py), which is wrong when they are other animals under one group name.
    (One measurement printed absolute and per kg is two forms of one number, not a duplicate.)"""
    have = frame[frame["_value_canonical"].notna()]
    dup = have.duplicated(SAME_MEASUREMENT, keep=False)
    for _key, group in have[dup].groupby(SAME_MEASUREMENT, dropna=False, sort=True):
        group = group.sort_values("_line")
        first = group.iloc[0]
        for row in group.iloc[1:].to_dict("records"):
            findings.warn(row["_file"], row["_line"], "group",
                          f"group {row['_group']!r} already has {row['quantity']} of {row['compartment']} by the same "
                          f"method at line {first['_line']} (row {first['id']}); sets average them as repeated "
                          "measures of the same animals: if they are other animals, give each set its own group "
                          "(e.g. one per diet or age); if they are repeats, accept this in check_baseline.csv",
                          code="W308")


OVERLAP = ["_source", "species", "life_stage", "compartment", "quantity", "_part", "_denominator"]


def check_overlapping_groups(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    """A group and one of its subgroups (groups.csv) both give a quantity: the same animals twice."""
    if tree.groups is None or tree.groups.empty:
        return
    inside = subgroups(tree.groups)
    have = frame[frame["_value_canonical"].notna()]
    for _key, group in have.groupby(OVERLAP, sort=True):
        source = group["_source"].iloc[0]
        present = set(group["_group"])
        for whole in sorted(present):
            parts = sorted(inside.get((source, whole), set()) & present)
            if not parts:
                continue
            whole_row = group[group["_group"] == whole].sort_values("_line").iloc[0]
            for row in group[group["_group"].isin(parts)].sort_values("_line").to_dict("records"):
                findings.warn(row["_file"], row["_line"], "group",
                              f"group {row['_group']!r} lies within group {whole!r} (groups.csv), which also gives "
                              f"{row['quantity']} of {row['compartment']} at line {whole_row['_line']}; pooling uses "
                              "one of them; accept this warning in check_baseline.csv once reviewed",
                              code="W309")


_NUMBER = r"([0-9]+(?:\.[0-9]+)?)"
RANGE_TEXT = re.compile(r"(?:\bfrom\s+" + _NUMBER + r"\s*(?:[^\W\d_]+\s*)?to\s+" + _NUMBER + r")|(?:" + _NUMBER
                        + r"\s*(?:–|—|\bto\b)\s*" + _NUMBER + r")", re.I)


def ranges_in_text(text: str) -> list[tuple[float, float]]:
    """'from 3.2 to 4.1', '3.2 to 4.1', '3.2–4.1' (en dash) in free text → [(3.2, 4.1)]."""
    found = []
    for m in RANGE_TEXT.finditer(text or ""):
        a, b = (m.group(1), m.group(2)) if m.group(1) else (m.group(3), m.group(4))
        found.append((float(a), float(b)))
    return found


def check_range_ends(frame: pd.DataFrame, findings: Findings) -> None:
    """A range end stored as the value: value equal to low or high of a range, or to an end of a range
    the comment quotes."""
    have = frame[frame["_value"].notna()]
    ranged = have[(have["uncertainty"] == "range") & (have["_low"] < have["_high"])
                  & ((have["_value"] == have["_low"]) | (have["_value"] == have["_high"]))]
    for row in ranged.to_dict("records"):
        end = "low" if row["_value"] == row["_low"] else "high"
        findings.warn(row["_file"], row["_line"], "value",
                      f"{row['value']} equals the range's {end} end; a range end is not a central value: give the "
                      "source's mean or median, or the midpoint with statistic reference_midpoint",
                      code="W310")
    quoted = have[~have.index.isin(ranged.index) & have["comment"].str.contains(r"[0-9]", regex=True)]
    for row in quoted.to_dict("records"):
        for low, high in ranges_in_text(row["comment"]):
            if low != high and row["_value"] in (low, high):
                findings.warn(row["_file"], row["_line"], "value",
                              f"{row['value']} is an end of the range {low:g} to {high:g} the comment quotes; a range "
                              "goes in low and high (uncertainty range), the value is the central value or the "
                              "midpoint with statistic reference_midpoint", code="W310")
                break


MIDPOINT_TOLERANCE = 0.01  # common practice, no source: a midpoint printed to 2-3 digits lies within 1 %


def check_midpoints(frame: pd.DataFrame, findings: Findings) -> None:
    """A value marked reference_midpoint must lie in the middle of its low..high."""
    rows = frame[(frame["_statistic"] == "reference_midpoint") & frame["_value"].notna() & frame["_low"].notna()
                 & frame["_high"].notna()]
    middle = (rows["_low"] + rows["_high"]) / 2
    off = rows[(rows["_value"] - middle).abs() > MIDPOINT_TOLERANCE * middle.abs()]
    for row, mid in zip(off.to_dict("records"), middle[off.index]):
        findings.warn(row["_file"], row["_line"], "value",
                      f"{row['value']} is marked reference_midpoint but the middle of {row['low']}..{row['high']} is "
                      f"{_fmt(mid)}; give the midpoint, or the statistic the source prints", code="W311")


def check_denominator_ratios(frame: pd.DataFrame, findings: Findings) -> None:
    """A fraction of empty body (or carcass) mass needs the source's own ratio to live body mass."""
    from ..schema.descriptors import DENOMINATORS

    for denominator, ratio in DENOMINATORS.items():
        if ratio is None:
            continue
        rows = frame[frame["_denominator"] == denominator]
        if rows.empty:
            continue
        known = set(zip(frame.loc[frame["quantity"] == ratio, "_source"],
                        frame.loc[frame["quantity"] == ratio, "species"]))
        for row in rows.to_dict("records"):
            if (row["_source"], row["species"]) not in known:
                findings.warn(row["_file"], row["_line"], "denominator",
                              f"a fraction of {denominator.replace('_', ' ')} mass, but this source gives no {ratio} "
                              f"of {row['species']}; add the source's ratio (whole_body, {ratio}) so the row can be "
                              "converted to live body mass", code="W312")


def check_plausibility(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    if "quantities" not in tree.vocab or "compartments" not in tree.vocab or frame.empty:
        return
    check_ranges(frame, tree, findings)
    check_sums(frame, tree, findings)
    check_outliers(frame, findings)
    check_unit_typos(frame, findings)
    check_organ_above_body(frame, findings)
    check_parts_above_whole(frame, tree, findings)
    check_methods_accepted(frame, tree, findings)
    check_duplicate_groups(frame, findings)
    check_overlapping_groups(frame, tree, findings)
    check_range_ends(frame, findings)
    check_midpoints(frame, findings)
    check_denominator_ratios(frame, findings)
