"""Build the SQLite store: validate everything first, write a temporary file, rename on success."""

from __future__ import annotations

import glob
import hashlib
import os
import sqlite3
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..schema import TABLES, descriptors
from .findings import CuratedDataError, Findings
from .plausibility import check_plausibility
from .read import CuratedTree, read_tree
from .validate import validate

HASHED_TABLES = ["species", "life_stages", "compartments", "quantities", "methods", "parts", "conditions", "classes",
                 "body_surface", "sources", "groups", "curated_values", "input_files"]


@dataclass
class BuildResult:
    path: Path
    content_hash: str
    counts: dict[str, int]
    warnings: list


def check(root: str | Path, plausibility: bool = True) -> tuple[Findings, CuratedTree, pd.DataFrame]:
    """Read and validate a curated tree; every finding of every layer, nothing written.

    ``plausibility=False`` keeps to the layers that decide whether a store can be built (shape and
    integrity errors); the plausibility warnings compare rows across sources and are the curator's
    ``bodyplan check``.
    """
    findings = Findings()
    tree = read_tree(root, findings)
    frame = validate(tree, findings) if tree.values is not None else pd.DataFrame()
    _check_finite(frame, findings)
    if plausibility and not findings.errors:
        check_plausibility(frame, tree, findings)
    return findings, tree, frame


def _check_finite(frame: pd.DataFrame, findings: Findings) -> None:
    """A finite number whose conversion overflows ('1e308' in L/min is infinite in L/h) would reach the
    store, and JSON, as Infinity: refused here, where the converted numbers first exist."""
    for column in ("_value_canonical", "_low_canonical", "_high_canonical", "_sd_canonical"):
        if column not in frame:
            continue
        numbers = frame[column].to_numpy(dtype=float)
        for i in np.flatnonzero(np.isinf(numbers)):
            row = frame.iloc[i]
            findings.error(row["_file"], row["_line"], "value",
                           f"{row['value']} {row['unit']} is too large once converted to {row['_unit_canonical']}; "
                           "check the number and its unit", code="V226")


def _without_braces(text: str) -> str:
    """BibTeX's protective braces removed, for text shown to people."""
    return text.replace("{", "").replace("}", "")


def format_citation(fields: dict) -> str:
    authors = [a.strip() for a in fields.get("author", "").replace("\n", " ").split(" and ") if a.strip()]
    surnames = [a.strip("{}") if a.startswith("{") and a.endswith("}") and "," not in a  # an organisation
                else a.split(",")[0].strip() if "," in a else a.split()[-1] for a in authors]
    who = (surnames[0] + " et al." if len(surnames) > 2 else " & ".join(surnames)) or \
        fields.get("organization", fields.get("publisher", "Authors not seen"))
    where = _without_braces(fields.get("journal") or fields.get("booktitle") or fields.get("publisher") or "")
    detail = where
    if fields.get("volume"):
        detail += f" {fields['volume']}"
    if fields.get("pages"):  # "Journal 12:3–9"; without a volume "Journal, 3–9"; alone "pp. 3–9"
        pages = fields["pages"].replace("--", "–")
        detail += f":{pages}" if fields.get("volume") else f", {pages}" if detail else f"pp. {pages}"
    title = _without_braces(fields.get("title", "")).rstrip(".")
    text = f"{who} ({fields.get('year', 'n.d.')}). {title}. {detail}".strip()
    return text.rstrip(".") + "."


def _none(x):
    """numpy/pandas missing markers and empty strings to SQL NULL; numpy scalars to Python."""
    if x is None or (isinstance(x, float) and np.isnan(x)) or x == "":
        return None
    return x.item() if isinstance(x, np.generic) else x


def _vocab_rows(frame: pd.DataFrame, columns: list[str], keys: list[str]) -> list[tuple]:
    frame = frame.sort_values(keys)
    return [tuple(_none(v.strip() if isinstance(v, str) else v) for v in row)
            for row in frame[columns].itertuples(index=False)]


def _text(column: pd.Series) -> list:
    """Cells (stripped when read) as a list, empty ones as None."""
    return [cell if cell else None for cell in column.tolist()]


