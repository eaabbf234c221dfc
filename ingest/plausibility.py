"""Plausibility warnings: values that are valid but worth a second look by a curator."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..units import UnitError, conversion
from .findings import Findings
from .read import CuratedTree
from .validate import plausible_ranges

GROUP = ["_source", "species", "life_stage", "sex", "strain", "age"]
PORTAL_CONTRIBUTORS = {"gut", "spleen", "pancreas", "stomach", "small_intestine", "large_intestine"}


def check_ranges(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    quantities = tree.vocab["quantities"].set_index("id")
    have = frame["_value_canonical"].notna()
    for (quantity, canonical), group in frame[have].groupby(["quantity", "_unit_canonical"]):
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
                              f"for {quantity}; check the unit and the number against the source")


def _sum_warnings(frame, quantity, compartments, findings, check) -> None:
    rows = frame[(frame["quantity"] == quantity) & frame["_value_canonical"].notna()]
    for _, group in rows.groupby(GROUP, dropna=False):
        top = group[group["compartment"].isin(compartments)]
        if len(top) < 2:
            continue
        check(top, findings)


def check_sums(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    comps = tree.vocab["compartments"]
    top_level = set(comps.loc[(comps["part_of"].str.strip() == "") & (comps["kind"] != "whole_body"), "id"])

    def masses(group, findings):
        total = group["_value_canonical"].sum()
        if total > 1.0 + 1e-9:
            first = group.sort_values("_line").iloc[0]
            findings.warn(first["_file"], first["_line"], "value",
                          f"organ mass fractions of {first['species']} ({first['life_stage']}) in this source "
                          f"sum to {total:.3f}, above 1; check for a part counted with its whole or a % read as 1")

    def flows(group, findings):
        names = set(group["compartment"])
        counted = group
        if "liver" in names:  # liver flow is total hepatic flow, which already carries the portal organs
            counted = group[~group["compartment"].isin(PORTAL_CONTRIBUTORS)]
        total = counted["_value_canonical"].sum()
        first = group.sort_values("_line").iloc[0]
        if total > 1.1 or (len(counted) >= 8 and total < 0.9):
            findings.warn(first["_file"], first["_line"], "value",
                          f"blood flow fractions of {first['species']} ({first['life_stage']}) in this source "
                          f"sum to {total:.3f} of cardiac output (portal organs counted within liver); "
                          "a full set should be near 1")

    _sum_warnings(frame, "tissue_mass_fraction", top_level, findings, masses)
    _sum_warnings(frame, "blood_flow_fraction", top_level, findings, flows)


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


def _positive(frame: pd.DataFrame) -> pd.DataFrame:
    have = frame["_value_canonical"].notna() & (frame["_value_canonical"] > 0)
    return frame[have]


def check_outliers(frame: pd.DataFrame, findings: Findings, factor: float = OUTLIER_FACTOR) -> None:
    """A value more than ``factor`` times away from the other sources for the same parameter.

    Same species, stage, compartment, quantity and canonical unit (so per-kg and absolute
    forms are never compared); neonates and juveniles only against rows of a similar stated age.
    Each source counts once, by its own median, so a source with many rows does not outvote
    the rest. With three or more sources the reference is the median of all of them (one
    outlier cannot drag it); with two, each is compared with the other.
    """
    for _key, group in _positive(frame).groupby(PARAMETER, sort=True):
        if group["_source"].nunique() < 2:
            continue
        for row in group.to_dict("records"):
            comparable = group
            if row["life_stage"] in GROWING:  # a growing animal is only comparable at a similar age
                age = row["_age_days"]
                comparable = group[(group["_age_days"] >= age / AGE_FACTOR) & (group["_age_days"] <= age * AGE_FACTOR)]
            per_source = comparable.groupby("_source")["_value_canonical"].median()
            if len(per_source) < 2:
                continue
            if len(per_source) == 2:
                other = per_source.drop(row["_source"])
                reference = float(other.iloc[0])
                what = f"the value {_fmt(reference)} {row['_unit_canonical']} of the only other source ({other.index[0]})"
            else:
                reference = float(per_source.median())
                names = ", ".join(per_source.index[:5]) + (" …" if len(per_source) > 5 else "")
                what = f"the median {_fmt(reference)} {row['_unit_canonical']} of {len(per_source)} sources ({names})"
            ratio = row["_value_canonical"] / reference
            if 1 / factor <= ratio <= factor:
                continue
            how = _times(ratio)
            findings.warn(row["_file"], row["_line"], "value",
                          f"{row['value']} {row['unit']} ({_fmt(row['_value_canonical'])} {row['_unit_canonical']}) "
                          f"is {how} {what} for {row['species']} {row['life_stage']} {row['compartment']} "
                          f"{row['quantity']}; check the number, its unit, the compartment, life stage and strain "
                          "against the source")


def check_unit_typos(frame: pd.DataFrame, findings: Findings) -> None:
    """A row whose reported unit differs from the file's other rows of that quantity and species, and
    whose value is off from them by about the ratio of the two units (e.g. 'g' typed for 'kg').
    Only the rarer unit of the file is suspected.

    Compared with the same compartment's rows when there are any, else with all rows of the quantity.
    """
    rows = _positive(frame)
    for _key, group in rows.groupby(["_source", "species", "quantity", "_unit_canonical"], sort=True):
        if group["unit"].str.strip().nunique() < 2:
            continue
        units = group["unit"].str.strip()
        counts = units.value_counts()
        for idx, row in group.iterrows():
            unit = units[idx]
            others = group[units != unit]
            same_place = others[others["compartment"] == row["compartment"]]
            others = same_place if len(same_place) else others
            if len(others) < 1:
                continue
            other_unit = others["unit"].str.strip().mode().iloc[0]
            if counts[unit] >= counts[other_unit]:
                continue  # only the file's rarer unit can be the typo
            reference = float(others["_value_canonical"].median())
            unit_ratio = row["_factor"] / float(others.loc[others["unit"].str.strip() == other_unit, "_factor"].iloc[0])
            ratio = row["_value_canonical"] / reference
            if abs(np.log10(unit_ratio)) < 2 or abs(np.log10(ratio)) < 2:
                continue  # units of similar size, or a value in line with the others
            if abs(np.log10(ratio) - np.log10(unit_ratio)) > 1:
                continue  # the gap is not the one the unit change would explain
            how = _times(ratio)
            findings.warn(row["_file"], row["_line"], "unit",
                          f"{row['value']} {unit} ({_fmt(row['_value_canonical'])} {row['_unit_canonical']}) is "
                          f"about {how} the median {_fmt(reference)} {row['_unit_canonical']} of "
                          f"{len(others)} other {row['quantity']} row(s) of {row['species']} in this file, which "
                          f"use {other_unit!r}; is {unit!r} a typo for {other_unit!r}? check the unit in the source")


def check_plausibility(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    if "quantities" not in tree.vocab or "compartments" not in tree.vocab or frame.empty:
        return
    check_ranges(frame, tree, findings)
    check_sums(frame, tree, findings)
    check_outliers(frame, findings)
    check_unit_typos(frame, findings)
