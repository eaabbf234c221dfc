"""Named (canned) queries of the site: read-only SQL with :parameters, shown with their SQL."""

from __future__ import annotations

# Columns every value listing shows; the plugin renders `value` with its uncertainty and unit,
# `value_id` and `source` as links, `verified` in words.
_VALUE_COLUMNS = """v.id AS value_id, v.value, v.unit, v.uncertainty, v.spread, v.low, v.high, v.n,
  v.missing_reason, v.value_canonical, v.unit_canonical, v.normalisation, v.sex, v.strain, v.age,
  v.basis, v.verified, v.source_id AS source, s.citation, v.locator"""

PARAMETER_SET = f"""SELECT v.compartment_id AS compartment, v.quantity_id AS quantity,
  {_VALUE_COLUMNS}
FROM curated_values v JOIN sources s ON s.id = v.source_id
WHERE v.species_id = :species AND v.life_stage_id = :life_stage
ORDER BY v.compartment_id, v.quantity_id, v.source_id, v.row_id"""

ACROSS_SPECIES = f"""SELECT v.species_id AS species, v.life_stage_id AS life_stage,
  {_VALUE_COLUMNS}
FROM curated_values v JOIN sources s ON s.id = v.source_id
WHERE v.quantity_id = :quantity AND v.compartment_id = :compartment
ORDER BY v.species_id, v.life_stage_id, v.source_id, v.row_id"""

# Every compartment of the vocabulary appears: paired with each quantity some species has data for
# there (so a gap means "curated elsewhere, not for this species"), or alone when nobody has any.
COVERAGE = """WITH pairs AS (
  SELECT DISTINCT compartment_id, quantity_id FROM curated_values
), grid AS (
  SELECT c.id AS compartment, p.quantity_id AS quantity
  FROM compartments c LEFT JOIN pairs p ON p.compartment_id = c.id
), here AS (
  SELECT compartment_id, quantity_id, count(*) AS rows_curated, sum(value IS NOT NULL) AS with_number,
         sum(verified) AS verified, group_concat(DISTINCT source_id) AS sources
  FROM curated_values WHERE species_id = :species GROUP BY compartment_id, quantity_id
), elsewhere AS (
  SELECT compartment_id, quantity_id, count(DISTINCT species_id) AS species
  FROM curated_values WHERE value IS NOT NULL GROUP BY compartment_id, quantity_id
)
SELECT g.compartment, g.quantity,
  CASE WHEN coalesce(h.with_number, 0) > 0 THEN 'covered'
       WHEN h.rows_curated > 0 THEN 'reported missing' ELSE 'gap' END AS status,
  coalesce(h.with_number, 0) AS values_with_number, coalesce(h.rows_curated, 0) AS rows_curated,
  coalesce(h.verified, 0) AS verified_rows, h.sources, coalesce(e.species, 0) AS species_with_data
FROM grid g
LEFT JOIN here h ON h.compartment_id = g.compartment AND h.quantity_id = g.quantity
LEFT JOIN elsewhere e ON e.compartment_id = g.compartment AND e.quantity_id = g.quantity
ORDER BY g.compartment, g.quantity"""

SOURCE_VALUES = f"""SELECT v.species_id AS species, v.life_stage_id AS life_stage,
  v.compartment_id AS compartment, v.quantity_id AS quantity,
  {_VALUE_COLUMNS}
FROM curated_values v JOIN sources s ON s.id = v.source_id
WHERE v.source_id = :source
ORDER BY v.file, v.line"""

QUERIES = {
    "parameter_set": {
        "title": "Parameter set: every value for one species and life stage",
        "description": "Parameters: species (e.g. dog) and life_stage (e.g. adult). Values are listed as "
                       "curated, one row per source; nothing is pooled or filled here.",
        "sql": PARAMETER_SET,
    },
    "parameter_across_species": {
        "title": "One parameter across species",
        "description": "Parameters: quantity (e.g. tissue_mass_fraction) and compartment (e.g. liver).",
        "sql": ACROSS_SPECIES,
    },
    "coverage": {
        "title": "Coverage and gaps for one species",
        "description": "Parameter: species (e.g. dog). Every compartment × quantity curated for any species, "
                       "and every compartment with none at all; 'gap' means no value for this species.",
        "sql": COVERAGE,
    },
    "source_values": {
        "title": "Every value from one source, with its citation",
        "description": "Parameter: source (the citation key, e.g. the id on a source's page).",
        "sql": SOURCE_VALUES,
    },
}

for _query in QUERIES.values():
    _query["hide_sql"] = True  # results first; the SQL stays one click away ("show")
