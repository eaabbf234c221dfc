"""A parameter set as an SBML Level 3 model a simulator can run once a modeller adds species and reactions.

- Units follow the set (``ps.units``): SI is litres, L/h and hours, clinical is mL, mL/min and minutes, so
  a flow times a concentration is an amount per model time unit. Substance and extent are moles.
- Every model compartment is an SBML compartment sized by its volume; body mass, cardiac output, GFR,
  hematocrit and each compartment's blood flow (``blood_flow_<compartment>``) are constant parameters.
- Each compartment and parameter carries a ``bodyplan`` annotation (namespace ``NS``): its provenance
  (origin, verified share, sources, method, interval) and, on compartments, the circulation (where the
  blood comes from, where it drains, which flow parameter carries it), so a program can wire the model
  from the file alone. DEVELOPERS.md shows how.
- A set with gaps is refused unless ``allow_gaps=True``; then each gap is NaN (never a default) and
  marked ``origin="gap"`` with its reason.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from html import escape

NS = "https://bodyplan.invalid/sbml/1"
PREFIX = "bodyplan"
# The set's unit → SBML unit id and, for derived units, its parts (kind, exponent, scale, multiplier).
# tests/test_simulation.py checks each definition against the pint registry.
SBML_UNITS = {
    "kg": ("kilogram", None),
    "1": ("dimensionless", None),
    "L": ("litre", None),
    "mL": ("millilitre", [("LITRE", 1, -3, 1.0)]),
    "L/h": ("litre_per_hour", [("LITRE", 1, 0, 1.0), ("SECOND", -1, 0, 3600.0)]),
    "mL/min": ("millilitre_per_minute", [("LITRE", 1, -3, 1.0), ("SECOND", -1, 0, 60.0)]),
    "hour": ("hour", [("SECOND", 1, 0, 3600.0)]),
    "minute": ("minute", [("SECOND", 1, 0, 60.0)]),
}
FLOW_PREFIX = "blood_flow_"
ET.register_namespace(PREFIX, NS)  # annotations read bodyplan:…, not ns0:…


def _check(status: int, what: str) -> None:
    import libsbml

    if status != libsbml.LIBSBML_OPERATION_SUCCESS:
        raise RuntimeError(f"libsbml could not set {what}: {libsbml.OperationReturnValue_toString(status)}")


def _q(tag: str) -> str:
    return f"{{{NS}}}{tag}"


def _number(x: float) -> str:
    return repr(float(x))


def _value_element(cell, quantity: str, compartment: str) -> ET.Element:
    """One number's provenance as attributes; lists (sources, depends_on) are space-separated ids."""
    attrs = {"quantity": quantity, "compartment": compartment, "unit": cell.unit, "origin": cell.origin}
    if cell.verified_share is not None:
        attrs["verified_share"] = _number(cell.verified_share)
    for name in ("sd", "se", "low", "high"):
        if getattr(cell, name) is not None and math.isfinite(getattr(cell, name)):
            attrs[name] = _number(getattr(cell, name))
    if cell.mass is not None:
        attrs["mass_kg"] = _number(cell.mass)
    if cell.sources:
        attrs["sources"] = " ".join(cell.sources)
    if cell.conditions:
        attrs["conditions"] = " ".join(cell.conditions)
    if cell.method:
        attrs["method"] = cell.method
    if cell.origin == "gap":
        attrs["gap"] = cell.reason or "no value"
    if cell.depends_on:
        attrs["depends_on"] = " ".join(cell.depends_on)
    return ET.Element(_q("value"), attrs)


def _annotate(sbase, element: ET.Element) -> None:
    text = ET.tostring(element, encoding="unicode")
    _check(sbase.setAnnotation(f"<annotation>{text}</annotation>"), f"annotation of {sbase.getId()}")


def _unit_id(model, unit: str) -> str:
    """The SBML unit id of one of the set's units, defining it in the model on first use."""
    import libsbml

    uid, parts = SBML_UNITS[unit]
    if parts and model.getUnitDefinition(uid) is None:
        ud = model.createUnitDefinition()
        _check(ud.setId(uid), uid)
        for kind, exponent, scale, multiplier in parts:
            u = ud.createUnit()
            u.setKind(getattr(libsbml, f"UNIT_KIND_{kind}"))
            u.setExponent(exponent)
            u.setScale(scale)
            u.setMultiplier(multiplier)
    return uid


def gap_error(ps):
    """The error for exporting a set with gaps: every gap, and what would close it."""
    from .parameters import ParameterSetError

    gaps = "; ".join(f"{g['compartment']}.{g['quantity']} ({g['reason']})" for g in ps.gaps)
    options = []
    if ps.fill == "none":
        options.append('fill="allometric" (a cross-species fit, with its prediction interval)')
    options += ["stage_fallback=True (the species' rows at another life stage)",
                "curating a source for the missing values (bodyplan gaps shows what is missing)"]
    return ParameterSetError(
        f"{ps.species} {ps.life_stage} has {len(ps.gaps)} gap(s), so the SBML model would not simulate: {gaps}. "
        f"Close them with {', or '.join(options)}; or export them marked, as NaN, with to_sbml(allow_gaps=True)")


