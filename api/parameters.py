"""Model-ready parameter sets: a layout's volumes and flows at one body weight, every gap marked."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from .. import CAUTION
from ..errors import BodyplanError
from ..schema.descriptors import ECTOTHERMS
from ..schema.model import (AT_REST, LIVER, PARAMETERS, PORTAL_ORGANS, VESSELS_OF_LIVER, circulation, default_layout,
                            has_own_flow, is_portal, is_pulmonary, slot_id)
from .cell import Cell
from .checks import (animals_mass_check, class_check, close_balances, condition_check, source_sum_checks, studied_range_check,
                     temperature_check)
from .fallback import fall_back, from_stage, other_stage_rows, point_to_other_stages, stage_order
from .layouts import REST, Layout, load_layout
from .pooling import Estimate
from .resolve import SAME_BODY_WEIGHT, Resolved, Resolver

UNITS = {"SI": {p.id: (p.unit, 1.0) for p in PARAMETERS.values()},
         "clinical": {p.id: p.clinical for p in PARAMETERS.values()}}
PHYSIOLOGY = ("gfr", "hematocrit")  # whole-body numbers a PBPK model usually needs besides the compartments


class ParameterSetError(BodyplanError, ValueError):
    """A parameter-set request that cannot be answered as asked (unknown option, bad body weight)."""


def _origin_for(resolved: Resolved, body_mass: float) -> str:
    """measured/pooled only when every row is absolute and describes this body mass; else scaled."""
    at = resolved.absolute_at
    same = bool(at) and all(abs(m / body_mass - 1) < SAME_BODY_WEIGHT for m in at)
    if not same:
        return "scaled"
    return "measured" if resolved.estimate.n_studies == 1 else "pooled"


def _scaled_cell(resolved: Resolved, factor: float, unit: str, body_mass: float | None,
                 extra_method: str = "") -> Cell:
    """A resolved estimate times ``factor``; ``body_mass`` None means nothing was scaled (a fraction)."""
    if not resolved.ok:
        return Cell.gap(unit, resolved.reason)
    est: Estimate = resolved.estimate.scaled(factor)
    method = est.method + (f" ({'; '.join(resolved.notes)})" if resolved.notes else "") + extra_method
    origin = ("measured" if est.n_studies == 1 else "pooled") if body_mass is None else \
        _origin_for(resolved, body_mass)
    return Cell(est.value, unit, origin, est.sd, est.se, est.low, est.high, est.sources, method,
                verified_share=resolved.verified_share, conditions=_conditions(resolved.rows),
                animals_kg=_animals_kg([r.get("subject_body_mass_kg") for r in resolved.rows]))


def _conditions(rows) -> tuple[str, ...]:
    """The states other than rest of the animals behind a number (vocab/conditions.csv)."""
    return tuple(sorted({r["condition_id"] for r in rows if r.get("condition_id", AT_REST) != AT_REST}))


def _animals_kg(masses: list) -> tuple[float, float] | None:
    """The body-mass range of the animals behind a number, when each row (or part) gives its animals' mass."""
    return (min(masses), max(masses)) if masses and None not in masses else None


def _animals_of(cells: list[Cell]) -> tuple[float, float] | None:
    return _animals_kg([m for c in cells for m in (c.animals_kg or (None,))])


def _sum_cells(cells: list[Cell], unit: str, what: str) -> Cell:
    """Lumped compartments: values add; standard errors add in quadrature; any gap makes a gap."""
    gaps = [c for c in cells if c.origin == "gap"]
    if gaps:
        return Cell.gap(unit, "; ".join(c.reason for c in gaps))
    if len(cells) == 1:
        return cells[0]
    origins = {c.origin for c in cells}
    origin = "scaled" if "scaled" in origins else "allometric" if "allometric" in origins else "pooled"
    ses = [c.se for c in cells]
    se = math.sqrt(sum(s * s for s in ses)) if all(s is not None for s in ses) else None
    sources = tuple(dict.fromkeys(s for c in cells for s in c.sources))
    masses = [c.mass for c in cells]
    return Cell(sum(c.value for c in cells), unit, origin, None, se, None, None, sources, f"sum of {what}",
                verified_share=_weighted_share(cells), mass=None if None in masses else sum(masses),
                conditions=tuple(sorted({k for c in cells for k in c.conditions})), animals_kg=_animals_of(cells))


