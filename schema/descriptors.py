"""Column descriptors of the curated CSV files, as Frictionless Table Schemas.

This is the one place a curated column is defined: validation, the curator docs,
the lint order and the export descriptor all read these dictionaries.
"""

from __future__ import annotations

ID = r"[a-z][a-z0-9_]*"
ROW_ID = r"[a-z0-9][a-z0-9_.\-]*"
QUANTITY_TEXT = r"[0-9.eE+\-]+ *[A-Za-z].*"  # a number then a unit: "0.25 kg", "10 year"

SEXES = ["male", "female", "mixed", "unknown"]
UNCERTAINTY_KINDS = ["none", "sd", "se", "ci95", "range", "cv"]
BASES = ["measured", "derived", "estimated", "reference"]
YES_NO = ["yes", "no"]
QUANTITY_KINDS = ["absolute", "fraction", "ratio"]
TAXON_CLASSES = ["mammal", "bird", "fish", "reptile", "amphibian"]
ECTOTHERMS = ["fish", "reptile", "amphibian"]  # taxon classes whose body takes the temperature around it
COMPARTMENT_KINDS = ["whole_body", "organ", "tissue", "fluid", "vessel", "cells", "product", "other"]
GROUP_ID = r"[a-z0-9][a-z0-9_.\-]*"  # like a row id: 'all', 'male', 'd3.5_f'
SCOPE = r"[a-z_]+(:[a-z_]+)?"  # where a method is refused: a taxon class or species, optionally ':quantity'

# Which body mass a fraction or per-kg value is taken of, and the quantity holding the source's own
# ratio of that mass to live body mass (needed to convert the row to live body mass).
DENOMINATORS = {"live_body": None, "empty_body": "empty_body_mass_fraction", "carcass": "carcass_mass_fraction",
                "tissue": None}  # which mass a share or a per-mass value is of; tissue: the compartment's own
STATISTICS = ["mean", "median", "geometric_mean", "single_animal", "reference_midpoint", "mode"]
N_COUNTS = ["animals", "pens", "studies", "organs", "eggs"]


def field(name, type_="string", description="", *, required=False, enum=None, pattern=None,
          minimum=None, foreign=None, default=None):
    constraints = {}
    if required:
        constraints["required"] = True
    if enum:
        constraints["enum"] = enum
    if pattern:
        constraints["pattern"] = pattern
    if minimum is not None:
        constraints["minimum"] = minimum
    spec = {"name": name, "type": type_, "description": description}
    if constraints:
        spec["constraints"] = constraints
    if foreign:
        spec["x-foreign"] = foreign  # vocabulary table whose id this column must name
    if default is not None:
        spec["x-default"] = default  # what an empty cell means; the store holds this value
    return spec


