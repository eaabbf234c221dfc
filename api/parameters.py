"""Model-ready parameter sets: a layout's volumes and flows at one body weight, every gap marked."""

from __future__ import annotations

from ..errors import BodyplanError

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .. import CAUTION
from .layouts import REST, Layout, load_layout
from .pooling import Estimate
from ..schema.anatomy import PORTAL_ORGANS
from .resolve import SAME_BODY_WEIGHT, Resolved, Resolver

FILLS = ("measured", "pooled", "scaled", "allometric", "gap", "not_applicable")
FLOW_TOLERANCE = 0.05  # named systemic flows may exceed cardiac output by 5 % before the set is flagged
REST_DENSITY = 1.0  # kg/L, stated on the rest_of_body volume wherever it is used
UNITS = {"SI": {"volume": ("L", 1.0), "blood_flow": ("L/h", 1.0), "gfr": ("L/h", 1.0), "hematocrit": ("1", 1.0)},
         "clinical": {"volume": ("mL", 1000.0), "blood_flow": ("mL/min", 1000.0 / 60.0),
                      "gfr": ("mL/min", 1000.0 / 60.0), "hematocrit": ("1", 1.0)}}
PHYSIOLOGY = {"gfr": "whole_body", "hematocrit": "blood"}  # extra numbers a PBPK model usually needs


class ParameterSetError(BodyplanError, ValueError):
    """A parameter-set request that cannot be answered as asked (unknown option, bad body weight)."""


@dataclass
class Cell:
    """One number of a parameter set, with how it was obtained."""

    value: float | None
    unit: str
    fill: str
    sd: float | None = None
    se: float | None = None
    low: float | None = None
    high: float | None = None
    sources: tuple[str, ...] = ()
    method: str = ""
    reason: str = ""  # for gaps

    @classmethod
    def gap(cls, unit: str, reason: str) -> "Cell":
        return cls(None, unit, "gap", reason=reason)

    def in_units(self, unit: str, factor: float) -> "Cell":
        mul = lambda x: None if x is None else x * factor  # noqa: E731
        return Cell(mul(self.value), unit, self.fill, mul(self.sd), mul(self.se), mul(self.low), mul(self.high),
                    self.sources, self.method, self.reason)

    def as_dict(self) -> dict:
        out = {"value": _round(self.value), "unit": self.unit, "sd": _round(self.sd), "se": _round(self.se),
               "fill": self.fill, "sources": list(self.sources), "method": self.method}
        if self.low is not None:
            out["interval"] = [_round(self.low), _round(self.high)]
            out["interval_kind"] = ("95 % prediction interval" if "prediction interval" in self.method
                                    else "range of the study values")
        if self.reason:
            out["reason"] = self.reason
        return out


def _round(x, digits=4):
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return None
    return float(f"{x:.{digits}g}")


def _fill_for(resolved: Resolved, body_weight: float) -> str:
    """measured/pooled only when every row is absolute and describes this body weight; else scaled."""
    at = resolved.absolute_at
    same = bool(at) and all(abs(m / body_weight - 1) < SAME_BODY_WEIGHT for m in at)
    if not same:
        return "scaled"
    return "measured" if resolved.estimate.n_studies == 1 else "pooled"


def _cell(resolved: Resolved, factor: float, unit: str, body_weight: float | None, extra_method: str = "") -> Cell:
    """A resolved estimate times ``factor``; ``body_weight`` None means nothing was scaled (a fraction)."""
    if not resolved.ok:
        return Cell.gap(unit, resolved.reason)
    est: Estimate = resolved.estimate.scaled(factor)
    method = est.method + (f" ({'; '.join(resolved.notes)})" if resolved.notes else "") + extra_method
    fill = ("measured" if est.n_studies == 1 else "pooled") if body_weight is None else \
        _fill_for(resolved, body_weight)
    return Cell(est.value, unit, fill, est.sd, est.se, est.low, est.high, est.sources, method)


