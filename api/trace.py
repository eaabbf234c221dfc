"""Trace a parameter to its curated rows: which sources, where in them, and how they combine."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import pandas as pd

ROW_COLUMNS = ["compartment", "source", "citation", "locator", "row_id", "sex", "strain", "age", "value", "unit",
               "value_canonical", "unit_canonical", "uncertainty", "spread", "low", "high", "sd_canonical", "n",
               "verified", "basis", "missing_reason", "file", "line"]
ESTIMATE_FIELDS = ["value", "se", "sd", "low", "high", "method", "n_studies", "sources"]


@dataclass
class Trace:
    species: str
    life_stage: str
    quantity: str
    compartment: str | None
    sex: str | None
    rows: pd.DataFrame
    combined: list[dict] = field(default_factory=list)  # one per (compartment, canonical unit)
    note: str | None = None  # why no combination could be shown

    def to_dict(self) -> dict:
        from .. import CAUTION

        rows = self.rows.astype(object).where(self.rows.notna(), None)
        return {"species": self.species, "life_stage": self.life_stage, "quantity": self.quantity,
                "compartment": self.compartment, "sex": self.sex, "rows": rows.to_dict("records"),
                "combined": self.combined, "note": self.note, "caution": CAUTION}


def _combiner():
    """The parameter set's own combination rule, so trace shows exactly what a parameter set uses."""
    try:
        from .parameters import combine_rows
    except ImportError:
        return None
    return combine_rows


def _plain(x):
    if isinstance(x, float) and math.isnan(x):
        return None
    if isinstance(x, (list, tuple)):
        return list(x)
    return x.item() if hasattr(x, "item") else x


def estimate_dict(estimate) -> dict:
    """The fields of a combined estimate that a curator reads (value, se, sd, range, method, sources)."""
    if isinstance(estimate, dict):
        get = estimate.get
    else:
        def get(name, default=None):
            return getattr(estimate, name, default)
    return {name: _plain(get(name, None)) for name in ESTIMATE_FIELDS}


def trace(store, species: str, quantity: str, compartment: str | None = None, *, life_stage: str = "adult",
          sex: str | None = None) -> Trace:
    """Every curated row behind one parameter, and the parameter set's combination of them."""
    store.require("species", species, "species")
    store.require("life_stages", life_stage, "life stage")
    store.require("quantities", quantity, "quantity")
    if compartment is not None:
        store.require("compartments", compartment, "compartment")
    frame = store.values(species=species, life_stage=life_stage, quantity=quantity, compartment=compartment,
                         sex=sex)
    rows = frame[ROW_COLUMNS].reset_index(drop=True)
    result = Trace(species, life_stage, quantity, compartment, sex, rows)
    if frame.empty:
        result.note = (f"no curated rows for {species} {life_stage} {quantity}"
                       f"{' in ' + compartment if compartment else ''}: a gap")
        return result
    combine = _combiner()
    if combine is None:
        result.note = ("the parameter set's combination (bodyplan.api.parameters.combine_rows) is not in this "
                       "version; the rows are shown uncombined")
        return result
    have = frame[frame["value_canonical"].notna()]
    for (comp, unit), group in have.groupby(["compartment", "unit_canonical"], sort=True):
        entry = {"compartment": comp, "unit": unit, "rows": len(group)}
        entry.update(estimate_dict(combine(group)))
        result.combined.append(entry)
    return result