def _value_columns(frame: pd.DataFrame) -> tuple[list[list], list]:
    """The curated_values table column by column: the columns to insert (as rows), and the same
    columns for the content hash, numbers there as float arrays (NaN for NULL) that hash as they are."""
    frame = frame.sort_values(["_source", "_line"])
    strip = {c: _text(frame[c]) for c in
             ("id", "species", "life_stage", "age", "sex", "strain", "compartment", "quantity", "unit",
              "uncertainty", "basis", "locator", "missing_reason", "comment", "class", "method")}

    arrays = {}

    def num(col):  # NaN to None, -0.0 to 0.0: the values exactly as SQLite gives them back
        arr = frame[col].to_numpy(dtype=float) + 0.0
        missing = np.isnan(arr)
        arr[missing] = np.nan  # one NaN bit pattern, as None hashes
        cells = arr.astype(object)
        cells[missing] = None
        cells = cells.tolist()
        arrays[id(cells)] = arr
        return cells

    n = [None if np.isnan(v) else int(v) for v in frame["_n"].to_numpy(dtype=float)]
    columns = [
        frame["_source"].tolist(), strip["id"], strip["species"], strip["life_stage"],
        strip["age"], num("_age_days"), strip["sex"], strip["strain"],
        strip["compartment"], strip["quantity"], frame["_kind"].tolist(), num("_value"),
        strip["unit"], num("_value_canonical"), frame["_unit_canonical"].tolist(),
        frame["_normalisation"].tolist(), strip["uncertainty"], num("_spread"), num("_low"),
        num("_high"), num("_sd_canonical"), num("_low_canonical"), num("_high_canonical"), n,
        num("_body_mass_kg"), strip["basis"], strip["locator"],
        (frame["verified"] == "yes").astype(int).tolist(), strip["missing_reason"],
        strip["comment"], frame["_file"].tolist(), frame["_line"].astype(int).tolist(),
        strip["class"], frame["_group"].tolist(), frame["_part"].tolist(), strip["method"],
        frame["_statistic"].tolist(), (frame["_uncertainty_assumed"] == "yes").astype(int).tolist(),
        frame["_n_counts"].tolist(), frame["_denominator"].tolist(), frame["_condition"].tolist(),
        num("_temperature_c"),
    ]
    columns.insert(0, list(range(1, len(frame) + 1)))  # the store's id first, as SELECT * gives it back
    return columns, [arrays.get(id(c), c) for c in columns]


VALUE_COLUMNS = ["id", "source_id", "row_id", "species_id", "life_stage_id", "age", "age_days", "sex", "strain",
                 "compartment_id", "quantity_id", "quantity_kind", "value", "unit", "value_canonical",
                 "unit_canonical", "normalisation", "uncertainty", "spread", "low", "high", "sd_canonical",
                 "low_canonical", "high_canonical", "n", "subject_body_mass_kg", "basis", "locator", "verified",
                 "missing_reason", "comment", "file", "line", "class_id", "group_id", "part_id", "method_id",
                 "statistic", "uncertainty_assumed", "n_counts", "denominator", "condition_id",
                 "temperature_c"]


def _digest_columns(digest, n_rows: int, columns) -> None:
    """Feed a table to ``digest`` column by column: numbers as float64 bytes, text joined.

    Column-wise hashing costs a fraction of one repr per row, and gives the same bytes for rows
    as inserted and as read back from SQLite (a test checks this).
    """
    digest.update(str(n_rows).encode())
    for column in columns:
        try:
            numbers = np.array(column, dtype=float)  # None becomes NaN; text raises
        except (TypeError, ValueError):
            digest.update(b"text")
            try:  # a column without empty cells joins at C speed
                text = "\x1f".join(column)
            except TypeError:  # an empty cell (None) or a number among the text
                text = "\x1f".join(["\x00" if v is None else str(v) for v in column])
            digest.update(text.encode())
        else:
            digest.update(b"numbers")
            digest.update((numbers + 0.0).tobytes())


def content_hash(conn: sqlite3.Connection, inserted: dict[str, list[list]] | None = None) -> str:
    """SHA-256 over every hashed table's rows in key order.

    ``inserted`` may give a table's columns exactly as they were inserted, all columns in order:
    hashing those skips reading a large table back (and turning rows into columns).
    """
    digest = hashlib.sha256()
    for table in HASHED_TABLES:
        digest.update(table.encode())
        if inserted and table in inserted:
            columns = inserted[table]
            _digest_columns(digest, len(columns[0]) if columns else 0, columns)
            continue
        rows = conn.execute(f'SELECT * FROM "{table}" ORDER BY 1').fetchall()
        _digest_columns(digest, len(rows), zip(*rows))
    return digest.hexdigest()


def _create_schema(path: Path) -> None:
    from sqlalchemy import create_engine
    from sqlmodel import SQLModel

    # the connection is made by sqlite3 itself: a '#' or '?' in the path must not pass through a URL
    engine = create_engine("sqlite://", creator=lambda: sqlite3.connect(path))
    SQLModel.metadata.create_all(engine, tables=[t.__table__ for t in TABLES])
    engine.dispose()


def _insert(conn, table: str, columns: list[str], rows: list[tuple]) -> None:
    marks = ", ".join("?" for _ in columns)
    names = ", ".join(f'"{c}"' for c in columns)
    conn.executemany(f'INSERT INTO "{table}" ({names}) VALUES ({marks})', rows)


