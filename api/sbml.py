"""A parameter set as an SBML Level 3 model: named constant parameters with units and provenance notes.

Model compartments become SBML compartments sized by their volume, so an SBML-capable
simulator can attach species and reactions to them directly.
"""

from __future__ import annotations

from html import escape

UNIT_DEFS = {  # SBML unit id → (kind, exponent, multiplier) parts
    "kilogram_mass": [("KILOGRAM", 1, 1.0)],
    "litre_volume": [("LITRE", 1, 1.0)],
    "litre_per_hour": [("LITRE", 1, 1.0), ("SECOND", -1, 3600.0)],
}
PARAMETER_UNITS = {"kg": "kilogram_mass", "L": "litre_volume", "L/h": "litre_per_hour"}


def _check(status: int, what: str) -> None:
    import libsbml

    if status != libsbml.LIBSBML_OPERATION_SUCCESS:
        raise RuntimeError(f"libsbml could not set {what}: {libsbml.OperationReturnValue_toString(status)}")


def _notes(cell, label: str) -> str:
    parts = [f"{label}: origin {cell.origin}"]
    if cell.sources:
        parts.append("sources " + ", ".join(cell.sources))
    if cell.method:
        parts.append(cell.method)
    if cell.reason:
        parts.append("gap: " + cell.reason)
    if cell.low is not None:
        parts.append(f"interval {cell.low:.4g} to {cell.high:.4g}")
    return f'<body xmlns="http://www.w3.org/1999/xhtml"><p>{escape("; ".join(parts))}</p></body>'


def parameter_set_to_sbml(ps) -> str:
    import libsbml

    from .. import CAUTION

    doc = libsbml.SBMLDocument(3, 2)
    model = doc.createModel()
    _check(model.setId(f"bodyplan_{ps.species}_{ps.life_stage}"), "model id")
    model.setName(f"{ps.species} {ps.life_stage} parameters ({ps.layout.name} layout)")
    model.setNotes(f'<body xmlns="http://www.w3.org/1999/xhtml"><p>{escape(CAUTION)}</p>'
                   f"<p>{escape('liver flow: ' + ps.liver_flow)}</p></body>")
    for uid, parts in UNIT_DEFS.items():
        ud = model.createUnitDefinition()
        _check(ud.setId(uid), uid)
        for kind, exponent, multiplier in parts:
            unit = ud.createUnit()
            unit.setKind(getattr(libsbml, f"UNIT_KIND_{kind}"))
            unit.setExponent(exponent)
            unit.setScale(0)
            unit.setMultiplier(multiplier)
    model.setVolumeUnits("litre_volume")
    model.setTimeUnits("second")

    def parameter(pid: str, cell) -> None:
        p = model.createParameter()
        _check(p.setId(pid), pid)
        p.setConstant(True)
        _check(p.setUnits(PARAMETER_UNITS[cell.unit]), f"{pid} units")
        if cell.value is not None:
            p.setValue(float(cell.value))
        p.setNotes(_notes(cell, pid))

    parameter("body_mass", ps.body_mass)
    parameter("cardiac_output", ps.cardiac_output)
    for comp in ps.compartments:
        volume, flow = ps.volumes[comp], ps.flows[comp]
        c = model.createCompartment()
        _check(c.setId(comp), f"compartment {comp}")
        c.setConstant(True)
        c.setSpatialDimensions(3)
        c.setUnits("litre_volume")
        if volume.value is not None:
            c.setSize(float(volume.value))
        c.setNotes(_notes(volume, f"volume of {comp}"))
        if flow.origin != "not_applicable":
            parameter(f"blood_flow_{comp}", flow)
    return libsbml.writeSBMLToString(doc)
