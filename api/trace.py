"""Trace a parameter to its curated rows: which sources, where in them, and how they combine.

The combination is the parameter set's own (``resolve_parameter``): a volume per kg body
weight from masses, fractions or volumes, a flow as a fraction of cardiac output, and so on,
with every row it used and the route that row took.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from ..schema.model import PARAMETERS, parameter_of
from .jsonable import json_scalar

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
    rows: pd.DataFrame  # with a column "used" (whether the parameter set used the row) once combined
    combined: list[dict] = field(default_factory=list)  # the parameter set's resolution, one per compartment
    note: str | None = None  # why no combination could be shown

    def to_dict(self) -> dict:
        from .. import CAUTION

        rows = self.rows.astype(object).where(self.rows.notna(), None)
        return {"species": self.species, "life_stage": self.life_stage, "quantity": self.quantity,
                "compartment": self.compartment, "sex": self.sex, "rows": rows.to_dict("records"),
                "combined": self.combined, "note": self.note, "caution": CAUTION}


def estimate_dict(estimate) -> dict:
    """The fields of a combined estimate that a curator reads (value, se, sd, range, method, sources)."""
    return {name: json_scalar(getattr(estimate, name, None)) for name in ESTIMATE_FIELDS}


def trace(store, species: str, quantity: str, compartment: str | None = None, *, life_stage: str = "adult",
          sex: str | None = None) -> Trace:
    """Every curated row behind one parameter, and the parameter set's combination of them."""
    store.require("species", species, "species")
    store.require("life_stages", life_stage, "life stage")
    store.require("quantities", quantity, "quantity")
    if compartment is not None:
        store.require("compartments", compartment, "compartment")
    sexes = None if sex is None else [sex, "mixed", "unknown"]  # as a parameter set of one sex reads them
    frame = store.values(species=species, life_stage=life_stage, quantity=quantity, compartment=compartment,
                         sex=sexes)
    rows = frame[ROW_COLUMNS].reset_index(drop=True)
    result = Trace(species, life_stage, quantity, compartment, sex, rows)
    if frame.empty:
        result.note = (f"no curated rows for {species} {life_stage} {quantity}"
                       f"{' in ' + compartment if compartment else ''}: a gap")
        elsewhere = store.values(species=species, quantity=quantity, compartment=compartment)
        if not elsewhere.empty:
            counts = elsewhere.groupby("life_stage").size()
            result.note += ("; rows exist at other stages (" + ", ".join(f"{n} at {s}" for s, n in counts.items())
                            + "): trace with --life-stage, or ask parameter sets for the stage fallback")
        return result
    parameter = parameter_of(quantity)
    if parameter is None:
        result.note = f"parameter sets do not use {quantity}; the rows are shown uncombined"
        return result
    from .resolve import Resolver  # the parameter set's own rules, so the numbers are its numbers

    declared, left_out = PARAMETERS[parameter], {}
    unit = declared.resolved_as
    places = [declared.compartment] if declared.compartment else \
        sorted(set(frame["compartment"]) if compartment is None else {compartment})
    for place in places:
        resolver = Resolver(store, species, life_stage, sex)
        resolved = resolver.resolve(parameter, place)
        left_out.update(resolver.left_out)
        result.combined.append(combination(place, parameter, unit, resolved))
    used = {(r["source"], r["row_id"]) for c in result.combined for r in c["rows_used"]}
    result.rows["used"] = [(s, r) in used for s, r in zip(result.rows["source"], result.rows["row_id"])]
    used_of = {}
    for c in result.combined:
        for r in c["rows_used"]:
            used_of.setdefault((r["source"], c["compartment"]), r["row_id"])

    def why(source, row, place):
        if (source, row) in used:
            return None
        if (source, row) in left_out:
            return left_out[(source, row)]
        if (source, place) in used_of:  # one route per source: the one needing nothing borrowed, then the most direct
            return f"row {used_of[(source, place)]} of this source is used instead (one route per source)"
        return UNCONVERTED

    result.rows["left_out"] = [why(s, r, p) for s, r, p in
                               zip(result.rows["source"], result.rows["row_id"], result.rows["compartment"])]
    return result


# A row that counts but that no route could turn into the parameter here.
UNCONVERTED = ("no route turns it into this parameter here (an absolute number without its subjects' or a "
               "typical body mass, or a flow without a cardiac output)")


def combination(compartment: str, parameter: str, unit: str, resolved) -> dict:
    """One parameter as the parameter set resolves it: the estimate, and every row it used with its route."""
    entry = {"compartment": compartment, "parameter": parameter, "unit": unit}
    entry.update(estimate_dict(resolved.estimate) if resolved.estimate is not None else
                 {name: None for name in ESTIMATE_FIELDS})
    if resolved.notes:
        entry["method"] = f"{entry['method']} ({'; '.join(resolved.notes)})"
    entry["reason"] = resolved.reason or None
    # a row with repeated measures folded in stands for each of them (their mean is its value)
    entry["rows_used"] = [{"source": r.get("source_id"), "row_id": row_id,
                           "quantity": r.get("quantity_id"), "compartment": r.get("compartment_id"),
                           "route": r.get("_route"), "value_in_unit": json_scalar(r.get("_value")),
                           "at": f"{r.get('file')}:{line}"}
                          for r in resolved.rows
                          for row_id, line in ((r.get("row_id"), r.get("line")), *r.get("_repeats", ()))]
    return entry
