"""Canonical form of the curated files, so a diff shows only real changes.

CSV files: columns in descriptor order, rows sorted by the descriptor's primary key
(natural order, so ``t2`` comes before ``t10``), cells trimmed, numbers without a
leading '+' or stray spaces (the printed precision is kept: '3.20' stays '3.20'),
minimal quoting, UTF-8 without BOM, LF line endings. BibTeX files: parsed with
bibtexparser and written back entry by entry, sorted by key. Canonical text is a
fixed point: linting a linted file changes nothing.
"""

from __future__ import annotations

from ..errors import BodyplanError

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

from ..schema import descriptors
from .read import BIB_FILE, VALUES_DIR, VOCAB_DIR, CsvProblem, normalise_text, read_records

NUMBER = re.compile(r"([+-]?)\s*(\d*)(\.\d*)?([eE][+-]?\d+)?")
QUANTITY_COLUMNS = {f["name"] for f in descriptors.VALUES["fields"]
                    if f.get("constraints", {}).get("pattern") == descriptors.QUANTITY_TEXT}


class LintError(BodyplanError, ValueError):
    """A file too broken to rewrite safely (not UTF-8, a ragged row, an unknown column)."""


@dataclass
class LintReport:
    changed: list[str] = field(default_factory=list)  # relative paths that were (or would be) rewritten
    first_difference: dict[str, int] = field(default_factory=dict)  # path → first differing line
    problems: list[str] = field(default_factory=list)  # "path:line: message" for files left alone
    checked: int = 0


def natural_key(text: str) -> tuple:
    """'t10' sorts after 't2': digit runs compare as numbers."""
    return tuple((0, int(part), part) if part.isdigit() else (1, 0, part)
                 for part in re.split(r"(\d+)", text) if part)


def canonical_number(text: str) -> str:
    """Trim a number's spelling without touching its digits: ' +3.20 ' → '3.20', '.5' → '0.5'."""
    text = text.strip()
    m = NUMBER.fullmatch(text)
    if not m or not (m.group(2) or (m.group(3) or "")[1:]):
        return text  # not a plain number: leave it for check to report
    sign = "" if m.group(1) == "+" else m.group(1)
    whole = m.group(2).lstrip("0") or "0"
    exp = (m.group(4) or "").lower().replace("+", "")
    return f"{sign}{whole}{m.group(3) or ''}{exp}"


def canonical_cell(text: str, spec: dict) -> str:
    text = text.strip()
    if spec["type"] in ("number", "integer"):
        return canonical_number(text)
    if spec["name"] in QUANTITY_COLUMNS:  # '0.25   kg' → '0.25 kg'
        parts = text.split()
        if parts:
            return " ".join([canonical_number(parts[0]), *parts[1:]])
    return text


def _decode(raw: bytes, rel: str) -> str:
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        raise LintError(f"{rel}:{line}: byte 0x{raw[err.start]:02x} is not UTF-8; save the file as UTF-8 "
                        "first (lint will not guess the encoding)") from None
    return normalise_text(text)


def canonical_csv(raw: bytes, rel: str, descriptor: dict) -> str:
    """The canonical text of one curated CSV; LintError if it cannot be rewritten without losing data."""
    text = _decode(raw, rel)
    try:  # the reader that check uses: an unclosed quote is refused, never written back as one cell
        records, starts = read_records(text)
    except CsvProblem as problem:
        raise LintError(f"{rel}:{problem.line}: {problem.message}; lint left the file alone") from None
    if not records:
        raise LintError(f"{rel}:1: the file is empty; it needs at least the header line")
    header = [h.strip() for h in records[0]]
    specs = {f["name"]: f for f in descriptor["fields"]}
    unknown = [h for h in header if h not in specs]
    if unknown or len(set(header)) != len(header):
        raise LintError(f"{rel}:1: header has unknown or repeated columns ({', '.join(unknown) or 'repeat'}); "
                        "fix it by hand, lint never drops a column")
    body = []
    for line, row in zip(starts[1:], records[1:]):
        if not any(cell.strip() for cell in row):
            continue  # a blank line
        if len(row) != len(header):
            raise LintError(f"{rel}:{line}: has {len(row)} fields but the header has {len(header)}; "
                            "quote fields that contain commas, then lint again")
        cells = dict(zip(header, row))
        body.append([canonical_cell(cells.get(name, ""), specs[name]) for name in specs])
    key_columns = [list(specs).index(k) for k in descriptor.get("primaryKey", ["id"])]
    body.sort(key=lambda r: tuple(natural_key(r[i]) for i in key_columns))  # stable: ties keep file order
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(list(specs))
    writer.writerows(body)
    return out.getvalue()


GIVEN_PART = re.compile(r"\{[^{}]*\}|\\[a-zA-Z]+\s*\{?\w\}?|\\.\{?\w\}?|[^\s-]")


def _initial(word: str) -> str:
    """'Narendra' → 'N.', 'Jean-Louis' → 'J.-L.', '{\\'E}tienne' → '{\\'E}.'; a lowercase particle stays."""
    if not word or word[0].islower():
        return word
    parts = []
    for piece in word.split("-"):
        m = GIVEN_PART.match(piece)
        parts.append(m.group(0).rstrip(".") + "." if m else piece)
    return "-".join(parts)


