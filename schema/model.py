"""The model a parameter set fills, declared once: its parameters, the stored quantities that can give
each, and the rules of the circulation every layer follows.

Words used throughout bodyplan:
- a *quantity* is what a curated row stores (tissue_mass, blood_flow_fraction, gfr, …);
- a *parameter* is what a model needs (a compartment's volume or blood flow, cardiac output, GFR, …);
- a *slot* is one parameter of one model compartment ("liver.volume") or of the whole body ("gfr");
- a *route* is a stored quantity that can give a parameter; routes are listed most direct first, and
  one source contributes through its most direct route only.

The arithmetic of each route (a mass over the subjects' body mass and the tissue density, a flow over
the cardiac output) lives in ``api/resolve.py``; which quantity is a share of what is read from the
``kind`` and ``fraction_of`` columns of ``vocab/quantities.csv``.
"""

from __future__ import annotations

from dataclasses import dataclass

# ---- the circulation (common practice, no source) ---------------------------------------------------
# Organs whose venous blood drains into the liver through the portal vein: a total hepatic flow
# already carries their flows.
PORTAL_ORGANS = frozenset({"gut", "spleen", "pancreas", "stomach", "small_intestine", "large_intestine"})
LIVER = "liver"
# Organs that the whole cardiac output passes through between venous and arterial blood: the lungs, or a
# fish's gills (the heart pumps venous blood through them before it reaches the body).
PULMONARY = frozenset({"lung", "gills"})
# The layout a parameter set uses unless one is asked for, by taxon class: fish breathe with gills.
DEFAULT_LAYOUT = {"fish": "fish"}
# Organs a taxon class does not have (common practice, no source): a layout compartment made only of
# them does not fit the animal, and a lumped compartment is summed over the parts the animal has.
LACKS = {"fish": frozenset({"lung"}), "mammal": frozenset({"gills"}), "bird": frozenset({"gills"})}


def default_layout(taxon_class: str) -> str:
    return DEFAULT_LAYOUT.get(taxon_class, "whole_body")
# Fluid compartments: their volume is a quantity of its own, not a mass over a density, and they
# have no blood flow of their own (blood carries the cardiac output).
FLUID_VOLUME = {"blood": "blood_volume", "plasma": "plasma_volume"}
# Vessels carry part of an organ's flow; they are not extra tissue of the organ they belong to.
VESSELS_OF_LIVER = ("hepatic_artery", "portal_vein")  # the liver's inflows; their rows feed the liver's flow
VESSELS = frozenset(VESSELS_OF_LIVER)
VESSEL_ORGAN = {"hepatic_artery": LIVER, "portal_vein": LIVER}  # the tissue a vessel's flow per kg is per
# One-side organs (left_kidney …) are parts of the pair (vocab part_of); the pair is their sum only
# when both sides are given, so a single side never passes for the pair.
SIDE_PREFIXES = ("left_", "right_")
# Pairs whose two sides are alike in mass and flow: one side, doubled, stands for the pair when the
# other side has no data, and says so (common practice, no source). Lungs are not alike (the right is
# larger), so they are never doubled.
MIRROR_PAIRS = frozenset({"kidney"})


def is_portal(parts) -> bool:
    """A model compartment drains into the portal vein when every stored part of it does; the portal
    parts of a mixed compartment are counted within the liver's total hepatic flow instead."""
    return bool(parts) and set(parts) <= PORTAL_ORGANS


def is_pulmonary(parts) -> bool:
    return bool(parts) and set(parts) <= PULMONARY


def has_own_flow(parts) -> bool:
    """Blood and plasma carry the cardiac output; they have no regional flow of their own."""
    return not set(parts) <= set(FLUID_VOLUME)