def _weighted_share(cells: list[Cell]) -> float | None:
    """The verified share of a number made of others, each weighing its size."""
    known = [c for c in cells if c.verified_share is not None and c.value is not None]
    total = sum(abs(c.value) for c in known)
    if not known or total == 0:
        return None
    return sum(abs(c.value) * c.verified_share for c in known) / total


@dataclass
class ParameterSet:
    species: str
    life_stage: str
    sex: str | None
    layout: Layout
    body_mass: Cell
    cardiac_output: Cell
    volumes: dict[str, Cell]
    flows: dict[str, Cell]
    liver_flow: str  # what the liver's flow means in this set
    physiology: dict[str, Cell] = field(default_factory=dict)  # GFR and hematocrit
    checks: list[dict] = field(default_factory=list)
    fill: str = "none"  # how gaps were filled: none, or allometric on request
    units: str = "SI"
    partition: list[dict] = field(default_factory=list)  # Kp per compound and model compartment, when asked
    temperature: float | None = None  # °C, for ectotherms when asked: rows measured near it

    def add_partition_coefficients(self, store, compounds, *, method: str = "rodgers_rowland",
                                   borrow_from=None) -> "ParameterSet":
        """Tissue:plasma and tissue:blood Kp of every model compartment for each compound (volume-weighted
        over a lumped compartment's parts; see api/partition.py), carried into the JSON and the SBML."""
        from .partition import model_partition_coefficients, partition_coefficients

        kp = partition_coefficients(store, self.species, compounds, method=method, life_stage=self.life_stage,
                                    borrow_from=borrow_from)
        frame = model_partition_coefficients(kp, self, store)
        self.partition = [{k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in row.items()}
                          for row in frame.to_dict("records")]
        return self

    # ---- views -------------------------------------------------------------------------------
    @property
    def compartments(self) -> list[str]:
        return list(self.layout.compartments) + [REST]

    def cells(self):
        """(compartment, parameter, cell) for every number of the set, whole-body ones first."""
        yield "whole_body", "body_mass", self.body_mass
        yield "whole_body", "cardiac_output", self.cardiac_output
        for name, cell in self.physiology.items():
            yield PARAMETERS[name].compartment, name, cell
        for comp in self.compartments:
            yield comp, "volume", self.volumes[comp]
            yield comp, "blood_flow", self.flows[comp]

    @property
    def gaps(self) -> list[dict]:
        return [{"compartment": comp, "quantity": parameter, "reason": cell.reason}
                for comp, parameter, cell in self.cells() if cell.origin == "gap"]

    def _unit_cell(self, parameter: str, cell: Cell) -> Cell:
        unit, factor = UNITS[self.units][parameter]
        return cell.in_units(unit, factor)

    @property
    def table(self) -> pd.DataFrame:
        return pd.DataFrame([dict(compartment=comp, parameter=parameter, slot=slot_id(comp, parameter),
                                  **_flat(self._unit_cell(parameter, cell)))
                             for comp, parameter, cell in self.cells()])

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
            "fill": self.fill,
            **({"temperature_c": self.temperature} if self.temperature is not None else {}),
            "body_mass": self.body_mass.as_dict(),
            "cardiac_output": self._unit_cell("cardiac_output", self.cardiac_output).as_dict(),
            "liver_flow": self.liver_flow,
            "circulation": circulation(self.layout.compartments, REST),
            "physiology": {name: self._unit_cell(name, cell).as_dict() for name, cell in self.physiology.items()},
            "compartments": [
                {"compartment": comp, "stored_compartments": self.layout.compartments.get(comp, []),
                 "volume": self._unit_cell("volume", self.volumes[comp]).as_dict(),
                 "blood_flow": self._unit_cell("blood_flow", self.flows[comp]).as_dict()}
                for comp in self.compartments
            ],
            "gaps": self.gaps,
            "checks": self.checks,
            **({"partition_coefficients": self.partition} if self.partition else {}),
            "caution": CAUTION,
        }

    def to_json(self, indent: int = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent, ensure_ascii=False)

    def to_csv(self, path=None) -> str | None:
        frame = self.table.assign(species=self.species, life_stage=self.life_stage)
        return frame.to_csv(path, index=False, lineterminator="\n")

    def to_sbml(self, allow_gaps: bool = False) -> str:
        """SBML Level 3; a set with gaps is refused unless ``allow_gaps`` (then each gap is NaN, marked)."""
        from .sbml import parameter_set_to_sbml

        return parameter_set_to_sbml(self, allow_gaps=allow_gaps)


