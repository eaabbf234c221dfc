"""Plausibility warnings: values that are valid but worth a second look by a curator."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..schema.anatomy import PORTAL_ORGANS
from ..units import UnitError, conversion
from .findings import Findings
from .read import CuratedTree
from .validate import plausible_ranges

GROUP = ["_source", "species", "life_stage", "sex", "strain", "age"]


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
                              f"for {quantity}; check the unit and the number against the source", code="W301")


def _sum_warnings(frame, quantity, compartments, findings, total_if_odd, message) -> None:
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
            findings.warn(first["_file"], first["_line"], "value", message(first, total), code="W302")


def check_sums(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    comps = tree.vocab["compartments"]
    top_level = set(comps.loc[(comps["part_of"].str.strip() == "") & (comps["kind"] != "whole_body"), "id"])

    def masses(values, places):
        total = values.sum()
        return total if total > 1.0 + 1e-9 else None

    def flows(values, places):
        counted = np.ones(len(values), dtype=bool)
        if "liver" in set(places):  # liver flow is total hepatic flow, which already carries the portal organs
            counted = ~np.isin(places, list(PORTAL_ORGANS))
        total = values[counted].sum()
        return total if total > 1.1 or (counted.sum() >= 8 and total < 0.9) else None

    _sum_warnings(frame, "tissue_mass_fraction", top_level, findings, masses,
                  lambda first, total: f"organ mass fractions of {first['species']} ({first['life_stage']}) in this "
                                       f"source sum to {total:.3f}, above 1; check for a part counted with its whole "
                                       "or a % read as 1")
    _sum_warnings(frame, "blood_flow_fraction", top_level, findings, flows,
                  lambda first, total: f"blood flow fractions of {first['species']} ({first['life_stage']}) in this "
                                       f"source sum to {total:.3f} of cardiac output (portal organs counted within "
                                       "liver); a full set should be near 1")


OUTLIER_FACTOR = 3.0  # common practice, no source: a 3-fold gap between studies of one parameter is worth a look
GROWING = {"neonate", "juvenile"}
AGE_FACTOR = 1.5  # common practice, no source: ages within 1.5-fold count as the same point of growth
PARAMETER = ["species", "life_stage", "compartment", "quantity", "_unit_canonical"]


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
    rows = _positive(frame)
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


def check_plausibility(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    if "quantities" not in tree.vocab or "compartments" not in tree.vocab or frame.empty:
        return
    check_ranges(frame, tree, findings)
    check_sums(frame, tree, findings)
    check_outliers(frame, findings)
    check_unit_typos(frame, findings)