def initials(author_field: str) -> str:
    """Given names as initials in every 'Surname, Given Names' of a BibTeX author field.

    Organisations in braces, 'others' and names without a comma (lint cannot tell the surname
    reliably) are kept as written.
    """
    people = re.split(r"\s+and\s+", " ".join(author_field.split()))
    out = []
    for person in people:
        surname, _, given = person.rpartition(",")
        if person.startswith("{") or person == "others" or not any(c.isalpha() for c in surname) \
                or not any(c.isalpha() for c in given):
            out.append(person)
            continue
        out.append(f"{surname.strip()}, {' '.join(_initial(w) for w in given.split())}")
    return " and ".join(out)


def parse_bibtex(text: str):
    """bibtexparser's Library for ``text``; its parse warnings stay quiet (callers report failed blocks)."""
    import logging

    import bibtexparser

    logger = logging.getLogger("bibtexparser")
    level = logger.level
    logger.setLevel(logging.ERROR)
    try:
        return bibtexparser.parse_string(text)
    finally:
        logger.setLevel(level)


def _entry_text(entry, fmt, stack) -> str:
    import bibtexparser
    from bibtexparser.library import Library

    return bibtexparser.write_string(Library([entry]), bibtex_format=fmt, unparse_stack=stack).strip("\n")


def canonical_bibtex(raw: bytes, rel: str) -> str:
    """Entries sorted by key, lowercase types and field names, one field per line aligned per entry."""
    from bibtexparser import BibtexFormat
    from bibtexparser.middlewares import AddEnclosingMiddleware

    text = _decode(raw, rel)
    library = parse_bibtex(text)
    if library.failed_blocks:
        block = library.failed_blocks[0]
        raise LintError(f"{rel}:{block.start_line + 1}: this block is not valid BibTeX (or repeats a key); "
                        "fix it by hand, then lint again")
    fmt = BibtexFormat()
    fmt.indent = "  "
    fmt.value_column = "auto"
    fmt.trailing_comma = False
    stack = [AddEnclosingMiddleware(reuse_previous_enclosing=False, enclose_integers=True, default_enclosing="{")]
    for entry in library.entries:
        entry.entry_type = entry.entry_type.lower()
        for f in entry.fields:
            f.key = f.key.lower()
            f.value = " ".join(str(f.value).split())
            if f.key == "author":
                f.value = initials(f.value)
    others = [b for b in library.blocks if b not in library.entries]  # comments, @string, @preamble: kept first
    entries = sorted(library.entries, key=lambda e: natural_key(e.key))
    parts = [_entry_text(b, fmt, stack) for b in others] + [_entry_text(e, fmt, stack) for e in entries]
    return "\n\n".join(p for p in parts if p.strip()) + "\n" if parts else ""


def curated_files(root: Path) -> list[tuple[Path, str, dict | None]]:
    """(path, relative path, descriptor or None for BibTeX) of every file lint looks after."""
    files = []
    for name, descriptor in descriptors.VOCABULARIES.items():
        path = root / VOCAB_DIR / f"{name}.csv"
        if path.exists():
            files.append((path, f"{VOCAB_DIR}/{name}.csv", descriptor))
    for path in sorted((root / VALUES_DIR).glob("*.csv")):
        files.append((path, f"{VALUES_DIR}/{path.name}", descriptors.VALUES))
    for name, descriptor in descriptors.ROOT_TABLES.items():
        if (root / f"{name}.csv").exists():
            files.append((root / f"{name}.csv", f"{name}.csv", descriptor))
    for path in [root / BIB_FILE, *sorted((root / "bib_parts").glob("*.bib"))]:
        if path.exists():
            files.append((path, str(path.relative_to(root)), None))
    return files


def canonical_text(path: Path, rel: str, descriptor: dict | None) -> str:
    raw = path.read_bytes()
    return canonical_bibtex(raw, rel) if descriptor is None else canonical_csv(raw, rel, descriptor)


def _first_difference(old: bytes, new: str) -> int:
    old_lines = old.decode("utf-8", errors="replace").split("\n")
    for i, (a, b) in enumerate(zip(old_lines, new.split("\n")), start=1):
        if a != b:
            return i
    return min(len(old_lines), len(new.split("\n")))


def lint_tree(root: str | Path, *, write: bool = True) -> LintReport:
    """Rewrite every curated file under ``root`` into canonical form (or, with write=False, only report)."""
    root = Path(root)
    if not root.is_dir():
        raise FileNotFoundError(f"{root} is not a folder; give the folder holding vocab/, values/ and sources.bib")
    report = LintReport()
    for path, rel, descriptor in curated_files(root):
        report.checked += 1
        if not path.resolve().is_relative_to(root.resolve()):  # never rewrite a file outside the tree
            report.problems.append(f"{rel}:0: is a symbolic link to {path.resolve()}, outside the data folder; "
                                   "lint leaves it alone (copy the file into the folder)")
            continue
        try:
            new = canonical_text(path, rel, descriptor)
        except LintError as exc:
            report.problems.append(str(exc))
            continue
        old = path.read_bytes()
        if old == new.encode("utf-8"):
            continue
        report.changed.append(rel)
        report.first_difference[rel] = _first_difference(old, new)
        if write:
            tmp = path.with_name(f".{path.name}.lint")
            tmp.write_bytes(new.encode("utf-8"))
            tmp.replace(path)
    return report