def _sum_cells(cells: list[Cell], unit: str, what: str) -> Cell:
    """Lumped compartments: values add; standard errors add in quadrature; any gap makes a gap."""
    gaps = [c for c in cells if c.fill == "gap"]
    if gaps:
        return Cell.gap(unit, "; ".join(c.reason for c in gaps))
    if len(cells) == 1:
        return cells[0]
    fills = {c.fill for c in cells}
    fill = "scaled" if "scaled" in fills else "allometric" if "allometric" in fills else \
        "pooled" if len(cells) > 1 else cells[0].fill
    ses = [c.se for c in cells]
    se = math.sqrt(sum(s * s for s in ses)) if all(s is not None for s in ses) else None
    sources = tuple(dict.fromkeys(s for c in cells for s in c.sources))
    return Cell(sum(c.value for c in cells), unit, fill, None, se, None, None, sources, f"sum of {what}")


@dataclass
class ParameterSet:
    species: str
    life_stage: str
    sex: str | None
    layout: Layout
    body_weight: Cell
    cardiac_output: Cell
    volumes: dict[str, Cell]
    flows: dict[str, Cell]
    liver_flow: str  # what the liver's flow means in this set
    physiology: dict[str, Cell] = field(default_factory=dict)  # GFR and hematocrit
    checks: list[dict] = field(default_factory=list)
    fill_policy: str = "none"
    units: str = "SI"

    # ---- views -------------------------------------------------------------------------------
    @property
    def compartments(self) -> list[str]:
        return list(self.layout.compartments) + [REST]

    @property
    def gaps(self) -> list[dict]:
        out = []
        for name, cell in (("body_weight", self.body_weight), ("cardiac_output", self.cardiac_output)):
            if cell.fill == "gap":
                out.append({"compartment": "whole_body", "quantity": name, "reason": cell.reason})
        for name, cell in self.physiology.items():
            if cell.fill == "gap":
                out.append({"compartment": PHYSIOLOGY[name], "quantity": name, "reason": cell.reason})
        for comp in self.compartments:
            for quantity, cell in (("volume", self.volumes[comp]), ("blood_flow", self.flows[comp])):
                if cell.fill == "gap":
                    out.append({"compartment": comp, "quantity": quantity, "reason": cell.reason})
        return out

    def _unit_cell(self, parameter: str, cell: Cell) -> Cell:
        unit, factor = UNITS[self.units][parameter]
        return cell.in_units(unit, factor)

    @property
    def table(self) -> pd.DataFrame:
        rows = [dict(compartment="whole_body", parameter="body_weight", **_flat(self.body_weight)),
                dict(compartment="whole_body", parameter="cardiac_output",
                     **_flat(self._unit_cell("blood_flow", self.cardiac_output)))]
        for name, cell in self.physiology.items():
            rows.append(dict(compartment=PHYSIOLOGY[name], parameter=name, **_flat(self._unit_cell(name, cell))))
        for comp in self.compartments:
            rows.append(dict(compartment=comp, parameter="volume",
                             **_flat(self._unit_cell("volume", self.volumes[comp]))))
            rows.append(dict(compartment=comp, parameter="blood_flow",
                             **_flat(self._unit_cell("blood_flow", self.flows[comp]))))
        return pd.DataFrame(rows)

    def quantity(self, compartment: str, parameter: str):
        """One number as a pint Quantity (None for a gap)."""
        from ..units import Quantity

        match = self.table.query("compartment == @compartment and parameter == @parameter")
        if match.empty:
            raise KeyError(f"no {parameter} for {compartment}; compartments: {', '.join(self.compartments)}")
        row = match.iloc[0]
        return None if pd.isna(row["value"]) else Quantity(float(row["value"]), row["unit"])

    def to_dict(self) -> dict:
        return {
            "species": self.species,
            "life_stage": self.life_stage,
            "sex": self.sex,
            "layout": self.layout.name,
            "fill_policy": self.fill_policy,
            "body_weight": self.body_weight.as_dict(),
            "cardiac_output": self._unit_cell("blood_flow", self.cardiac_output).as_dict(),
            "liver_flow": self.liver_flow,
            "physiology": {name: self._unit_cell(name, cell).as_dict() for name, cell in self.physiology.items()},
            "compartments": [
                {"compartment": comp, "stored_compartments": self.layout.compartments.get(comp, []),
                 "volume": self._unit_cell("volume", self.volumes[comp]).as_dict(),
                 "blood_flow": self._unit_cell("blood_flow", self.flows[comp]).as_dict()}
                for comp in self.compartments
            ],
            "gaps": self.gaps,
            "checks": self.checks,
            "caution": CAUTION,
        }

    def to_json(self, indent: int = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent, ensure_ascii=False)

    def to_csv(self, path=None) -> str | None:
        frame = self.table.assign(species=self.species, life_stage=self.life_stage)
        return frame.to_csv(path, index=False, lineterminator="\n")

    def to_sbml(self) -> str:
        from .sbml import parameter_set_to_sbml

        return parameter_set_to_sbml(self)


