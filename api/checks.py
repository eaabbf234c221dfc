"""The checks every parameter set prints: its balances (rest_of_body closes the mass and flow balances),
each source's shares against their whole, production classes mixed, and a given body mass far from the
animals behind the set's rows."""

from __future__ import annotations

from ..schema.model import LIVER, PORTAL_ORGANS, SHARES_OF_A_WHOLE, TEMPERATURE_BAND, is_pulmonary, parameter_of, slot_id
from .cell import Cell
from .layouts import REST
from .rows import SAME_SUBJECTS

STUDIED_RANGE_MARGIN = 1.5  # a given body mass this far beyond the studied subjects is flagged
FLOW_TOLERANCE = 0.05  # named systemic flows may exceed cardiac output by 5 % before the set is flagged
REST_DENSITY = 1.0  # kg/L, stated on the rest_of_body volume wherever it is used


def close_balances(ps) -> None:
    """rest_of_body closes both balances: the body mass left after every named compartment's mass
    (volume × its tissue density), as a volume at REST_DENSITY; and the cardiac output left after
    every named systemic flow."""
    bw, co = ps.body_mass, ps.cardiac_output
    vols = [ps.volumes[c] for c in ps.layout.compartments]
    vol_gaps = [c for c in ps.layout.compartments if ps.volumes[c].origin == "gap"]
    vol_needs = tuple(d for v in vols for d in v.depends_on)
    if bw.origin == "gap" or vol_gaps:
        ps.volumes[REST] = Cell.gap("L", "cannot close the mass balance: " +
                                    (", ".join(vol_gaps) + " lack a volume" if vol_gaps else "no body mass")
                                    ).resting_on(*vol_needs)
        known = [v for v in vols if v.origin != "gap"]
        if bw.origin != "gap" and known:  # the numbers there are can already exceed the whole
            named_mass = sum(_mass(v) for v in known)
            ps.checks.append(_check("masses_within_body_mass", named_mass <= bw.value,
                                    f"named compartments with a number {named_mass:.4g} kg against body mass "
                                    f"{bw.value:.4g} kg ({', '.join(vol_gaps)} still gaps)"))
    else:
        named_mass = sum(_mass(v) for v in vols)
        rest_mass = bw.value - named_mass
        ps.volumes[REST] = Cell(rest_mass / REST_DENSITY, "L", "scaled", method=(
            f"body mass minus the named compartments' masses (volume × tissue density), at {REST_DENSITY:g} kg/L"),
            depends_on=vol_needs, mass=rest_mass)
        ps.checks.append(_check("masses_within_body_mass", rest_mass >= 0,
                                f"named compartments {named_mass:.4g} kg (volumes {sum(v.value for v in vols):.4g} L "
                                f"through their densities) against body mass {bw.value:.4g} kg; rest_of_body "
                                f"{rest_mass:.4g} kg = {rest_mass / REST_DENSITY:.4g} L at {REST_DENSITY:g} kg/L"))
    systemic = {c: f for c, f in ps.flows.items() if f.origin != "not_applicable"
                and not is_pulmonary(ps.layout.compartments.get(c, []))}
    flow_gaps = [c for c, f in systemic.items() if f.origin == "gap"]
    flow_needs = tuple(d for f in systemic.values() for d in f.depends_on)
    if co.origin == "gap" or flow_gaps:
        ps.flows[REST] = Cell.gap("L/h", "cannot close the flow balance: " +
                                  (", ".join(flow_gaps) + " lack a flow" if flow_gaps else "no cardiac output")
                                  ).resting_on(*flow_needs)
        known = [f.value for f in systemic.values() if f.origin != "gap"]
        if co.origin != "gap" and known:  # the flows there are can already exceed the cardiac output
            ps.checks.append(_check("systemic_flows_within_cardiac_output",
                                    sum(known) <= co.value * (1 + FLOW_TOLERANCE),
                                    f"named systemic flows with a number {sum(known):.4g} L/h against cardiac output "
                                    f"{co.value:.4g} L/h (tolerance {FLOW_TOLERANCE:.0%}; {', '.join(flow_gaps)} "
                                    "still gaps)"))
    else:
        named = sum(f.value for f in systemic.values())
        rest = co.value - named
        ps.flows[REST] = Cell(rest, "L/h", "scaled", method="cardiac output minus the named systemic flows",
                              depends_on=flow_needs)
        ps.checks.append(_check("systemic_flows_within_cardiac_output", named <= co.value * (1 + FLOW_TOLERANCE),
                                f"named systemic flows {named:.4g} L/h against cardiac output {co.value:.4g} L/h "
                                f"(tolerance {FLOW_TOLERANCE:.0%})"))
        ps.checks.append(_check("rest_of_body_flow_not_negative", rest >= 0,
                                f"rest_of_body flow {rest:.4g} L/h"))


def _mass(volume: Cell) -> float:
    """A named compartment's mass: its volume through the tissue density used, else at REST_DENSITY."""
    return volume.mass if volume.mass is not None else volume.value * REST_DENSITY


def _check(name: str, ok: bool, detail: str) -> dict:
    return {"check": name, "status": "pass" if ok else "fail", "detail": detail}


