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
COMPARTMENT_KINDS = ["whole_body", "organ", "tissue", "fluid", "vessel", "cells", "product", "other"]


def field(name, type_="string", description="", *, required=False, enum=None, pattern=None,
          minimum=None, foreign=None):
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
        field("compartment", description="Compartment id from vocab/compartments.csv.", required=True,
              foreign="compartments"),
        field("quantity", description="Quantity id from vocab/quantities.csv.", required=True,
              foreign="quantities"),
        field("value", "number", "The number as the source prints it; empty only with missing_reason."),
        field("unit", description="Unit as reported, in pint syntax, e.g. '%', 'g', 'mL/min/kg'.",
              required=True),
        field("uncertainty", description="Kind of uncertainty: none, sd, se, ci95, range or cv.",
              required=True, enum=UNCERTAINTY_KINDS),
        field("spread", "number", "The sd or se in the value's unit, or the cv in percent.", minimum=0),
        field("low", "number", "Lower bound of a ci95 or range, in the value's unit."),
        field("high", "number", "Upper bound of a ci95 or range, in the value's unit."),
        field("n", "integer", "Number of subjects.", minimum=1),
        field("body_mass", description="Subjects' mean body mass with a unit, e.g. '0.25 kg'.",
              pattern=QUANTITY_TEXT),
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

VOCABULARIES = {
    "species": SPECIES,
    "life_stages": LIFE_STAGES,
    "compartments": COMPARTMENTS,
    "quantities": QUANTITIES,
}


def names(descriptor: dict) -> list[str]:
    return [f["name"] for f in descriptor["fields"]]