def _flat(cell: Cell) -> dict:
    return {"value": cell.value if cell.value is not None else np.nan, "unit": cell.unit,
            "sd": cell.sd, "se": cell.se, "low": cell.low, "high": cell.high, "fill": cell.fill,
            "sources": "; ".join(cell.sources), "method": cell.method, "note": cell.reason}


# ---- assembly -------------------------------------------------------------------------------------
def _body_weight(resolver: Resolver, body_weight) -> tuple[Cell, float | None]:
    if body_weight is None:
        bw = resolver.body_weight
        if not bw.ok:
            return Cell.gap("kg", bw.reason + "; give --body-weight"), None
        est = bw.estimate
        fill = "measured" if est.n_studies == 1 else "pooled"
        return Cell(est.value, "kg", fill, est.sd, est.se, est.low, est.high, est.sources,
                    f"typical body mass: {est.method}"), est.value
    from ..units import UnitError, to_quantity

    try:
        kg = float(to_quantity(body_weight, "kg").to("kg").magnitude)
    except (UnitError, Exception) as exc:
        raise ParameterSetError(f"body weight {body_weight!r} is not a mass: {exc}") from None
    if not kg > 0 or not math.isfinite(kg):
        raise ParameterSetError(f"body weight must be positive, got {body_weight!r}")
    return Cell(kg, "kg", "measured", method="given by the user"), kg


def _volume_cells(resolver: Resolver, layout: Layout, bw: float | None) -> dict[str, Cell]:
    cells = {}
    for comp, parts in layout.compartments.items():
        members = []
        for part in parts:
            if bw is None:
                members.append(Cell.gap("L", f"{part}: no body weight to scale to"))
                continue
            members.append(_cell(resolver.volume_per_kg(part), bw, "L", bw))
        cells[comp] = _sum_cells(members, "L", " + ".join(parts))
    return cells


def _flow_cells(resolver: Resolver, layout: Layout, co: Cell, bw: float | None) -> tuple[dict[str, Cell], str]:
    """Flows of each model compartment, and a sentence on what the liver's flow is."""
    portal_models = [m for m, parts in layout.compartments.items() if set(parts) <= PORTAL_ORGANS]
    cells: dict[str, Cell] = {}
    for comp, parts in layout.compartments.items():
        if parts == ["blood"]:
            cells[comp] = Cell(None, "L/h", "not_applicable", method="blood carries the cardiac output")
            continue
        if parts == ["lung"]:
            cells[comp] = Cell(co.value, "L/h", co.fill, co.sd, co.se, co.low, co.high, co.sources,
                               "pulmonary flow equals cardiac output") if co.fill != "gap" else \
                Cell.gap("L/h", "lung flow equals cardiac output, which is a gap")
            continue
        members = []
        for part in parts:
            if portal_models == [] and part in PORTAL_ORGANS and comp != "liver" and "liver" in layout.members():
                continue  # drains into the liver, whose total flow already carries it
            if part == "lung":
                continue  # lung flow is the whole cardiac output, not a systemic branch
            if co.fill == "gap":
                members.append(Cell.gap("L/h", f"{part}: cardiac output is a gap"))
                continue
            members.append(_cell(resolver.flow_fraction(part), co.value, "L/h", bw or 0.0,
                                 extra_method=" × cardiac output"))
        cells[comp] = _sum_cells(members, "L/h", " + ".join(parts)) if members else \
            Cell(0.0, "L/h", "not_applicable", method="flow counted within the liver's total hepatic flow")
    liver = next((m for m, parts in layout.compartments.items() if "liver" in parts), None)
    if liver is None:
        return cells, "no liver compartment in this layout"
    if portal_models:
        portal = [cells[m] for m in portal_models]
        total = cells[liver]
        if total.fill == "gap" or any(c.fill == "gap" for c in portal):
            cells[liver] = Cell.gap("L/h", "hepatic artery flow needs total liver flow and every portal organ's flow")
        else:
            value = total.value - sum(c.value for c in portal)
            sources = tuple(dict.fromkeys(total.sources + tuple(s for c in portal for s in c.sources)))
            cells[liver] = Cell(value, "L/h", "scaled", None, None, None, None, sources,
                                f"hepatic artery = total hepatic flow − {' − '.join(portal_models)}")
        return cells, (f"hepatic artery only: the liver also receives the outflow of {', '.join(portal_models)} "
                       "through the portal vein")
    return cells, ("total hepatic flow (hepatic artery + portal vein); portal organs lumped elsewhere are not "
                   "counted again in their compartment's flow")


