"""What every table and column of the store means, in one place: the site's pages and the exported
data package both read it. Curated columns keep their descriptions from schema/descriptors.py; only
columns that exist in the store alone (converted values, file positions, sources, build records) are
described here.
"""

from __future__ import annotations

from . import descriptors

# store column of curated_values → curated-file column whose description it keeps
CURATED_COLUMN = {"species_id": "species", "life_stage_id": "life_stage", "compartment_id": "compartment",
                  "quantity_id": "quantity", "row_id": "id", "class_id": "class", "group_id": "group",
                  "part_id": "part", "method_id": "method", "condition_id": "condition"}

TABLE_DESCRIPTIONS = {
    "curated_values": "One row per value printed in a source, as reported and converted to the quantity's "
                      "canonical unit, with its uncertainty, subjects, locator and verification flag.",
    "sources": "The documents values come from: BibTeX entries with a formatted citation and DOI.",
    "build_info": "How this store was built: content hash, build time and versions.",
    "input_files": "Every curated file the store was built from, with its SHA-256 hash.",
    "groups": descriptors.GROUPS["description"],
}

STORE_COLUMNS = {  # columns that exist only in the store
    "curated_values": {
        "id": "Row number in the store (stable only within one build).",
        "source_id": "Citation key of the source (links to sources).",
        "age_days": "The age converted to days.",
        "quantity_kind": "absolute, fraction (0 to 1) or ratio, copied from the quantity.",
        "unit_canonical": "Canonical unit the value was converted to. {units}",
        "value_canonical": "The value converted to the canonical unit (unit_canonical says which, in words).",
        "verified": "1 if the number was read in the source text, 0 if not (pages say so in words).",
        "normalisation": "none, body_mass, tissue_mass or body_surface: what the canonical value is per.",
        "sd_canonical": "Standard deviation in the canonical unit, from the sd, se × √n, cv or a 95% "
                        "interval.",
        "low_canonical": "Lower bound of a ci95 or range in the canonical unit.",
        "high_canonical": "Upper bound of a ci95 or range in the canonical unit.",
        "subject_body_mass_kg": "Subjects' mean body mass in kilograms.",
        "temperature_c": "The water or air temperature converted to degrees Celsius.",
        "file": "Curated file the row was read from.",
        "line": "Line of that file.",
    },
    "sources": {
        "id": "Citation key; also the name of the curated values file.",
        "entry_type": "BibTeX entry type (article, book, techreport …).",
        "author": "Authors as in the BibTeX entry.",
        "title": "Title.",
        "container": "Journal, book or publisher.",
        "year": "Year of publication.",
        "volume": "Volume.",
        "pages": "Pages.",
        "doi": "Digital Object Identifier; links to https://doi.org/.",
        "citation": "Formatted one-line citation.",
        "bibtex": "The BibTeX entry as curated.",
        "note": "Note from the BibTeX entry.",
        "derived_from": "The source whose numbers this one reprints (pooling uses the original).",
    },
    "groups": {"source_id": "Citation key of the source.", "group_id": "Group id used in the source's values file.",
               "contains": "Its disjoint subgroups (space separated group ids).", "label": "The group in words.",
               "note": "How the source splits the animals."},
    "build_info": {"key": "What is recorded.", "value": "The record."},
    "input_files": {"path": "Curated file, relative to the curated data folder.",
                    "sha256": "SHA-256 hash of the file's bytes."},
}


def describe(table: str, column: str) -> str:
    """A column's description ("" when none is written); a ``{units}`` placeholder may remain for the
    caller to fill with the units the store holds."""
    text = STORE_COLUMNS.get(table, {}).get(column)
    if text:
        return text
    vocab = descriptors.VOCABULARIES.get(table)
    if vocab is None and table != "curated_values":
        return ""
    fields = {f["name"]: f["description"] for f in (vocab or descriptors.VALUES)["fields"]}
    return fields.get(CURATED_COLUMN.get(column, column), "") or ""