def _flat(cell: Cell) -> dict:
    return {"value": cell.value if cell.value is not None else np.nan, "unit": cell.unit,
            "sd": cell.sd, "se": cell.se, "low": cell.low, "high": cell.high, "origin": cell.origin,
            "verified_share": cell.verified_share, "conditions": "; ".join(cell.conditions),
            "sources": "; ".join(cell.sources), "method": cell.method, "note": cell.reason,
            "depends_on": "; ".join(cell.depends_on)}


# ---- assembly -------------------------------------------------------------------------------------
def _body_mass(resolver: Resolver, body_mass) -> tuple[Cell, float | None]:
    if body_mass is None:
        bw = resolver.body_mass
        if not bw.ok:
            return Cell.gap("kg", bw.reason + "; give a body mass").resting_on("body_mass"), None
        est = bw.estimate
        origin = "measured" if est.n_studies == 1 else "pooled"
        return Cell(est.value, "kg", origin, est.sd, est.se, est.low, est.high, est.sources,
                    f"typical body mass: {est.method}", depends_on=("body_mass",),
                    verified_share=bw.verified_share), est.value
    kg = _kilograms(body_mass)
    if not kg > 0 or not math.isfinite(kg):
        raise ParameterSetError(f"body mass must be positive, got {body_mass!r}")
    return Cell(kg, "kg", "given", method="given by the user"), kg


def _kilograms(body_mass) -> float:
    """A body mass in kg: a number is kg; text passes the strict grammar, and only a unit other than kg
    (the canonical unit, so nothing to convert) goes through the registry."""
    from ..units import UnitError, parse_quantity_text, to_quantity

    if isinstance(body_mass, (int, float)) and not isinstance(body_mass, bool):
        return float(body_mass)
    try:
        if isinstance(body_mass, str):
            text = parse_quantity_text(body_mass)
            if text.unit.strip() == "kg" and text.uncertainty is None:
                return float(text.number)
        return float(to_quantity(body_mass, "kg").to("kg").magnitude)
    except (UnitError, Exception) as exc:
        raise ParameterSetError(f"body mass {body_mass!r} is not a mass: {exc}") from None


def _volume_cells(resolver: Resolver, layout: Layout, bw: float | None) -> dict[str, Cell]:
    cells = {}
    for comp, parts in layout.compartments.items():
        members = []
        for part in parts:
            if bw is None:
                members.append(Cell.gap("L", f"{part}: no body mass to scale to"))
                continue
            volume = _scaled_cell(resolver.volume_per_kg(part), bw, "L", bw)
            if volume.value is not None:
                volume = replace(volume, mass=volume.value * resolver.density(part)[0])
            members.append(volume)
        cells[comp] = _sum_cells(members, "L", " + ".join(parts)).resting_on(slot_id(comp, "volume"), "body_mass")
    return cells


def _flow_cells(resolver: Resolver, layout: Layout, co: Cell, bw: float | None) -> tuple[dict[str, Cell], str]:
    """Flows of each model compartment, and a sentence on what the liver's flow is."""
    portal_models = [m for m, parts in layout.compartments.items() if is_portal(parts)]
    liver = next((m for m, parts in layout.compartments.items() if LIVER in parts), None)
    cells: dict[str, Cell] = {}
    for comp, parts in layout.compartments.items():
        if not has_own_flow(parts):
            cells[comp] = Cell(None, "L/h", "not_applicable", method="blood carries the cardiac output")
            continue
        if is_pulmonary(parts):
            cells[comp] = (replace(co, method=f"pulmonary flow equals cardiac output: {co.method}") if co.origin != "gap" else
                           Cell.gap("L/h", "lung flow equals cardiac output, which is a gap")
                           ).resting_on("cardiac_output", "body_mass")
            continue
        members = []
        for part in parts:
            if not portal_models and part in PORTAL_ORGANS and comp != liver and liver is not None:
                continue  # drains into the liver, whose total flow already carries it
            if is_pulmonary([part]):
                continue  # lung flow is the whole cardiac output, not a systemic branch
            if co.origin == "gap":
                members.append(Cell.gap("L/h", f"{part}: cardiac output is a gap"))
                continue
            members.append(_scaled_cell(resolver.flow_fraction(part), co.value, "L/h", bw or 0.0,
                                        extra_method=" × cardiac output"))
        cell = _sum_cells(members, "L/h", " + ".join(parts)) if members else \
            Cell(0.0, "L/h", "not_applicable", method="flow counted within the liver's total hepatic flow")
        cells[comp] = cell.resting_on(slot_id(comp, "blood_flow"), "cardiac_output", "body_mass")
    if liver is None:
        return cells, "no liver compartment in this layout"
    return cells, _liver_circulation(resolver, cells, liver, portal_models, co, bw)