def circulation(compartments: dict[str, list[str]], rest: str) -> list[dict]:
    """Where each model compartment's blood comes from and where its venous outflow goes, so a program
    can build the model without reading sentences. Blood (the layout's fluid compartment) is the pool
    the heart pumps from and returns to; the lungs take the whole cardiac output from it and return it;
    a portal compartment drains into the liver, which returns its own inflow (hepatic artery, or the
    total hepatic flow when no compartment is portal) and the portal outflow to blood."""
    blood = next((m for m, parts in compartments.items() if not has_own_flow(parts)), "blood")
    liver = next((m for m, parts in compartments.items() if LIVER in parts), None)
    portal = [m for m, parts in compartments.items() if is_portal(parts)] if liver else []
    out = []
    for model, parts in [*compartments.items(), (rest, [])]:
        if model == blood:
            continue
        entry = {"compartment": model, "receives_from": [blood], "drains_to": liver if model in portal else blood,
                 "flow": "cardiac_output" if is_pulmonary(parts) else "blood_flow"}
        if model == liver:
            entry["receives_from"] = [blood, *portal]
        out.append(entry)
    return out


def is_side(compartment: str) -> bool:
    return compartment.startswith(SIDE_PREFIXES)


# ---- parameters ---------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Parameter:
    id: str
    label: str
    unit: str  # SI unit in a parameter set
    clinical: tuple[str, float]  # unit and factor for --units clinical
    resolved_as: str  # the form the rows are pooled in before scaling to a body mass
    routes: tuple[str, ...]  # stored quantities that can give it, most direct first
    compartment: str | None = None  # fixed stored compartment (whole-body parameters); None: per compartment
    computed: str = ""  # parameters computed from other parameters rather than read from rows


PARAMETERS: dict[str, Parameter] = {p.id: p for p in (
    Parameter("body_mass", "body mass", "kg", ("kg", 1.0), "kg", ("body_mass",), "whole_body"),
    Parameter("cardiac_output", "cardiac output", "L/h", ("mL/min", 1000 / 60), "L/h per kg body mass",
              ("cardiac_output",), "whole_body"),
    Parameter("gfr", "GFR", "L/h", ("mL/min", 1000 / 60), "L/h per kg body mass", ("gfr",), "whole_body"),
    Parameter("hematocrit", "hematocrit", "1", ("1", 1.0), "fraction of blood volume", ("hematocrit",), "blood"),
    Parameter("volume", "volume", "L", ("mL", 1000.0), "L per kg body mass",
              ("tissue_volume", "tissue_mass", "tissue_mass_fraction")),
    Parameter("blood_flow", "blood flow", "L/h", ("mL/min", 1000 / 60), "fraction of cardiac output",
              ("blood_flow_fraction", "blood_flow")),
    # Room for computed parameters: partition coefficients come from tissue composition and a compound.
    Parameter("partition_coefficient", "tissue:plasma partition coefficient", "1", ("1", 1.0),
              "tissue:plasma concentration ratio", (), None,
              computed="tissue composition (COMPOSITION) and compound properties, in api/partition.py"),
)}
# Compartments a quantity is sampled from that stand for the whole (common practice, no source): the
# hematocrit of an arterial sample (a fish's dorsal aorta) is the blood's. Volumes of such parts are not.
SAMPLE_STANDS_FOR = {"hematocrit": {"arterial_blood": "blood"}}


def measured_compartment(quantity: str, compartment: str) -> str:
    """The compartment a row's number describes: its own, or the whole its sample stands for."""
    return SAMPLE_STANDS_FOR.get(quantity, {}).get(compartment, compartment)


