"""What changed between two built stores: values added, removed and changed, and sources.

A value's identity is (source_id, row_id), so moving a row within its file (lint, a new
row above it) is not a change; its file and line are ignored.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import pandas as pd

from .jsonable import json_scalar

COMPARED = ["species_id", "life_stage_id", "age", "sex", "strain", "compartment_id", "quantity_id", "value",
            "unit", "value_canonical", "unit_canonical", "uncertainty", "spread", "low", "high", "n",
            "subject_body_mass_kg", "basis", "locator", "verified", "missing_reason", "comment"]
KEY = ["source_id", "row_id"]
SHOWN = ["source_id", "row_id", "species_id", "life_stage_id", "compartment_id", "quantity_id", "value", "unit"]


@dataclass
class StoreDiff:
    old: str
    new: str
    old_build: dict
    new_build: dict
    added: pd.DataFrame
    removed: pd.DataFrame
    changed: list[dict] = field(default_factory=list)  # {source_id, row_id, species_id, changes: {col: [old, new]}}
    sources_added: list[dict] = field(default_factory=list)
    sources_removed: list[dict] = field(default_factory=list)

    @property
    def is_empty(self) -> bool:
        return (self.added.empty and self.removed.empty and not self.changed and not self.sources_added
                and not self.sources_removed)

    def per_species(self) -> pd.DataFrame:
        counts = {}
        for what, species in (("added", self.added["species_id"]), ("removed", self.removed["species_id"]),
                              ("changed", pd.Series([c["species_id"] for c in self.changed], dtype=object))):
            for sp, k in species.value_counts().items():
                counts.setdefault(sp, {"species": sp, "added": 0, "removed": 0, "changed": 0})[what] = int(k)
        return pd.DataFrame(sorted(counts.values(), key=lambda r: r["species"]),
                            columns=["species", "added", "removed", "changed"])

    def to_dict(self) -> dict:
        def records(frame):
            return frame.astype(object).where(frame.notna(), None).to_dict("records")

        return {
            "old": {"store": self.old, **self.old_build}, "new": {"store": self.new, **self.new_build},
            "summary": {"values_added": len(self.added), "values_removed": len(self.removed),
                        "values_changed": len(self.changed), "sources_added": len(self.sources_added),
                        "sources_removed": len(self.sources_removed)},
            "per_species": records(self.per_species()),
            "sources_added": self.sources_added, "sources_removed": self.sources_removed,
            "values_added": records(self.added), "values_removed": records(self.removed),
            "values_changed": self.changed,
        }

    def changes_frame(self) -> pd.DataFrame:
        """One row per changed field: source, row, species, field, old, new."""
        rows = [{"source_id": c["source_id"], "row_id": c["row_id"], "species_id": c["species_id"], "field": k,
                 "old": old, "new": new}
                for c in self.changed for k, (old, new) in c["changes"].items()]
        return pd.DataFrame(rows, columns=["source_id", "row_id", "species_id", "field", "old", "new"])

    def to_markdown(self) -> str:
        old_hash = self.old_build.get("content_hash", "?")[:12]
        new_hash = self.new_build.get("content_hash", "?")[:12]
        s = self.to_dict()["summary"]
        lines = [f"## Data changes {old_hash} → {new_hash}", "",
                 f"{s['values_added']} value(s) added, {s['values_removed']} removed, {s['values_changed']} changed; "
                 f"{s['sources_added']} source(s) added, {s['sources_removed']} removed.", ""]
        if self.is_empty:
            return "\n".join(lines + ["No changes.", ""])
        lines += _md_table(self.per_species(), "Per species")
        for title, sources in (("Sources added", self.sources_added), ("Sources removed", self.sources_removed)):
            if sources:
                lines += [f"### {title}", ""] + [f"- `{x['id']}`: {x['citation']}" for x in sources] + [""]
        lines += _md_table(self.added, "Values added")
        lines += _md_table(self.removed, "Values removed")
        lines += _md_table(self.changes_frame(), "Values changed")
        lines += [f"Content hash: old `{self.old_build.get('content_hash', '?')}`, "
                  f"new `{self.new_build.get('content_hash', '?')}`.", ""]
        return "\n".join(lines)


def _cell(x) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return ""
    return str(x).replace("|", "\\|").replace("\n", " ")


def _md_table(frame: pd.DataFrame, title: str) -> list[str]:
    if frame.empty:
        return []
    head = [f"### {title}", "", "| " + " | ".join(frame.columns) + " |", "|" + "---|" * len(frame.columns)]
    body = ["| " + " | ".join(_cell(v) for v in row) + " |" for row in frame.itertuples(index=False)]
    return head + body + [""]


def _same(a, b) -> bool:
    a_missing = a is None or (isinstance(a, float) and math.isnan(a))
    b_missing = b is None or (isinstance(b, float) and math.isnan(b))
    return a_missing == b_missing and (a_missing or a == b)


def _values(store) -> pd.DataFrame:
    return store.frame(f"SELECT {', '.join(KEY + COMPARED)} FROM curated_values ORDER BY source_id, row_id")


def _sources(store) -> dict[str, dict]:
    return {r["id"]: {"id": r["id"], "citation": r["citation"]}
            for r in store.query("SELECT id, citation FROM sources ORDER BY id")}


def diff_stores(old, new) -> StoreDiff:
    """Compare two opened stores (``bodyplan.api.Store``)."""
    a, b = _values(old), _values(new)
    merged = a.merge(b, on=KEY, how="outer", suffixes=("_old", "_new"), indicator=True)
    removed = merged[merged["_merge"] == "left_only"]
    added = merged[merged["_merge"] == "right_only"]

    def side(frame, suffix):
        out = frame[KEY + [f"{c}{suffix}" for c in SHOWN[2:]]]
        return out.set_axis(SHOWN, axis=1).reset_index(drop=True)

    changed = []
    for row in merged[merged["_merge"] == "both"].to_dict("records"):
        changes = {c: [json_scalar(row[f"{c}_old"]), json_scalar(row[f"{c}_new"])] for c in COMPARED
                   if not _same(row[f"{c}_old"], row[f"{c}_new"])}
        if changes:
            changed.append({"source_id": row["source_id"], "row_id": row["row_id"],
                            "species_id": row["species_id_new"], "changes": changes})
    src_a, src_b = _sources(old), _sources(new)
    return StoreDiff(
        str(old.path), str(new.path), old.build_info(), new.build_info(),
        added=side(added, "_new"), removed=side(removed, "_old"), changed=changed,
        sources_added=[src_b[k] for k in sorted(set(src_b) - set(src_a))],
        sources_removed=[src_a[k] for k in sorted(set(src_a) - set(src_b))],
    )