def _liver_circulation(resolver: Resolver, cells: dict[str, Cell], liver: str, portal_models: list[str], co: Cell,
                       bw: float | None) -> str:
    """Give the liver the flow the layout needs from whatever the store has: total hepatic flow,
    hepatic artery, portal vein flow, the portal organs' flows. With portal compartments in the
    layout the liver's own flow is the hepatic artery (their outflow reaches it through the portal
    vein); without, it is the total hepatic flow. Returns what the liver's flow is, in words."""
    def vessel(name: str) -> Cell:
        if co.origin == "gap":
            return Cell.gap("L/h", "cardiac output is a gap")
        return _scaled_cell(resolver.flow_fraction(name), co.value, "L/h", bw or 0.0, " × cardiac output"
                            ).resting_on(slot_id(liver, "blood_flow"), "cardiac_output", "body_mass")

    total, artery, portal_vein = cells[liver], vessel(VESSELS_OF_LIVER[0]), vessel(VESSELS_OF_LIVER[1])
    known = lambda c: c.origin != "gap"  # noqa: E731
    portal = {m: cells[m] for m in portal_models}
    if not portal_models:  # the liver takes the total hepatic flow
        if not known(total) and known(artery) and known(portal_vein):
            cells[liver] = _combined([artery, portal_vein], artery.value + portal_vein.value,
                                     "total hepatic flow = hepatic artery + portal vein")
        return ("total hepatic flow (hepatic artery + portal vein); portal organs lumped elsewhere are not "
                "counted again in their compartment's flow")
    if not known(portal_vein) and known(total) and known(artery):
        portal_vein = _combined([total, artery], total.value - artery.value, "portal vein = total hepatic − hepatic artery")
    missing = [m for m, c in portal.items() if not known(c)]
    if len(missing) == 1 and known(portal_vein):  # the one portal organ without a flow of its own
        others = [portal[m] for m in portal if m != missing[0]]
        value = portal_vein.value - sum(c.value for c in others)
        if value > 0:
            cells[missing[0]] = _combined([portal_vein, *others], value, "portal vein − " + (
                " − ".join(m for m in portal if m != missing[0]) or "nothing")).resting_on(*portal[missing[0]].depends_on)
            portal[missing[0]] = cells[missing[0]]
    needs = tuple(slot_id(m, "blood_flow") for m in portal_models)
    if known(artery):
        cells[liver] = replace(artery, method="hepatic artery: " + artery.method).resting_on(*needs)
    elif known(total) and known(portal_vein):
        cells[liver] = _combined([total, portal_vein], total.value - portal_vein.value,
                                 "hepatic artery = total hepatic − portal vein")
    elif known(total) and all(known(c) for c in portal.values()):
        cells[liver] = _combined([total, *portal.values()], total.value - sum(c.value for c in portal.values()),
                                 f"hepatic artery = total hepatic flow − {' − '.join(portal_models)}")
    else:
        cells[liver] = Cell.gap("L/h", "hepatic artery flow needs a hepatic artery flow, or the total hepatic flow and "
                                "the portal vein flow or every portal organ's flow"
                                ).resting_on(*total.depends_on, *needs)
    return (f"hepatic artery only: the liver also receives the outflow of {', '.join(portal_models)} "
            "through the portal vein")


def _combined(parts: list[Cell], value: float, method: str) -> Cell:
    """A flow computed from other flows of the same set: their sources and dependencies, origin scaled."""
    sources = tuple(dict.fromkeys(s for c in parts for s in c.sources))
    depends = tuple(dict.fromkeys(d for c in parts for d in c.depends_on))
    return Cell(value, "L/h", "scaled", None, None, None, None, sources, method, depends_on=depends,
                verified_share=_weighted_share(parts), conditions=tuple(sorted({k for c in parts for k in c.conditions})),
                animals_kg=_animals_of(parts))