VALUES = {
    "description": "One row per value printed in one source; the file name is the source's citation key.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Short id, unique within the file.", required=True, pattern=ROW_ID),
        field("species", description="Species id from vocab/species.csv.", required=True, foreign="species"),
        field("life_stage", description="Life stage id from vocab/life_stages.csv.", required=True,
              foreign="life_stages"),
        field("age", description="Age with a unit, e.g. '10 year', '8 week'; empty if not given.",
              pattern=QUANTITY_TEXT),
        field("sex", description="male, female, mixed or unknown.", required=True, enum=SEXES),
        field("strain", description="Breed or strain as the source names it."),
        field("class", description="Production class, breed class or strain category below the species, "
              "from vocab/classes.csv for this species (broiler, dairy, minipig …); empty if not stated.",
              foreign="classes"),
        field("group", description="The group of animals within the source; rows with the same group are the "
              "same animals. Subgroups are declared in groups.csv.", pattern=GROUP_ID, default="all"),
        field("compartment", description="Compartment id from vocab/compartments.csv.", required=True,
              foreign="compartments"),
        field("quantity", description="Quantity id from vocab/quantities.csv.", required=True,
              foreign="quantities"),
        field("part", description="Which part of the compartment the number covers, from vocab/parts.csv.",
              foreign="parts", default="tissue"),
        field("method", description="How the number was measured, from vocab/methods.csv (the method must "
              "apply to the quantity); empty if not stated.", foreign="methods"),
        field("condition", description="The animals' state when measured, from vocab/conditions.csv (rest, "
              "anaesthesia, exercise …); sets use only conditions marked in_sets there.", foreign="conditions",
              default="rest"),
        field("value", "number", "The number as the source prints it; empty only with missing_reason."),
        field("unit", description="Unit as reported, in pint syntax, e.g. '%', 'g', 'mL/min/kg'.",
              required=True),
        field("uncertainty", description="Kind of uncertainty: none, sd, se, ci95, range or cv.",
              required=True, enum=UNCERTAINTY_KINDS),
        field("spread", "number", "The sd or se in the value's unit, or the cv in percent.", minimum=0),
        field("low", "number", "Lower bound of a ci95 or range, in the value's unit."),
        field("high", "number", "Upper bound of a ci95 or range, in the value's unit."),
        field("statistic", description="What the value is: mean, median, geometric_mean, single_animal, "
              "reference_midpoint (middle of a range the source gives alone) or mode.", enum=STATISTICS,
              default="mean"),
        field("uncertainty_assumed", description="yes when the source prints an unlabelled ± and the kind "
              "(sd or se) in uncertainty is our assumption.", enum=YES_NO, default="no"),
        field("n", "integer", "Number of subjects.", minimum=1),
        field("n_counts", description="What n counts: animals, pens, studies, organs or eggs.", enum=N_COUNTS,
              default="animals"),
        field("body_mass", description="Subjects' mean body mass with a unit, e.g. '0.25 kg'.",
              pattern=QUANTITY_TEXT),
        field("temperature", description="Water or air temperature the animals were kept at when measured, "
              "with a unit, e.g. '15 degC'; for fish and other animals whose body takes the temperature around "
              "it, where it sets their physiology.", pattern=QUANTITY_TEXT),
        field("denominator", description="For fractions of body mass and per-kg values, which mass: live_body, "
              "empty_body (live minus gut contents) or carcass; for a blood flow per mass, tissue (per kg of the "
              "compartment's own tissue, e.g. mL/min/100 g) or live_body (per kg of body mass), always stated.",
              enum=list(DENOMINATORS), default="live_body"),
        field("basis", description="measured, derived, estimated or reference.", required=True, enum=BASES),
        field("locator", description="Where in the source: table, page or figure.", required=True),
        field("verified", description="yes if the number was read in the source text, else no.",
              required=True, enum=YES_NO),
        field("missing_reason", description="Why the value is empty, in the source's words."),
        field("comment", description="Free text; unverified rows say 'from memory'."),
    ],
}

SPECIES = {
    "description": "Species with their NCBI Taxonomy ids.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Species id, lowercase snake_case.", required=True, pattern=ID),
        field("scientific_name", description="Binomial (or trinomial) name.", required=True),
        field("common_name", description="Common English name.", required=True),
        field("ncbi_taxon", "integer", "NCBI Taxonomy id.", required=True, minimum=1),
        field("taxon_class", description="mammal, bird, fish, reptile or amphibian.", required=True,
              enum=TAXON_CLASSES),
        field("diet", description="herbivore, omnivore or carnivore.",
              enum=["herbivore", "omnivore", "carnivore"]),
        field("id_note", description="Where the taxonomy id was taken from."),
    ],
}

LIFE_STAGES = {
    "description": "Life stages.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Life stage id.", required=True, pattern=ID),
        field("label", description="Short label.", required=True),
        field("description", description="What the stage covers."),
    ],
}

COMPARTMENTS = {
    "description": "Organs, tissues and fluids, with UBERON ids where one exists.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Compartment id.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("uberon", description="UBERON id, e.g. UBERON:0002107.", pattern=r"UBERON:[0-9]{7}"),
        field("kind", description="whole_body, organ, tissue, fluid, vessel, cells, product or other.",
              required=True, enum=COMPARTMENT_KINDS),
        field("part_of", description="Compartment this one is a part of (stomach is part of gut).",
              foreign="compartments"),
        field("id_note", description="Where the UBERON id was taken from, and what the compartment includes."),
    ],
}

QUANTITIES = {
    "description": "Measured quantities with their canonical unit and accepted normalisations.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Quantity id.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("canonical_unit", description="Unit values are stored in (pint syntax).", required=True),
        field("kind", description="absolute, fraction (0 to 1) or ratio.", required=True, enum=QUANTITY_KINDS),
        field("fraction_of", description="What a fraction or ratio is taken of (body_mass, cardiac_output …)."),
        field("per", description="Accepted normalisations: body_mass, tissue_mass, body_surface (space separated)."),
        field("plausible_range", description="'LOW..HIGH UNIT' ranges separated by ';', one per form."),
        field("description", description="What the quantity means."),
    ],
}