def _close_balances(ps: ParameterSet) -> None:
    bw, co = ps.body_weight, ps.cardiac_output
    vols = [ps.volumes[c] for c in ps.layout.compartments]
    vol_gaps = [c for c in ps.layout.compartments if ps.volumes[c].fill == "gap"]
    if bw.fill == "gap" or vol_gaps:
        ps.volumes[REST] = Cell.gap("L", "cannot close the mass balance: " +
                                    (", ".join(vol_gaps) + " lack a volume" if vol_gaps else "no body weight"))
    else:
        named = sum(v.value for v in vols)  # volumes in L; rest mass at 1 kg/L, stated below
        rest = bw.value / REST_DENSITY - named
        ps.volumes[REST] = Cell(rest, "L", "scaled", method=f"body weight at {REST_DENSITY:g} kg/L minus the "
                                "named compartments' volumes")
        ps.checks.append(_check("volumes_within_body_weight", rest >= 0,
                                f"named volumes {named:.4g} L against body weight {bw.value:.4g} kg "
                                f"(≈ {bw.value / REST_DENSITY:.4g} L at {REST_DENSITY:g} kg/L)"))
    systemic = {c: f for c, f in ps.flows.items() if f.fill not in ("not_applicable",)
                and ps.layout.compartments.get(c) != ["lung"]}
    flow_gaps = [c for c, f in systemic.items() if f.fill == "gap"]
    if co.fill == "gap" or flow_gaps:
        ps.flows[REST] = Cell.gap("L/h", "cannot close the flow balance: " +
                                  (", ".join(flow_gaps) + " lack a flow" if flow_gaps else "no cardiac output"))
    else:
        named = sum(f.value for f in systemic.values())
        rest = co.value - named
        ps.flows[REST] = Cell(rest, "L/h", "scaled", method="cardiac output minus the named systemic flows")
        ps.checks.append(_check("systemic_flows_within_cardiac_output", named <= co.value * (1 + FLOW_TOLERANCE),
                                f"named systemic flows {named:.4g} L/h against cardiac output {co.value:.4g} L/h "
                                f"(tolerance {FLOW_TOLERANCE:.0%})"))
        ps.checks.append(_check("rest_of_body_flow_not_negative", rest >= 0,
                                f"rest_of_body flow {rest:.4g} L/h"))


def _check(name: str, ok: bool, detail: str) -> dict:
    return {"check": name, "status": "pass" if ok else "fail", "detail": detail}