def source_sum_checks(resolver, ps) -> None:
    """Fractions given by one source (one group of subjects) should not exceed the whole."""
    comps = ps.layout.members() - {"whole_body"} - {c for c in ps.layout.members() if is_pulmonary([c])}
    for quantity, limit in SHARES_OF_A_WHOLE.items():
        groups: dict[tuple, dict[str, float]] = {}
        for r in resolver.all_rows:
            if r["quantity_id"] == quantity and r["compartment_id"] in comps:
                key = tuple(r[k] for k in SAME_SUBJECTS)
                groups.setdefault(key, {})[r["compartment_id"]] = r["value_canonical"]
        for (source, *_), by_comp in groups.items():
            if parameter_of(quantity) == "blood_flow" and LIVER in by_comp:  # total hepatic flow carries the portal organs
                by_comp = {c: v for c, v in by_comp.items() if c not in PORTAL_ORGANS}
            total = sum(by_comp.values())
            if total > limit:
                ps.checks.append(_check(f"{quantity}_sum_{source}", False,
                                        f"{source}: {quantity} of {len(by_comp)} compartments sum to "
                                        f"{total:.3f} (limit {limit:g})"))


def class_check(resolver, ps) -> None:
    """Say when the rows behind a set mix production classes (broilers with layers, dairy with beef)."""
    from collections import Counter

    classes = Counter(r["class_id"] or "not stated" for rows in resolver.groups.values() for r in rows)
    if resolver.animal_class:
        if classes["not stated"]:
            detail = f"class {resolver.animal_class} plus rows that name no class ({classes['not stated']})"
        else:
            return
    elif len(set(classes) - {"not stated"}) > 1:
        counts = ", ".join(f"{c} ({n})" for c, n in sorted(classes.items()))
        detail = f"rows of {counts} are combined; choose one with the class option"
    else:
        return
    ps.checks.append({"check": "classes_mixed", "status": "warn", "detail": detail})


def studied_range_check(resolver, ps) -> None:
    """A given body mass far outside the subjects behind the set's rows is an extrapolation: say so."""
    masses = [r["subject_body_mass_kg"] for r in resolver.all_rows if r["subject_body_mass_kg"] is not None]
    masses += [r["value_canonical"] for r in resolver.rows("body_mass", "whole_body")]
    if not masses:
        return
    low, high, bw = min(masses), max(masses), ps.body_mass.value
    inside = low / STUDIED_RANGE_MARGIN <= bw <= high * STUDIED_RANGE_MARGIN
    ps.checks.append({"check": "body_mass_within_studied_range", "status": "pass" if inside else "warn",
                      "detail": f"body mass {bw:.4g} kg against {low:.4g}–{high:.4g} kg of the subjects behind "
                                f"this species' rows at this stage (margin ×{STUDIED_RANGE_MARGIN:g})"})


def animals_mass_check(ps) -> None:
    """Numbers whose animals all lie far from the set's body mass: a share measured in 15 kg piglets is
    not a 100 kg finisher's (shares change with size); the same margin as the studied-range check."""
    bw = ps.body_mass.value
    if bw is None:
        return
    far = [f"{slot_id(comp, parameter)} ({low:.3g}–{high:.3g} kg)" for comp, parameter, cell in ps.cells()
           if cell.animals_kg and parameter != "body_mass"
           for low, high in [cell.animals_kg] if not low / STUDIED_RANGE_MARGIN <= bw <= high * STUDIED_RANGE_MARGIN]
    if far:
        ps.checks.append({"check": "numbers_from_animals_of_another_size", "status": "warn",
                          "detail": f"at {bw:.4g} kg, these rest only on animals of other body masses (margin "
                                    f"×{STUDIED_RANGE_MARGIN:g}): {', '.join(far)}"})


def condition_check(ps) -> None:
    """Numbers that rest on animals not at rest (anaesthetised ones, where no conscious animals' rows exist)."""
    behind = {}
    for comp, parameter, cell in ps.cells():
        for condition in cell.conditions:
            behind.setdefault(condition, []).append(slot_id(comp, parameter))
    for condition, slots in sorted(behind.items()):
        ps.checks.append({"check": "condition", "status": "warn",
                          "detail": f"{', '.join(slots)} rest on rows of animals in condition {condition}: no rows of "
                                    "animals at rest give them (vocab/conditions.csv)"})


def temperature_check(resolver, ps) -> None:
    """Fish and other ectotherms: at which water or air temperatures the rows behind the set were measured.
    Rows far apart in temperature pooled without a temperature asked, or rows that state none, are said."""
    counted = [r for rows in resolver.groups.values() for r in rows]
    stated = sorted(r["temperature_c"] for r in counted if r["temperature_c"] is not None)
    far = len(resolver.other_temperature)
    if not stated and not far:
        return
    silent = len(counted) - len(stated)
    spread = bool(stated) and stated[-1] - stated[0] > 2 * TEMPERATURE_BAND and ps.temperature is None
    said = [f"rows measured at {stated[0]:g}–{stated[-1]:g} °C" if stated else "no row measured near it"]
    if ps.temperature is not None:
        said[0] += f" for a set at {ps.temperature:g} °C"
    if far:
        said.append(f"{far} row(s) measured more than {TEMPERATURE_BAND:g} °C away left out")
    if silent:
        said.append(f"{silent} row(s) state no temperature")
    if spread:
        said.append("ask for one temperature (temperature option)")
    ps.checks.append({"check": "temperature", "status": "warn" if spread or silent or not stated else "pass",
                      "detail": "; ".join(said)})