def write_store(tree: CuratedTree, frame: pd.DataFrame, path: Path) -> tuple[str, dict[str, int]]:
    _create_schema(path)
    conn = sqlite3.connect(path, isolation_level=None)  # explicit transaction below
    try:
        # Every reference was checked by the validation (check_foreign) before any row is written, so
        # the bulk insert runs without per-row foreign-key probes; foreign_key_check confirms it once.
        conn.execute("PRAGMA foreign_keys = OFF")
        conn.execute("PRAGMA synchronous = OFF")  # a temporary file: a crash just discards it
        conn.execute("PRAGMA journal_mode = OFF")
        conn.execute("PRAGMA cache_size = -131072")  # 128 MiB: the unique (source, row) index stays in memory
        conn.execute("BEGIN")
        for name, descriptor in descriptors.VOCABULARIES.items():
            columns = descriptors.names(descriptor)
            rows = _vocab_rows(tree.vocab[name], columns, descriptor["primaryKey"])
            _insert(conn, name, columns, rows)
        source_rows = []
        for src in sorted(tree.sources, key=lambda s: s["key"]):
            f = src["fields"]
            year = f.get("year", "")
            source_rows.append((src["key"], src["type"], f.get("author"), _without_braces(f.get("title", "")) or None,
                                _without_braces(f.get("journal") or f.get("booktitle") or f.get("publisher") or "") or None,
                                int(year) if year.isdigit() else None, f.get("volume"), f.get("pages"),
                                f.get("doi"), format_citation(f), src["bibtex"], f.get("note"),
                                f.get("derived_from", "").strip() or None))
        _insert(conn, "sources", ["id", "entry_type", "author", "title", "container", "year", "volume", "pages",
                                  "doi", "citation", "bibtex", "note", "derived_from"], source_rows)
        if tree.groups is not None and len(tree.groups):
            group_rows = sorted(tuple(_none(v) for v in row) for row in
                                tree.groups[["source", "group", "contains", "label", "note"]].itertuples(index=False))
            _insert(conn, "groups", ["source_id", "group_id", "contains", "label", "note"], group_rows)
        # indexes are built once after the bulk insert rather than kept up to date row by row
        indexes = [sql for (sql,) in conn.execute("SELECT sql FROM sqlite_master WHERE type = 'index' AND "
                                                  "tbl_name = 'curated_values' AND sql IS NOT NULL ORDER BY name")]
        for (name,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'index' AND "
                                    "tbl_name = 'curated_values' AND sql IS NOT NULL").fetchall():
            conn.execute(f'DROP INDEX "{name}"')
        value_columns, hashed_columns = _value_columns(frame)
        _insert(conn, "curated_values", VALUE_COLUMNS, zip(*value_columns))
        for sql in indexes:
            conn.execute(sql)
        _insert(conn, "input_files", ["path", "sha256"], sorted(tree.file_hashes.items()))
        digest = content_hash(conn, {"curated_values": hashed_columns})
        counts = {t: conn.execute(f'SELECT count(*) FROM "{t}"').fetchone()[0]
                  for t in ("species", "sources", "curated_values")}
        from .. import __version__

        _insert(conn, "build_info", ["key", "value"], [
            ("content_hash", digest), ("bodyplan_version", __version__),
            ("inputs_hash", hashlib.sha256("".join(f"{k}{v}" for k, v in
                                                    sorted(tree.file_hashes.items())).encode()).hexdigest()),
        ])
        conn.execute("COMMIT")
        broken = conn.execute("PRAGMA foreign_key_check").fetchall()
        if broken:
            raise RuntimeError(f"foreign keys broken after validation (a bodyplan bug): {broken[:5]}")
    finally:
        conn.close()
    return digest, counts


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's live process
        return True
    return True


def remove_stale_temporaries(out: Path) -> list[Path]:
    """Delete temporary stores of ``out`` left by builds that were killed: their name carries the pid
    of the build that made them, and that process is gone. A build still running keeps its file."""
    removed = []
    for tmp in out.parent.glob(f".{glob.escape(out.name)}.*.tmp"):
        pid = tmp.name[len(out.name) + 2:].split(".", 1)[0]
        if not pid.isdigit() or not _alive(int(pid)):
            tmp.unlink(missing_ok=True)
            removed.append(tmp)
    return removed


def build(root: str | Path, out: str | Path, plausibility: bool = False) -> BuildResult:
    """Validate ``root`` and build the store at ``out``; on any error ``out`` is left as it was.

    Plausibility warnings are collected only when asked (``bodyplan check`` always does): they never
    block a build, and on a large tree they cost as much as the build itself.
    """
    findings, tree, frame = check(root, plausibility)
    if findings.errors:
        raise CuratedDataError(findings)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    remove_stale_temporaries(out)
    fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.{os.getpid()}.", suffix=".tmp", dir=out.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        tmp_path.unlink()
        digest, counts = write_store(tree, frame, tmp_path)
        os.replace(tmp_path, out)
    except BaseException:
        tmp_path.unlink(missing_ok=True)
        raise
    return BuildResult(out, digest, counts, findings.warnings)