# Shares of body mass that give an absolute quantity when multiplied by the subjects' body mass. (Water
# fractions are left out: kg of water become litres only through a density.)
BODY_MASS_SHARES = {"tissue_mass": "tissue_mass_fraction"}
# Shares whose values within one source and group cannot sum above the whole (its body mass, its cardiac
# output); a source's flow shares may exceed it by a rounding tolerance.
SHARES_OF_A_WHOLE = {"tissue_mass_fraction": 1.0, "blood_flow_fraction": 1.1}
# The tissue composition partition coefficients are computed from: role → stored quantity.
COMPOSITION = {
    "water": "tissue_water_fraction",
    "extracellular_water": "tissue_extracellular_water_fraction",
    "intracellular_water": "tissue_intracellular_water_fraction",
    "neutral_lipid": "tissue_neutral_lipid_fraction",
    "neutral_phospholipid": "tissue_neutral_phospholipid_fraction",
    "acidic_phospholipid": "acidic_phospholipid_concentration",
    "albumin_ratio": "albumin_ratio",
    "lipoprotein_ratio": "lipoprotein_ratio",
}
# rest_of_body has no composition of its own (it is what the named compartments leave of the body): its
# Kp is taken as that of this tissue, marked "assumed" on the row (common practice, no source).
REST_KP_LIKE = "muscle"
# A set asked for a water or air temperature uses rows measured within this many °C of it. A choice of this
# A fitted number whose 95 % prediction interval spans more than this factor is no use to a modeller: a
# fill across species is refused, and a fit within one species gives way to pooling (project choice).
MAX_INTERVAL_RATIO = 10.0
AT_REST = "rest"  # the condition parameter sets describe: conscious animals at rest (vocab/conditions.csv)
# project: with a Q10 near 2 (from memory, for fish metabolic rate) 3 °C changes a rate by about a quarter.
TEMPERATURE_BAND = 3.0
# Life stages to borrow from when a stage lacks a parameter, nearest first (common practice, no source).
STAGE_FALLBACK = {"lactating": ("adult", "pregnant"), "laying": ("adult",), "pregnant": ("adult",),
                  "senior": ("adult",), "adult": ("senior", "juvenile"), "juvenile": ("adult", "neonate"),
                  "neonate": ("juvenile",)}
# Parts (vocab/parts.csv) whose number stands for the whole compartment; contents, an organ with its
# blood or contents, one side, one half, a segment or one ventricle never do (they are other amounts).
PARTS_FOR_THE_WHOLE = frozenset({"tissue", "wall", "whole_pair"})


def stands_for_the_whole(part: str, compartment: str) -> bool:
    """Whether a row's number is the whole compartment: a part that stands for it, or one side of a pair
    stored as that side's own compartment (left_kidney, one_side: the whole left kidney)."""
    return part in PARTS_FOR_THE_WHOLE or (part == "one_side" and is_side(compartment))
# Height used to turn a per-m² row of a species whose body surface formula needs one, when the row does
# not give its subjects' height: ICRP Publication 89 reference adult male, 176 cm (from memory).
REFERENCE_HEIGHT_CM = {"human": 176.0}
WHOLE_BODY = ("body_mass", "cardiac_output", "gfr", "hematocrit")  # reported by every set, in this order
COMPARTMENT = ("volume", "blood_flow")  # reported for every model compartment


# A share of these (vocab kind "fraction", fraction_of) becomes a model number only once the set's body
# mass or cardiac output is known; a share of anything else (hematocrit of blood volume) is the number.
SCALED_SHARES = frozenset({"body_mass", "cardiac_output"})


def routes(parameter: str, compartment: str | None = None) -> tuple[str, ...]:
    """The stored quantities that can give ``parameter`` of one stored compartment, most direct first."""
    found = PARAMETERS[parameter].routes
    if parameter == "volume" and compartment in FLUID_VOLUME:
        return (FLUID_VOLUME[compartment],) + found
    return found


def parameter_of(quantity: str) -> str | None:
    """Which parameter a stored quantity feeds (None: parameter sets do not use it)."""
    for p in PARAMETERS.values():
        if quantity in p.routes:
            return p.id
    if quantity in FLUID_VOLUME.values():
        return "volume"
    return None


def route_quantities() -> set[str]:
    return {q for p in PARAMETERS.values() for q in p.routes} | set(FLUID_VOLUME.values())


