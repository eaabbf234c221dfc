"""Export a store as tidy files with a Frictionless data package descriptor (datapackage.json).

One file per table, one row per record; the descriptor carries each table's Table Schema
(types, descriptions, primary and foreign keys) so any Frictionless tool can validate it.
Numbers are written with Python's shortest round-trip form, so reading them back gives the
stored floats exactly.
"""

from __future__ import annotations

from ..errors import BodyplanError

import csv
import json
import math
from pathlib import Path

from ..schema import descriptors
from ..schema.columns import TABLE_DESCRIPTIONS, describe

TABLES = ["species", "life_stages", "compartments", "quantities", "methods", "parts", "conditions", "classes",
          "body_surface",
          "sources", "groups", "curated_values", "build_info", "input_files"]
FORMATS = ["csv", "json"]
SQL_TYPES = {"INTEGER": "integer", "FLOAT": "number", "REAL": "number", "BOOLEAN": "boolean"}
DROPPED = {"curated_values": {"id"}}  # the store's row number: identity is (source_id, row_id)

FOREIGN = {
    "curated_values": [("source_id", "sources"), ("species_id", "species"), ("life_stage_id", "life_stages"),
                       ("compartment_id", "compartments"), ("quantity_id", "quantities"), ("part_id", "parts"),
                       ("method_id", "methods"), ("condition_id", "conditions")],
    "compartments": [("part_of", "compartments")],
    "parts": [("part_of", "parts")],
    "groups": [("source_id", "sources")],
    "classes": [("species", "species")],
    "body_surface": [("species", "species")],
    "sources": [("derived_from", "sources")],
}
PRIMARY = {"curated_values": ["source_id", "row_id"], "build_info": ["key"], "input_files": ["path"],
           "classes": ["species", "id"], "body_surface": ["species", "formula"],
           "groups": ["source_id", "group_id", "contains"]}


class ExportError(BodyplanError, ValueError):
    """An export that cannot be made as asked (an unsupported format, a missing library)."""


def _description(table: str, column: str) -> str:
    return describe(table, column).replace(" {units}", "").replace("{units}", "")


def table_schema(store, table: str) -> dict:
    """A Table Schema for one store table, from SQLite's column types and the curated descriptors."""
    fields = []
    for col in store.query(f'PRAGMA table_info("{table}")'):
        name = col["name"]
        if name in DROPPED.get(table, ()):
            continue
        spec = {"name": name, "type": SQL_TYPES.get(col["type"].upper(), "string")}
        if description := _description(table, name):
            spec["description"] = description
        if col["notnull"] or col["pk"]:
            spec["constraints"] = {"required": True}
        fields.append(spec)
    schema = {"fields": fields}
    pk = PRIMARY.get(table) or [c["name"] for c in store.query(f'PRAGMA table_info("{table}")') if c["pk"]]
    schema["primaryKey"] = pk
    if table in FOREIGN:
        schema["foreignKeys"] = [{"fields": col, "reference": {"resource": "" if target == table else target,
                                                               "fields": "id"}}
                                 for col, target in FOREIGN[table]]
    return schema


def _typed_cell(value, kind: str):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    if kind == "boolean":
        return bool(value)
    if kind == "number":
        return float(value)
    return value


def _rows(store, table: str, schema: dict) -> list[list]:
    names = [f["name"] for f in schema["fields"]]
    kinds = [f["type"] for f in schema["fields"]]
    cols = ", ".join(f'"{n}"' for n in names)
    order = ", ".join(f'"{n}"' for n in schema["primaryKey"])
    return [[_typed_cell(v, k) for v, k in zip(row, kinds)]
            for row in store.query(f'SELECT {cols} FROM "{table}" ORDER BY {order}')]


def _csv_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back to the same float
    return str(value)


def export_store(store, out_dir: str | Path, fmt: str = "csv") -> Path:
    """Write every table of ``store`` to ``out_dir`` plus datapackage.json; returns the descriptor's path."""
    from .. import CAUTION, __version__

    if fmt not in ("csv", "json"):
        raise ExportError(f"unknown export format {fmt!r}; use csv or json")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    build = store.build_info()
    resources = []
    for table in TABLES:
        schema = table_schema(store, table)
        rows = _rows(store, table, schema)
        path = out / f"{table}.{fmt}"
        if fmt == "csv":
            with open(path, "w", encoding="utf-8", newline="") as f:
                writer = csv.writer(f, lineterminator="\n")
                writer.writerow([fl["name"] for fl in schema["fields"]])
                writer.writerows([_csv_text(v) for v in row] for row in rows)
        else:
            names = [fl["name"] for fl in schema["fields"]]
            path.write_text(json.dumps([dict(zip(names, row)) for row in rows], ensure_ascii=False, indent=1) + "\n",
                            encoding="utf-8")
        resource = {"name": table, "path": path.name, "profile": "tabular-data-resource", "format": fmt,
                    "mediatype": "text/csv" if fmt == "csv" else "application/json", "encoding": "utf-8",
                    "schema": schema}
        if table in TABLE_DESCRIPTIONS:
            resource["description"] = TABLE_DESCRIPTIONS[table]
        elif table in descriptors.VOCABULARIES:
            resource["description"] = descriptors.VOCABULARIES[table]["description"]
        resources.append(resource)
    package = {
        "profile": "tabular-data-package",
        "name": "bodyplan",
        "title": "bodyplan: curated species physiology for PBPK modelling",
        "description": f"Every value with its source, locator, unit and uncertainty. {CAUTION}",
        "version": __version__,
        "x-content-hash": build.get("content_hash", ""),
        "x-inputs-hash": build.get("inputs_hash", ""),
        "resources": resources,
    }
    descriptor = out / "datapackage.json"
    descriptor.write_text(json.dumps(package, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    return descriptor