METHODS = {
    "description": "Measurement methods, the quantities each applies to, and whether pooling accepts them.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Method id.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("quantities", description="Quantity ids the method measures (space separated).", required=True),
        field("accepted", description="yes if pooling accepts the method by default, else no.", required=True,
              enum=YES_NO),
        field("not_accepted_in", description="Where the method is not accepted although accepted is yes: taxon "
              "classes or species ids, each optionally narrowed to one quantity as 'fish:blood_volume' (space "
              "separated)."),
        field("reason", description="Why: a published source (authors, year) or 'common practice, no source'.",
              required=True),
        field("description", description="What the method measures and how."),
    ],
}

PARTS = {
    "description": "Which part of a compartment a number covers.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Part id.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("part_of", description="The part this one lies within (contents within with_contents), so "
              "parts can be summed against their whole.", foreign="parts"),
        field("description", description="What the part includes."),
    ],
}

CONDITIONS = {
    "description": "The animals' state when a number was measured, and whether parameter sets use it.",
    "primaryKey": ["id"],
    "fields": [
        field("id", description="Condition id.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("in_sets", description="yes if parameter sets (animals at rest) use rows of this condition; "
              "fallback if they use them only where no row of a yes condition gives the same parameter; no if never.",
              required=True, enum=["yes", "fallback", "no"]),
        field("reason", description="Why: a published source (authors, year) or 'common practice, no source'.",
              required=True),
        field("description", description="What the condition covers."),
    ],
}

CLASSES = {
    "description": "Production classes, breed classes and strain categories below a species.",
    "primaryKey": ["species", "id"],
    "fields": [
        field("species", description="Species id from vocab/species.csv.", required=True, foreign="species"),
        field("id", description="Class id, unique within the species.", required=True, pattern=ID),
        field("label", description="Name in words.", required=True),
        field("in_sets", description="yes if a parameter set that asks for no class uses rows of this class; "
              "fallback if it uses them only where no row of a yes class (or of no class) gives the same "
              "parameter (breeds unlike the species' usual animals). A set that asks for the class uses them.",
              required=True, enum=["yes", "fallback"]),
        field("reason", description="Why a class is fallback: a published source (authors, year) or 'common "
              "practice, no source'."),
        field("description", description="What the class covers."),
    ],
}

BODY_SURFACE = {
    "description": "Per species: the formula turning body mass (and height) into body surface area.",
    "primaryKey": ["species", "formula"],
    "fields": [
        field("species", description="Species id from vocab/species.csv.", required=True, foreign="species"),
        field("formula", description="du_bois or mosteller (need height), or meeh (k·W^(2/3)).", required=True,
              enum=["du_bois", "mosteller", "meeh"]),
        field("k", "number", "Meeh's constant for W in g and area in cm² (meeh only).", minimum=0),
        field("preferred", description="yes for the formula used when none is named.", required=True,
              enum=YES_NO),
        field("source", description="Where the formula or k comes from (authors, year) or 'from memory'.",
              required=True),
    ],
}

VOCABULARIES = {
    "species": SPECIES,
    "life_stages": LIFE_STAGES,
    "compartments": COMPARTMENTS,
    "quantities": QUANTITIES,
    "methods": METHODS,
    "parts": PARTS,
    "classes": CLASSES,
    "conditions": CONDITIONS,
    "body_surface": BODY_SURFACE,
}

GROUPS = {
    "description": "Subgroups within a source: group contains the disjoint groups listed in contains (one row "
                   "per way of splitting it, e.g. by sex and by age).",
    "primaryKey": ["source", "group", "contains"],
    "fields": [
        field("source", description="Citation key of the source.", required=True),
        field("group", description="Group id used in the source's values file.", required=True, pattern=GROUP_ID),
        field("contains", description="Disjoint subgroups of group (space separated group ids).", required=True),
        field("label", description="The group in words."),
        field("note", description="How the source splits the animals."),
    ],
}

BASELINE = {
    "description": "Reviewed plausibility warnings that stand: check reports them as accepted, not as new.",
    "primaryKey": ["file", "row_id", "code"],
    "fields": [
        field("file", description="The values file, relative to the tree, e.g. values/brown1997.csv.", required=True),
        field("row_id", description="The row's id in that file.", required=True),
        field("code", description="The warning's code, e.g. overlapping-groups.", required=True),
        field("note", description="Why the warning stands (what the reviewer read in the source)."),
    ],
}

# Curated tables at the tree's root (optional files): relations and review records, not vocabularies.
ROOT_TABLES = {"groups": GROUPS, "check_baseline": BASELINE}


def defaults(descriptor: dict) -> dict[str, str]:
    """Column → what an empty cell means, for columns that have a default."""
    return {f["name"]: f["x-default"] for f in descriptor["fields"] if "x-default" in f}


def names(descriptor: dict) -> list[str]:
    return [f["name"] for f in descriptor["fields"]]