def _from_other_stage(store, species, life_stage, number, **rows) -> Cell | None:
    """The first of the other stages (nearest first) whose rows give ``number(resolver)``, named as a fallback;
    ``rows`` are the set's row options (sex, verified_only, animal_class, temperature)."""
    stages = [r[0] for r in store.query("SELECT DISTINCT life_stage_id FROM curated_values WHERE species_id = ?",
                                        (species,))]
    for stage in stage_order(life_stage, stages):
        cell = number(Resolver(store, species, stage, **rows))
        if cell is not None:
            return from_stage(cell, stage)
    return None


def _cardiac_output_of(bw: float):
    def number(resolver):
        resolved = resolver.cardiac_output(bw)
        return _scaled_cell(resolved, 1.0, "L/h", bw) if resolved.ok else None
    return number


def _typical_body_mass(resolver) -> Cell | None:
    cell, bw = _body_mass(resolver, None)
    return cell if bw is not None else None


def _temperature_option(temperature, species: str, taxon: str) -> float | None:
    """A set's water or air temperature in °C; only for animals whose body takes it (fish, reptiles …)."""
    if temperature is None:
        return None
    if taxon not in ECTOTHERMS:
        raise ParameterSetError(f"a {taxon} such as {species} keeps its own body temperature; a temperature "
                                "is for fish, reptiles and amphibians")
    if isinstance(temperature, (int, float)) and not isinstance(temperature, bool):
        return float(temperature)
    from ..units import UnitError, temperature_celsius

    try:
        return temperature_celsius(temperature)
    except UnitError as exc:
        raise ParameterSetError(str(exc)) from None


def _body_mass_option(body_mass, body_weight):
    if body_weight is not None:
        import warnings

        warnings.warn("body_weight= is renamed body_mass=; the old name goes in the next release",
                      DeprecationWarning, stacklevel=3)
        if body_mass is None:
            return body_weight
    return body_mass