# ---- slots: one parameter of one model compartment ---------------------------------------------------
@dataclass(frozen=True)
class Slot:
    id: str  # "liver.volume", "cardiac_output"
    label: str  # short label for a matrix column
    parameter: str
    compartment: str  # model compartment, or "whole_body" / "blood" for whole-body parameters
    stored: tuple[str, ...]  # stored compartments whose rows it reads
    quantities: tuple[str, ...]  # the routes over those compartments


def slot_id(compartment: str, parameter: str) -> str:
    return parameter if parameter in WHOLE_BODY else f"{compartment}.{parameter}"


# Parts only some animals have: a whole is summed from the parts its species has.
ONLY_IN = {"crop": "bird", "proventriculus": "bird", "gizzard": "bird",
           "rumen": "ruminant", "reticulum": "ruminant", "omasum": "ruminant", "abomasum": "ruminant"}
RUMINANTS = frozenset({"cattle", "sheep", "goat", "water_buffalo"})  # four-chambered stomachs


def body_plan(species: str, taxon_class: str) -> frozenset[str]:
    """The kinds of animal a species is, as ONLY_IN names them."""
    return frozenset({taxon_class} | ({"ruminant"} if species in RUMINANTS else set()))


def summable_parts(compartment: str, parts: dict[str, list[str]], plan: frozenset[str] | None = None) -> list[str]:
    """The direct parts (vocab part_of) whose sum is the whole: vessels are not extra tissue, a fluid's
    parts overlap (arterial blood, plasma, red cells) so a fluid is never summed, and with a body plan
    only the parts that kind of animal has."""
    if compartment in FLUID_VOLUME:
        return []
    return [p for p in parts.get(compartment, []) if p not in VESSELS
            and (plan is None or ONLY_IN.get(p) is None or ONLY_IN[p] in plan)]


def sub_parts(compartment: str, parts: dict[str, list[str]], exclude: set[str] = frozenset()) -> list[str]:
    """Every stored compartment a whole may be summed from, at any depth, ``exclude`` left out."""
    out = []
    for part in summable_parts(compartment, parts):
        if part not in exclude:
            out += [part, *sub_parts(part, parts, exclude)]
    return out


def _samples(parameter: Parameter) -> tuple[str, ...]:
    return tuple(c for q in parameter.routes for c, whole in SAMPLE_STANDS_FOR.get(q, {}).items()
                 if whole == parameter.compartment)


def slots(layout, parts: dict[str, list[str]] | None = None) -> list[Slot]:
    """Every slot of a layout's parameter set: whole-body parameters, then each compartment's volume,
    then each compartment's flow (compartments without a flow of their own have no flow slot).
    With ``parts`` (whole → its parts, from the vocabulary) a slot also reads the parts of its stored
    compartments that the layout does not name itself, as parameter sets sum them."""
    out = [Slot(p, PARAMETERS[p].label, p, PARAMETERS[p].compartment,
                (PARAMETERS[p].compartment, *_samples(PARAMETERS[p])), PARAMETERS[p].routes) for p in WHOLE_BODY]
    named = layout.members()
    stored = {model: tuple(dict.fromkeys(c for part in members
                                         for c in (part, *sub_parts(part, parts or {}, named))))
              for model, members in layout.compartments.items()}
    for model in layout.compartments:
        quantities = tuple(dict.fromkeys(q for part in stored[model] for q in routes("volume", part)))
        out.append(Slot(slot_id(model, "volume"), f"{model} vol", "volume", model, stored[model], quantities))
    for model, members in layout.compartments.items():
        if has_own_flow(members):
            vessels = VESSELS_OF_LIVER if LIVER in members else ()
            out.append(Slot(slot_id(model, "blood_flow"), f"{model} flow", "blood_flow", model,
                            stored[model] + vessels, routes("blood_flow")))
    return out
