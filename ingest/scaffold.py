"""Start a new source: its values file (header only) and its BibTeX entry in sources.bib.

Everything is checked before anything is written, so a refused request leaves the
tree exactly as it was. The values file holds just the header: CSV has no comment
syntax the reader accepts, so the example row is printed for the curator instead.
"""

from __future__ import annotations

from ..errors import BodyplanError

import csv
import io
import re
from dataclasses import dataclass
from pathlib import Path

from ..schema import descriptors
from .read import BIB_FILE, VALUES_DIR

KEY = re.compile(r"[a-z0-9_]+")
REQUIRED_BIB_FIELDS = ("title", "year")

# Shape of a row, not data: every number here is a placeholder for the curator to replace.
EXAMPLE_ROW = {
    "id": "t2_liver_m", "species": "rat", "life_stage": "adult", "age": "10 week", "sex": "male",
    "strain": "Sprague-Dawley", "class": "", "group": "male", "compartment": "liver",
    "quantity": "tissue_mass_fraction", "part": "tissue", "method": "dissection_weighing", "condition": "rest",
    "value": "3.40",
    "unit": "%", "uncertainty": "sd", "spread": "0.25", "low": "", "high": "", "statistic": "mean",
    "uncertainty_assumed": "no", "n": "8", "n_counts": "animals", "body_mass": "0.25 kg",
    "temperature": "", "denominator": "live_body", "basis": "measured", "locator": "Table 2, p. 412", "verified": "yes",
    "missing_reason": "", "comment": "example row: replace every cell with what the source prints",
}


class ScaffoldError(BodyplanError, ValueError):
    """A new source that cannot be added as asked (key taken, BibTeX malformed); nothing was written."""


@dataclass
class Scaffold:
    values_file: Path
    bib_file: Path
    entry_text: str


def header_line() -> str:
    return ",".join(descriptors.names(descriptors.VALUES)) + "\n"


def example_line() -> str:
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerow([EXAMPLE_ROW[n] for n in descriptors.names(descriptors.VALUES)])
    return out.getvalue()


def columns_markdown() -> str:
    """The values-file columns as a Markdown table, from the descriptors (DEVELOPERS.md carries this text)."""
    lines = ["| column | required | allowed | meaning |", "|---|---|---|---|"]
    for spec in descriptors.VALUES["fields"]:
        rules = spec.get("constraints", {})
        allowed = ", ".join(rules["enum"]) if "enum" in rules else \
            f"id from vocab/{spec['x-foreign']}.csv" if "x-foreign" in spec else \
            spec["type"] if spec["type"] != "string" else ""
        lines.append(f"| `{spec['name']}` | {'yes' if rules.get('required') else ''} | {allowed} | "
                     f"{spec['description']} |")
    return "\n".join(lines) + "\n"


def existing_keys(root: Path) -> dict[str, str]:
    """Citation key → the .bib file (relative) that already holds it: sources.bib and bib_parts/*.bib."""
    from .lint import parse_bibtex

    keys = {}
    for path in [root / BIB_FILE, *sorted((root / "bib_parts").glob("*.bib"))]:
        if path.exists():
            for entry in parse_bibtex(path.read_text(encoding="utf-8")).entries:
                keys.setdefault(entry.key, str(path.relative_to(root)))
    return keys


def parse_entry(text: str, citekey: str):
    """The one BibTeX entry in ``text``; ScaffoldError unless it parses, is alone and has key ``citekey``."""
    from .lint import parse_bibtex

    library = parse_bibtex(text)
    if library.failed_blocks:
        line = library.failed_blocks[0].start_line + 1
        raise ScaffoldError(f"the BibTeX text is malformed near its line {line}; check braces, commas and the "
                            "'@type{key,' opening")
    if len(library.entries) != 1:
        raise ScaffoldError(f"expected exactly one BibTeX entry, found {len(library.entries)}")
    entry = library.entries[0]
    if entry.key != citekey:
        raise ScaffoldError(f"the BibTeX entry's key is {entry.key!r} but the source is {citekey!r}; "
                            "they must be equal (the key names the values file)")
    fields = {f.key.lower(): str(f.value).strip() for f in entry.fields}
    missing = [f for f in REQUIRED_BIB_FIELDS if not fields.get(f)]
    if missing:
        raise ScaffoldError(f"the BibTeX entry has no {' or '.join(missing)}; add {', '.join(missing)}")
    return entry


def scaffold_source(root: str | Path, citekey: str, bibtex: str) -> Scaffold:
    """Create values/<citekey>.csv (header only) and append the entry to sources.bib."""
    from .lint import LintError, canonical_bibtex

    root = Path(root)
    if not KEY.fullmatch(citekey):
        raise ScaffoldError(f"citation key {citekey!r} must be lowercase letters, digits and _, "
                            "e.g. brown1997 or lin2020_cattle")
    if not (root / VALUES_DIR).is_dir():
        raise ScaffoldError(f"{root} has no {VALUES_DIR}/ folder; give the curated data folder with --data")
    values_file = root / VALUES_DIR / f"{citekey}.csv"
    if values_file.exists():
        raise ScaffoldError(f"{values_file} already exists; source {citekey!r} is taken (pick another key, "
                            f"e.g. with a letter: {citekey}b)")
    taken = existing_keys(root)
    if citekey in taken:
        raise ScaffoldError(f"citation key {citekey!r} already exists in {taken[citekey]}; pick another key")
    parse_entry(bibtex, citekey)
    entry_text = canonical_bibtex(bibtex.encode("utf-8"), "the BibTeX text")  # one entry, canonical spelling
    bib_file = root / BIB_FILE
    old = bib_file.read_text(encoding="utf-8") if bib_file.exists() else ""
    joined = old.rstrip("\n") + "\n\n" + entry_text if old.strip() else entry_text
    try:  # a file already in canonical form gets the entry in its sorted place, so lint finds nothing to do
        if canonical_bibtex(old.encode("utf-8"), BIB_FILE) == old:
            joined = canonical_bibtex(joined.encode("utf-8"), BIB_FILE)
    except LintError:
        pass  # a broken sources.bib: append, and let check report the broken entry
    with open(values_file, "x", encoding="utf-8", newline="") as out:
        out.write(header_line())
    try:
        bib_file.write_text(joined, encoding="utf-8", newline="")
    except BaseException:
        values_file.unlink(missing_ok=True)
        raise
    return Scaffold(values_file, bib_file, entry_text)
