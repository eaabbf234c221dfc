"""Plausibility warnings: values that are valid but worth a second look by a curator."""

from __future__ import annotations

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
                              f"{row['value']} {row['unit']} lies outside the plausible range {low}..{high} {unit} "
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


def check_plausibility(frame: pd.DataFrame, tree: CuratedTree, findings: Findings) -> None:
    if "quantities" not in tree.vocab or "compartments" not in tree.vocab or frame.empty:
        return
    check_ranges(frame, tree, findings)
    check_sums(frame, tree, findings)
