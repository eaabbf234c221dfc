"""Read a curated tree into DataFrames, keeping each row's file and line."""

from __future__ import annotations

import csv
import hashlib
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from ..schema import descriptors
from .findings import Findings

VOCAB_DIR = "vocab"
VALUES_DIR = "values"
BIB_FILE = "sources.bib"


@dataclass
class CuratedTree:
    root: Path
    vocab: dict[str, pd.DataFrame] = field(default_factory=dict)
    values: pd.DataFrame | None = None
    sources: list[dict] = field(default_factory=list)
    file_hashes: dict[str, str] = field(default_factory=dict)
    groups: pd.DataFrame | None = None  # groups.csv, read and checked by validate
    # (file, column) pairs whose column is missing: per-row findings for them would only repeat it
    missing_columns: set[tuple[str, str]] = field(default_factory=set)


def _decode(raw: bytes, rel: str, findings: Findings) -> str | None:
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        findings.error(rel, line, "file", f"byte 0x{raw[err.start]:02x} is not UTF-8; save the file as UTF-8",
                       code="R101")
        return None


def normalise_text(text: str) -> str:
    """What lint writes: no byte-order mark, LF line endings (CRLF and lone CR become LF)."""
    text = text.removeprefix("\ufeff")
    return text.replace("\r\n", "\n").replace("\r", "\n") if "\r" in text else text


EDGE_SPACES = (", ", " ,", "\n ", " \n", '" ', ' "', '"\n', '\n"')


def _may_need_strip(text: str) -> bool:
    """False only if no cell can begin or end with whitespace (substring tests run at C speed)."""
    if not text.isascii() or any(c in text for c in "\t\r\x0b\x0c\x1c\x1d\x1e\x1f"):
        return True
    return text.startswith((" ", '"')) or text.endswith(" ") or any(s in text for s in EDGE_SPACES)


def physical_lines(text: str) -> int:
    """Lines of a normalised text, the last one counted whether or not it ends with a line break."""
    return text.count("\n") + (0 if not text or text.endswith("\n") else 1)


class CsvProblem(Exception):
    """A located problem that stops reading a CSV file: (line, column, message, code)."""

    def __init__(self, line: int, column: str, message: str, code: str):
        super().__init__(message)
        self.line, self.column, self.message, self.code = line, column, message, code


def read_records(text: str) -> tuple[list[list[str]], list[int]]:
    """Every record of a normalised CSV text with the line it starts on; CsvProblem if any line is not
    accounted for.

    The reader is strict (a stray quote is an error, not a guess), and the records must cover the
    physical lines exactly: the last record's end is the file's last line, so an unclosed quote that
    would swallow the rest of the file as one cell is a located error, never silent data loss.
    """
    total = physical_lines(text)
    try:
        records = list(csv.reader(io.StringIO(text, newline=""), strict=True))
    except csv.Error:
        records = None
    if records is not None and len(records) == total:  # one record per line: nothing spans lines
        return records, list(range(1, total + 1))
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    records, lines = [], []
    start = 1
    try:
        for record in reader:
            records.append(record)
            lines.append(start)
            start = reader.line_num + 1
    except csv.Error as exc:
        if "unexpected end of data" in str(exc):
            raise CsvProblem(start, "row", f"a quote opened on this line is never closed, so lines {start}–{total} "
                             "would be read as one cell; close the quote (write \"\" for a quote inside a cell)",
                             "R103") from None
        raise CsvProblem(start, "row", f"cannot be read as CSV ({exc}); quote the whole cell and double any "
                         "quote inside it", "R102") from None
    if start - 1 != total:
        raise CsvProblem(start, "row", f"the reader stopped at line {start - 1} of {total}; this is a bodyplan "
                         "bug, please report it with the file", "R114")
    return records, lines


