"""Generate the site's datasette metadata from the schema, the quantities vocabulary and the store.

Column and table descriptions come from schema/columns.py, the one place they are written (the
exported data package reads the same); this module adds facets, units in words and the page texts.
"""

from __future__ import annotations

import re
import sqlite3
from collections import defaultdict
from importlib.metadata import PackageNotFoundError, metadata as package_metadata
from pathlib import Path

from .. import CAUTION
from ..schema import descriptors
from ..schema.columns import TABLE_DESCRIPTIONS, describe
from .plugin import DATABASE, PLUGIN
from .queries import QUERIES

# The facets a modeller narrows by; each costs a query on every table page (basis and verified are
# one click away as filters, and the species pages already split by life stage).
FACETS = ["species_id", "quantity_id", "compartment_id"]



# one factor of a unit between slashes: "kg", "m^2", "(100 g)", "(1.73 m^2)"
_FACTOR = re.compile(r"^\(?\s*(?:(?P<scale>[0-9.]+)\s+)?(?P<name>[A-Za-z%]+)"
                     r"(?:\s*(?:\^|\*\*)\s*(?P<power>[23]))?\s*\)?$")


def unit_in_words(unit: str) -> str:
    """'L/h/kg' → 'liter per hour per kilogram'; 'mL/min/(1.73 m^2)' → '… per 1.73 square meter'."""
    from ..units import ureg

    if unit.strip() == "1":
        return "a plain number (no unit)"
    words = []
    for i, part in enumerate(p.strip() for p in re.split(r"/(?![^(]*\))", unit)):
        if i == 0 and part == "1":
            words.append("one")
            continue
        match = _FACTOR.match(part)
        if not match:  # products and other forms: pint's own long spelling
            return format(ureg.Unit(unit), "D")
        name = format(ureg.Unit(match["name"]), "D")
        power = {"2": "square ", "3": "cubic "}.get(match["power"] or "", "")
        scale = f"{match['scale']} " if match["scale"] else ""
        words.append(("per " if i else "") + scale + power + name)
    return " ".join(words)


def _words_or_none(unit: str) -> str | None:
    try:
        return unit_in_words(unit)
    except Exception:  # pint raises several unrelated types; the page then shows the unit alone
        return None


def units_sentence(conn: sqlite3.Connection, sql: str) -> str:
    """Units in words, each with the quantities given in it; ``sql`` yields (unit, normalisation, label)."""
    from ..units import NORMALISERS

    by_unit = defaultdict(list)
    for unit, normalisation, label in conn.execute(sql).fetchall():
        per = NORMALISERS.get(normalisation)
        by_unit[unit_in_words(unit) + (f" ({per[2]})" if per else "")].append(label)
    parts = [f"{words} for {', '.join(sorted(labels))}" for words, labels in sorted(by_unit.items())]
    return ("Units in words: " + "; ".join(parts) + ".") if parts else ""


STORED_UNITS = ("SELECT DISTINCT v.unit_canonical, v.normalisation, q.label FROM curated_values v "
                "JOIN quantities q ON q.id = v.quantity_id")
VOCABULARY_UNITS = "SELECT canonical_unit, 'none', label FROM quantities"


def _licence() -> tuple[str, str | None]:
    try:
        text = package_metadata("bodyplan").get("License") or ""
    except PackageNotFoundError:
        text = ""
    return (text, "https://opensource.org/license/mit") if text == "MIT" else (text or "see the project", None)


def column_descriptions(conn: sqlite3.Connection, table: str) -> dict[str, str]:
    described = {}
    for (name,) in conn.execute(f"SELECT name FROM pragma_table_info('{table}')"):
        text = describe(table, name)
        if table == "quantities" and name == "canonical_unit":
            text = f"{text} {units_sentence(conn, VOCABULARY_UNITS)}"
        elif "{units}" in text:
            text = text.format(units=units_sentence(conn, STORED_UNITS))
        described[name] = text.strip()
    return described


def build_metadata(store: str | Path, allow_sql: bool = False) -> dict:
    """The metadata.json of the site, generated from the store it describes."""
    conn = sqlite3.connect(f"file:{Path(store)}?mode=ro", uri=True)
    try:
        info = dict(conn.execute("SELECT key, value FROM build_info").fetchall())
        tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        licence, licence_url = _licence()
        units = conn.execute("SELECT unit FROM curated_values UNION SELECT unit_canonical FROM curated_values "
                             "UNION SELECT canonical_unit FROM quantities").fetchall()
        unit_words = {u: words for (u,) in units if u and (words := _words_or_none(u))}
        source = f"bodyplan curated files, build {info.get('content_hash', 'unknown')[:16]}"
        common = {"license": licence, "source": source}
        if licence_url:
            common["license_url"] = licence_url
        table_meta = {}
        for table in tables:
            vocab = descriptors.VOCABULARIES.get(table)
            entry = dict(common,
                         description=TABLE_DESCRIPTIONS.get(table) or (vocab or {}).get("description", ""),
                         columns=column_descriptions(conn, table))
            if table == "curated_values":
                entry["facets"] = FACETS
            table_meta[table] = entry
    finally:
        conn.close()
    return dict(
        common,
        title="bodyplan: species physiology for PBPK modelling",
        description_html=(
            "<p>Curated physiology of many species (organ masses and volumes, blood flows, cardiac output, "
            "GFR, hematocrit, tissue composition), every value with its source, locator, uncertainty, "
            "unit and verification flag. Read-only.</p>"
            f"<p class=\"bodyplan-caution\"><strong>Caution:</strong> {CAUTION}</p>"
            "<p><a href=\"/species\">Species</a>: a page per species with what the store holds at each "
            "life stage, how ready its parameter sets are and what is missing; each parameter set (with "
            "JSON, CSV and SBML downloads) and each value has a page of its own. "
            "<a href=\"/coverage\">Coverage</a> is the gap report's matrix, each cell linked to its rows.</p>"
            "<p>Or browse the <a href=\"/bodyplan/curated_values\">curated values</a> (facet by species, "
            "quantity, compartment) and the named queries (parameter set, one parameter across species, "
            "coverage and gaps) on <a href=\"/bodyplan\">the store's page</a>.</p>"),
        databases={DATABASE: dict(common, description="The bodyplan store: vocabularies, sources and values.",
                                  tables=table_meta, queries=QUERIES)},
        plugins={PLUGIN: {"caution": CAUTION, "unit_words": unit_words, "allow_sql": allow_sql,
                          "pages_dir": "pages"}},
    )