def parameter_set(store, species: str, *, life_stage: str = "adult", sex: str | None = None, body_mass=None,
                  layout=None, fill: str = "none", units: str = "SI", stage_fallback: bool = False,
                  verified_only: bool = False, animal_class: str | None = None, temperature=None,
                  body_weight=None) -> ParameterSet:
    """A layout's volumes and flows at one body mass (the species' typical one if not given), every gap
    marked. The layout is whole_body (fish: fish) unless one is given. ``fill="allometric"`` fills gaps across species; ``stage_fallback`` fills them from the
    species' rows at other life stages (named on each value); ``verified_only`` uses only rows read in
    their source text; ``animal_class`` (vocab/classes.csv: broiler, dairy, minipig …) keeps rows of that
    class and rows that name none; ``temperature`` (fish and other ectotherms: '12 degC' or °C) keeps rows
    measured within TEMPERATURE_BAND of it and rows that state none; ``units`` is "SI" or "clinical"."""
    body_mass = _body_mass_option(body_mass, body_weight)
    if fill not in ("none", "allometric"):
        raise ParameterSetError(f"fill must be 'none' or 'allometric', not {fill!r}")
    if units not in UNITS:
        raise ParameterSetError(f"units must be one of {', '.join(UNITS)}, not {units!r}")
    if sex not in (None, "male", "female"):
        raise ParameterSetError(f"sex must be male or female (or omitted), not {sex!r}")
    store.require("species", species, "species")
    store.require("life_stages", life_stage, "life stage")
    taxon = store.query("SELECT taxon_class FROM species WHERE id = ?", (species,))[0][0]
    if layout is None:
        layout = default_layout(taxon)
    lay = layout if isinstance(layout, Layout) else load_layout(layout, set(store.ids("compartments")))
    lay = lay.for_animal(species, taxon)
    if animal_class is not None and not store.query("SELECT 1 FROM classes WHERE species = ? AND id = ?",
                                                     (species, animal_class)):
        known = [r[0] for r in store.query("SELECT id FROM classes WHERE species = ? ORDER BY id", (species,))]
        raise ParameterSetError(f"{species} has no class {animal_class!r}; "
                                f"{'its classes: ' + ', '.join(known) if known else 'none is curated'}")
    celsius = _temperature_option(temperature, species, taxon)
    rows = dict(sex=sex, verified_only=verified_only, animal_class=animal_class, temperature=celsius)
    resolver = Resolver(store, species, life_stage, **rows)
    bw_cell, bw = _body_mass(resolver, body_mass)
    options = dict(rows, layout=lay, fill=fill, units=units)
    if bw is None and stage_fallback:
        borrowed = _from_other_stage(store, species, life_stage, _typical_body_mass, **rows)
        if borrowed is not None:
            ps = parameter_set(store, species, life_stage=life_stage, body_mass=borrowed.value, stage_fallback=True,
                               **options)
            ps.body_mass = borrowed
            return ps
    resolver.target_mass = bw
    if bw is None:
        co = Cell.gap("L/h", "no body mass to scale cardiac output to")
    else:
        co = _scaled_cell(resolver.cardiac_output(bw), 1.0, "L/h", bw)
    if stage_fallback and co.origin == "gap" and bw is not None:  # the flows below are shares of it
        co = _from_other_stage(store, species, life_stage, _cardiac_output_of(bw), **rows) or co
    if fill == "allometric" and co.origin == "gap" and bw is not None:
        from .fill import fill_cardiac_output

        co = fill_cardiac_output(store, species, life_stage, lay, bw) or co
    co = co.resting_on("cardiac_output", "body_mass")
    volumes = _volume_cells(resolver, lay, bw)
    flows, liver_flow = _flow_cells(resolver, lay, co, bw)
    physiology = {}
    for name in PHYSIOLOGY:
        declared, resolved = PARAMETERS[name], resolver.resolve(name)
        if declared.resolved_as.startswith("fraction"):  # a share (hematocrit): not scaled to a body mass
            physiology[name] = _scaled_cell(resolved, 1.0, declared.unit, None).resting_on(name)
        elif bw is None:
            physiology[name] = Cell.gap(declared.unit, f"no body mass to scale {declared.label} to"
                                        ).resting_on(name, "body_mass")
        else:
            physiology[name] = _scaled_cell(resolved, bw, declared.unit, bw).resting_on(name, "body_mass")
    ps = ParameterSet(species, life_stage, sex, lay, bw_cell, co, volumes, flows, liver_flow, physiology,
                      fill=fill, units=units, temperature=celsius)
    if stage_fallback and bw is not None:
        # the other stage's own rows only: a gap still left is filled across species below, and says so
        other_stage = lambda stage: parameter_set(store, species, life_stage=stage, body_mass=bw,  # noqa: E731
                                                  **dict(options, fill="none"))
        had_co = ps.cardiac_output.origin != "gap"
        fall_back(store, ps, other_stage)
        if not had_co and ps.cardiac_output.origin != "gap":  # this stage's flow shares × the borrowed output
            again, _ = _flow_cells(resolver, lay, ps.cardiac_output, bw)
            ps.flows.update({c: again[c] for c, cell in ps.flows.items() if cell.origin == "gap"})
            fall_back(store, ps, other_stage)
    else:
        point_to_other_stages(ps, other_stage_rows(store, species, life_stage, lay))
    if fill == "allometric":
        from .fill import fill_allometric

        fill_allometric(store, ps)
    close_balances(ps)
    source_sum_checks(resolver, ps)
    class_check(resolver, ps)
    temperature_check(resolver, ps)
    condition_check(ps)
    animals_mass_check(ps)
    if bw_cell.origin == "given":
        studied_range_check(resolver, ps)
    for comp, cell in ps.volumes.items():
        if "density 1 kg/L assumed" in cell.method:
            ps.checks.append({"check": f"density_assumed_{comp}", "status": "warn",
                              "detail": f"{comp}: no tissue density stored; volume uses 1 kg/L"})
    return ps


def resolve_parameter(store, species: str, compartment: str, parameter: str, *, life_stage: str = "adult",
                      sex: str | None = None):
    """The rows behind one stored compartment's parameter and how they combine, before scaling.

    ``parameter`` is one of ``schema.model.PARAMETERS`` (volume, blood_flow, cardiac_output, gfr,
    hematocrit, body_mass); the result is in that parameter's ``resolved_as`` form. The returned
    ``Resolved`` has ``estimate`` (value, se, method, sources), ``rows`` (each curated row with its
    route and its value in the combined form) and ``reason`` for a gap.
    """
    if parameter not in PARAMETERS or PARAMETERS[parameter].computed:
        choices = ", ".join(p for p, d in PARAMETERS.items() if not d.computed)
        raise ParameterSetError(f"parameter must be one of {choices}, not {parameter!r}")
    store.require("species", species, "species")
    return Resolver(store, species, life_stage, sex).resolve(parameter, compartment)