def _rows(records, numbers, text: str, rel: str, width: int, findings: Findings):
    """The data records with their line numbers; every malformed row reported."""
    strip = _may_need_strip(text)  # cells are compared as stripped text; most files need no stripping
    if not strip and all(len(row) == width for row in records[1:]):  # the common case: nothing to report
        return records[1:], numbers[1:]
    rows, lines = [], []
    for i, (row, line) in enumerate(zip(records, numbers)):
        if i == 0 or not row:
            continue
        if len(row) != width:
            findings.error(rel, line, "row", f"has {len(row)} fields but the header has {width}; "
                           "quote fields that contain commas", code="R104")
            continue
        rows.append([cell.strip() for cell in row] if strip else row)
        lines.append(line)
    return rows, lines


def _plain_frame(text: str) -> tuple[list[str], pd.DataFrame] | None:
    """(header, rows) at pandas' C speed when the file leaves nothing to interpret, else None.

    Nothing to interpret: no quote, no blank line, no cell with edge whitespace, the header's columns
    unique, and exactly as many commas as a full row on every line (the total matches, and pandas
    refuses any line with more, so none has fewer). Such a file has one record per line, so the
    records account for every physical line; anything else goes to the strict record reader.
    """
    first, _, rest = text.partition("\n")
    header = first.split(",")
    lines = physical_lines(text)
    if ('"' in text or "\n\n" in text or "\x00" in text or not rest or len(set(header)) != len(header)
            or text.count(",") != (len(header) - 1) * lines or _may_need_strip(text)):
        return None
    try:
        frame = pd.read_csv(io.StringIO(rest), header=None, dtype=object, na_filter=False, engine="c",
                            quoting=csv.QUOTE_NONE, skip_blank_lines=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError):
        return None
    if len(frame) != lines - 1 or frame.shape[1] != len(header):
        return None
    return header, frame


def read_table(path: Path, rel: str, descriptor: dict, findings: Findings,
               missing: set[tuple[str, str]]) -> pd.DataFrame | None:
    """One curated CSV as strings, with ``_file`` and ``_line``; None if unreadable."""
    text = _decode(path.read_bytes(), rel, findings)
    if text is None:
        return None
    text = normalise_text(text)
    if not text.strip():
        findings.error(rel, 1, "file", "is empty; it needs at least the header line", code="R105")
        return None
    fast = _plain_frame(text)
    if fast is not None:
        records, numbers = [fast[0]], None
    else:
        try:
            records, numbers = read_records(text)
        except CsvProblem as problem:
            findings.error(rel, problem.line, problem.column, problem.message, code=problem.code)
            return None
    header = [name.strip() for name in records[0]]
    expected = descriptors.names(descriptor)
    for name in header:
        if name not in expected:
            findings.error(rel, 1, name, f"unknown column {name!r}; the columns are: {','.join(expected)}",
                           code="R106")
    if len(set(header)) != len(header):
        findings.error(rel, 1, "header", "repeats a column name; each column appears once", code="R107")
        return None
    if fast is not None:
        frame, lines = fast[1], list(range(2, len(fast[1]) + 2))
        frame.columns = header
    else:
        rows, lines = _rows(records, numbers, text, rel, len(header), findings)
        frame = pd.DataFrame(rows, columns=header, dtype=object)  # plain Python strings: faster than pandas 3's "str" arrays here
    for name in expected:
        if name not in frame.columns:
            findings.error(rel, 1, name, f"missing column {name!r}; the header must be: {','.join(expected)}",
                           code="R108")
            missing.add((rel, name))
            frame[name] = ""
    if list(frame.columns) != expected:  # the usual file has the descriptor's order already: no copy
        frame = frame[expected].copy()
    frame["_file"] = rel
    frame["_line"] = lines
    return frame


def inside(path: Path, root: Path, rel: str, findings: Findings) -> bool:
    """False (with a finding) when ``path`` resolves outside ``root``: a symbolic link out of the tree."""
    target = path.resolve()
    if target.is_relative_to(root.resolve()):
        return True
    findings.error(rel, 0, "file", f"is a symbolic link to {target}, outside the data folder; copy the file "
                   "into the folder instead of linking it", code="R113")
    return False