def parameter_set_to_sbml(ps, allow_gaps: bool = False) -> str:
    import libsbml

    from .. import CAUTION
    from ..schema.model import PARAMETERS, circulation
    from ..units import ureg
    from .layouts import REST
    from .parameters import UNITS

    if ps.gaps and not allow_gaps:
        raise gap_error(ps)
    volume_unit, flow_unit = UNITS[ps.units]["volume"][0], UNITS[ps.units]["blood_flow"][0]
    time_unit = str(ureg.Unit(volume_unit) / ureg.Unit(flow_unit))  # "hour" or "minute"

    doc = libsbml.SBMLDocument(3, 2)
    model = doc.createModel()
    _check(model.setId(f"bodyplan_{ps.species}_{ps.life_stage}"), "model id")
    model.setName(f"{ps.species} {ps.life_stage} parameters ({ps.layout.name} layout, {ps.units} units)")
    _check(model.setNotes(
        f'<body xmlns="http://www.w3.org/1999/xhtml"><p>{escape(CAUTION)}</p>'
        f"<p>{escape('liver flow: ' + ps.liver_flow)}</p>"
        f"<p>Provenance and circulation of every compartment and parameter are in the annotations "
        f"(namespace {escape(NS)}).</p></body>"), "notes")
    model.setTimeUnits(_unit_id(model, time_unit))
    model.setVolumeUnits(_unit_id(model, volume_unit))
    model.setSubstanceUnits("mole")
    model.setExtentUnits("mole")

    wiring = {entry["compartment"]: entry for entry in circulation(ps.layout.compartments, REST)}
    arterial = {source for entry in wiring.values() for source in entry["receives_from"]}
    pool = next((c for c in ps.compartments if c not in wiring and c in arterial), None)  # blood
    set_element = ET.Element(_q("parameter_set"), {
        "species": ps.species, "life_stage": ps.life_stage, "sex": ps.sex or "any", "layout": ps.layout.name,
        "fill": ps.fill, "units": ps.units, "volume_unit": volume_unit, "flow_unit": flow_unit,
        "time_unit": time_unit, "blood_pool": pool or "", "liver_flow": ps.liver_flow, "caution": CAUTION})
    for gap in ps.gaps:
        ET.SubElement(set_element, _q("gap"), {k: str(v) for k, v in gap.items()})
    for check in ps.checks:
        ET.SubElement(set_element, _q("check"), {k: str(v) for k, v in check.items()})
    _annotate(model, set_element)

    def number(cell) -> float:
        return float("nan") if cell.value is None else float(cell.value)

    def parameter(pid: str, cell, quantity: str, compartment: str) -> None:
        p = model.createParameter()
        _check(p.setId(pid), pid)
        p.setConstant(True)
        _check(p.setUnits(_unit_id(model, cell.unit)), f"{pid} units")
        p.setValue(number(cell))
        _annotate(p, _value_element(cell, quantity, compartment))

    for name in ("body_mass", "cardiac_output", *ps.physiology):
        cell = ps.body_mass if name == "body_mass" else \
            ps.cardiac_output if name == "cardiac_output" else ps.physiology[name]
        parameter(name, ps._unit_cell(name, cell), name, PARAMETERS[name].compartment)

    for comp in ps.compartments:
        volume = ps._unit_cell("volume", ps.volumes[comp])
        c = model.createCompartment()
        _check(c.setId(comp), f"compartment {comp} (an SBML id: letters, digits and _, not starting with a digit)")
        c.setConstant(True)
        c.setSpatialDimensions(3)
        c.setUnits(_unit_id(model, volume.unit))
        c.setSize(number(volume))
        entry = wiring.get(comp)
        stored = ps.layout.compartments.get(comp, [])
        attrs = {"stored": " ".join(stored)} if stored else {}  # rest_of_body lumps no stored compartment
        if entry:
            attrs.update(role="organ", circuit="pulmonary" if entry["flow"] == "cardiac_output" else "systemic",
                         receives_from=" ".join(entry["receives_from"]), drains_to=entry["drains_to"],
                         flow=FLOW_PREFIX + comp)
        else:
            attrs["role"] = "blood_pool" if comp == pool else "fluid"
        element = ET.Element(_q("compartment"), attrs)
        element.append(_value_element(volume, "volume", comp))
        _annotate(c, element)
        if entry:
            parameter(FLOW_PREFIX + comp, ps._unit_cell("blood_flow", ps.flows[comp]), "blood_flow", comp)
    _partition_parameters(model, ps, allow_gaps)
    return libsbml.writeSBMLToString(doc)


def _partition_parameters(model, ps, allow_gaps: bool) -> None:
    """One dimensionless parameter kp_<compound>_<compartment> (tissue:blood, as a flow-limited model uses
    it) per Kp the set carries, annotated with the tissue:plasma value, method, status and sources."""
    missing = [f"{r['compound']}.{r['compartment']}" for r in ps.partition if r.get("kp_blood") is None]
    if missing and not allow_gaps:
        from .parameters import ParameterSetError

        raise ParameterSetError(f"no Kp for {', '.join(missing)} (tissue composition missing: borrow it from "
                                "another species, or export the gaps marked with allow_gaps=True)")
    for row in ps.partition:
        pid = f"kp_{re.sub(r'[^A-Za-z0-9_]', '_', row['compound'])}_{row['compartment']}"
        p = model.createParameter()
        _check(p.setId(pid), pid)
        p.setConstant(True)
        _check(p.setUnits("dimensionless"), f"{pid} units")
        p.setValue(float("nan") if row.get("kp_blood") is None else float(row["kp_blood"]))
        attrs = {"quantity": "partition_coefficient", "form": "tissue:blood", "compound": row["compound"],
                 "compartment": row["compartment"], "status": str(row.get("status", ""))}
        if row.get("kp") is not None:
            attrs["tissue_plasma"] = _number(row["kp"])
        for key in ("sources", "reason", "borrowed_from"):
            if row.get(key):
                attrs[key] = " ".join(row[key]) if isinstance(row[key], (list, tuple)) else str(row[key])
        _annotate(p, ET.Element(_q("value"), attrs))