def _source_sum_checks(resolver: Resolver, ps: ParameterSet) -> None:
    """Fractions given by one source (one group of subjects) should not exceed the whole."""
    comps = ps.layout.members() - {"whole_body", "lung"}
    for quantity, limit in (("tissue_mass_fraction", 1.0), ("blood_flow_fraction", 1.0 + 0.1)):
        groups: dict[tuple, dict[str, float]] = {}
        for r in resolver.all_rows:
            if r["quantity_id"] == quantity and r["compartment_id"] in comps:
                key = (r["source_id"], r["sex"], r["strain"], r["age"])
                groups.setdefault(key, {})[r["compartment_id"]] = r["value_canonical"]
        for (source, *_), by_comp in groups.items():
            if quantity == "blood_flow_fraction" and "liver" in by_comp:  # total hepatic flow carries the portal organs
                by_comp = {c: v for c, v in by_comp.items() if c not in PORTAL_ORGANS}
            total = sum(by_comp.values())
            if total > limit:
                ps.checks.append(_check(f"{quantity}_sum_{source}", False,
                                        f"{source}: {quantity} of {len(by_comp)} compartments sum to "
                                        f"{total:.3f} (limit {limit:g})"))


def parameter_set(store, species: str, *, life_stage: str = "adult", sex: str | None = None, body_weight=None,
                  layout="whole_body", fill: str = "none", units: str = "SI") -> ParameterSet:
    if fill not in ("none", "allometric"):
        raise ParameterSetError(f"fill must be 'none' or 'allometric', not {fill!r}")
    if units not in UNITS:
        raise ParameterSetError(f"units must be one of {', '.join(UNITS)}, not {units!r}")
    if sex not in (None, "male", "female"):
        raise ParameterSetError(f"sex must be male or female (or omitted), not {sex!r}")
    store.require("species", species, "species")
    store.require("life_stages", life_stage, "life stage")
    lay = layout if isinstance(layout, Layout) else load_layout(layout, set(store.ids("compartments")))
    resolver = Resolver(store, species, life_stage, sex)
    bw_cell, bw = _body_weight(resolver, body_weight)
    if bw is None:
        co = Cell.gap("L/h", "no body weight to scale cardiac output to")
    else:
        co = _cell(resolver.cardiac_output(bw), 1.0, "L/h", bw)
    if fill == "allometric" and co.fill == "gap" and bw is not None:
        from .fill import fill_cardiac_output

        co = fill_cardiac_output(store, species, life_stage, lay, bw) or co
    volumes = _volume_cells(resolver, lay, bw)
    flows, liver_flow = _flow_cells(resolver, lay, co, bw)
    physiology = {
        "gfr": _cell(resolver.per_body_mass("gfr", "whole_body"), bw, "L/h", bw) if bw is not None
        else Cell.gap("L/h", "no body weight to scale GFR to"),
        "hematocrit": _cell(resolver.fraction("hematocrit", "blood"), 1.0, "1", None),
    }
    ps = ParameterSet(species, life_stage, sex, lay, bw_cell, co, volumes, flows, liver_flow, physiology,
                      fill_policy=fill, units=units)
    if fill == "allometric":
        from .fill import fill_allometric

        fill_allometric(store, ps)
    _close_balances(ps)
    _source_sum_checks(resolver, ps)
    for comp, cell in ps.volumes.items():
        if "density 1 kg/L assumed" in cell.method:
            ps.checks.append({"check": f"density_assumed_{comp}", "status": "warn",
                              "detail": f"{comp}: no tissue density stored; volume uses 1 kg/L"})
    return ps


def resolve_parameter(store, species: str, compartment: str, parameter: str, *, life_stage: str = "adult",
                      sex: str | None = None):
    """The rows behind one stored compartment's parameter and how they combine, before scaling.

    ``parameter`` is "volume" (result in L per kg body weight), "blood_flow" (fraction of cardiac
    output), "cardiac_output" (L/h per kg body weight) or "body_weight" (kg). The returned
    ``Resolved`` has ``estimate`` (value, se, method, sources), ``rows`` (each curated row with
    its route and its value in the combined form) and ``reason`` for a gap.
    """
    store.require("species", species, "species")
    resolver = Resolver(store, species, life_stage, sex)
    if parameter == "volume":
        return resolver.volume_per_kg(compartment)
    if parameter == "blood_flow":
        return resolver.flow_fraction(compartment)
    if parameter == "cardiac_output":
        return resolver.cardiac_output(1.0)
    if parameter == "body_weight":
        return resolver.body_weight
    raise ParameterSetError(f"parameter must be volume, blood_flow, cardiac_output or body_weight, not {parameter!r}")