def _hash(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def read_sources(path: Path, rel: str, findings: Findings) -> list[dict]:
    import bibtexparser  # only the ingest needs it

    text = _decode(path.read_bytes(), rel, findings)
    if text is None:
        return []
    text = normalise_text(text)
    from bibtexparser.middlewares import LatexDecodingMiddleware

    # fields reach the store as plain text ({\v{R}}ehulka → Řehulka); the raw entry is kept as written
    library = bibtexparser.parse_string(text, append_middleware=[LatexDecodingMiddleware(keep_braced_groups=True)])
    for block in library.failed_blocks:
        what = "repeats an entry key; keep one entry per key" if "Duplicate" in type(block).__name__ \
            else "is not valid BibTeX; check braces and commas"
        findings.error(rel, block.start_line + 1, "entry", f"this entry {what}",
                       code="R111" if "Duplicate" in type(block).__name__ else "R112")
    sources = []
    for entry in library.entries:
        for i, line in enumerate((entry.raw or "").splitlines()):
            if re.search(r"(?<!\\)%", line):  # BibTeX reads the rest of the line as a comment
                findings.error(rel, entry.start_line + 1 + i, "entry", "has a bare % that cuts the field off there "
                               "(BibTeX reads the rest of the line as a comment); write \\% instead", code="R115")
        fields = {k.lower(): f.value for k, f in entry.fields_dict.items()}
        raw = text.splitlines()[entry.start_line:]
        sources.append({"key": entry.key, "type": entry.entry_type.lower(), "fields": fields,
                        "line": entry.start_line + 1, "bibtex": entry.raw if entry.raw else "\n".join(raw[:1])})
    return sources


def read_tree(root: str | Path, findings: Findings) -> CuratedTree:
    root = Path(root)
    tree = CuratedTree(root=root)
    if not root.is_dir():
        findings.error(str(root), 0, "directory", "does not exist; give the folder holding vocab/, values/ "
                       "and sources.bib", code="R109")
        return tree
    for name, descriptor in descriptors.VOCABULARIES.items():
        path = root / VOCAB_DIR / f"{name}.csv"
        rel = f"{VOCAB_DIR}/{name}.csv"
        if not path.exists():
            findings.error(rel, 0, "file", f"is missing; every curated tree needs {rel}", code="R110")
            continue
        if not inside(path, root, rel, findings):
            continue
        tree.file_hashes[rel] = _hash(path)
        frame = read_table(path, rel, descriptor, findings, tree.missing_columns)
        if frame is not None:
            tree.vocab[name] = frame
    bib = root / BIB_FILE
    if bib.exists():
        if inside(bib, root, BIB_FILE, findings):
            tree.file_hashes[BIB_FILE] = _hash(bib)
            tree.sources = read_sources(bib, BIB_FILE, findings)
    else:
        findings.error(BIB_FILE, 0, "file", "is missing; sources are BibTeX entries in sources.bib", code="R110")
    frames = []
    if not (root / VALUES_DIR).is_dir():
        findings.error(f"{VALUES_DIR}/", 0, "directory", f"is missing in {root}; give the folder holding vocab/, "
                       "values/ and sources.bib (an empty values/ is fine)", code="R109")
    for path in sorted((root / VALUES_DIR).glob("*.csv")):
        rel = f"{VALUES_DIR}/{path.name}"
        if not inside(path, root, rel, findings):
            continue
        tree.file_hashes[rel] = _hash(path)
        frame = read_table(path, rel, descriptors.VALUES, findings, tree.missing_columns)
        if frame is not None:
            frame["_source"] = path.stem
            frames.append(frame)
    columns = descriptors.names(descriptors.VALUES) + ["_file", "_line", "_source"]
    tree.values = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=columns)
    return tree
