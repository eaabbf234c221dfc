"""One output path for every command: --format table|csv|json, strict JSON, guarded --out files,
and names checked against their valid choices."""

from __future__ import annotations

import json
import math
import os
import sys
from pathlib import Path

import click

from .errors import ChoiceError, OutputError
from .schema.model import TEMPERATURE_BAND

FORMATS = ["table", "csv", "json"]


def format_option(default="table", choices=FORMATS):
    return click.option("--format", "fmt", type=click.Choice(choices), default=default, show_default=True,
                        help="Output format.")


def store_option(f):
    return click.option("--store", "store_path", type=click.Path(dir_okay=False), default=None,
                        help="Store file (default: $BODYPLAN_STORE, else the bundled store).")(f)


def set_choice_options(f):
    """The options that choose which rows a parameter set rests on (params and population share them)."""
    f = click.option("--class", "animal_class", default=None,
                     help="Production class or breed (vocab/classes.csv: broiler, layer, dairy, minipig …).")(f)
    f = click.option("--verified-only", is_flag=True, help="Use only rows read in their source text.")(f)
    f = click.option("--temperature", default=None, metavar="TEMP",
                     help='Fish, reptiles, amphibians: the water or air temperature, e.g. "12 degC"; uses rows '
                          f"measured within {TEMPERATURE_BAND:g} °C of it (and rows that state none).")(f)
    return click.option("--stage-fallback", is_flag=True,
                        help="Fill gaps from this species' rows at other life stages (named on each value).")(f)


def force_option(f):
    return click.option("--force", is_flag=True,
                        help="Overwrite an existing --out of another kind (a file the command reads is never overwritten).")(f)


def _finite(data):
    """NaN and infinities have no JSON spelling: missing becomes null, infinite is refused."""
    if isinstance(data, float):
        if math.isnan(data):
            return None
        if math.isinf(data):
            raise OutputError("the result holds a number too large to represent (infinite); check the inputs, "
                              "e.g. the body mass, for an implausible magnitude")
        return data
    if isinstance(data, dict):
        return {k: _finite(v) for k, v in data.items()}
    if isinstance(data, (list, tuple)):
        return [_finite(v) for v in data]
    return data


def to_json(data) -> str:
    """Strict JSON (RFC 8259): never NaN or Infinity, which most JSON readers reject."""
    return json.dumps(_finite(data), indent=2, ensure_ascii=False, default=str, allow_nan=False)


def emit(data, fmt: str, title: str | None = None, file=None) -> None:
    """Print a DataFrame or a dict as a rich table, CSV or JSON."""
    import pandas as pd

    out = file or sys.stdout
    if fmt == "json":
        if isinstance(data, pd.DataFrame):
            data = json.loads(data.to_json(orient="records"))
        out.write(to_json(data) + "\n")
        return
    frame = data if isinstance(data, pd.DataFrame) else pd.DataFrame(
        [{"key": k, "value": v} for k, v in data.items()])
    if fmt == "csv":
        frame.to_csv(out, index=False, lineterminator="\n")
        return
    from rich.console import Console
    from rich.table import Table

    table = Table(title=title, show_lines=False)
    for col in frame.columns:
        table.add_column(str(col), overflow="fold")
    for row in frame.itertuples(index=False):
        table.add_row(*["" if pd.isna(v) else str(v) for v in row])
    Console(file=out, width=None if out.isatty() else 200).print(table)


# ---- choices -------------------------------------------------------------------------------------
def choose(value: str, valid, what: str, option: str | None = None) -> str:
    """``value`` as one of ``valid``: exact, else the one case-insensitive match; ChoiceError otherwise."""
    valid = list(valid)
    if value in valid:
        return value
    folded = [v for v in valid if v.casefold() == value.casefold()]
    if len(folded) == 1:
        return folded[0]
    where = f" ({option})" if option else ""
    raise ChoiceError(f"unknown {what} {value!r}{where}; valid choices: {', '.join(valid)}")


def choose_ids(store, table: str, values, what: str, option: str | None = None):
    """Each of ``values`` checked against the ids of a store table; None stays None."""
    if values is None:
        return None
    ids = store.ids(table)
    if isinstance(values, str):
        return choose(values, ids, what, option)
    return [choose(v, ids, what, option) for v in values]


# ---- output files ----------------------------------------------------------------------------------
SQLITE_MAGIC = b"SQLite format 3\x00"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def file_kind(path: Path) -> str:
    """'sqlite', 'png' or 'text' by the first bytes; 'binary' for anything else."""
    with open(path, "rb") as fh:
        head = fh.read(4096)
    if head.startswith(SQLITE_MAGIC):
        return "sqlite"
    if head.startswith(PNG_MAGIC):
        return "png"
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as err:
        if err.start < len(head) - 4:  # not just a character cut at the 4096th byte
            return "binary"
    return "text" if b"\x00" not in head else "binary"


def _same(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def guard_out(out, *, kind: str, suffixes: tuple[str, ...] = (), inputs=(), force: bool = False) -> Path:
    """Refuse an ``out`` that is one of ``inputs`` (always) or, unless ``force``, an existing file of
    another kind than the one written (by content, and by suffix for text).

    ``inputs`` are files or folders the command reads; a folder stands for every file below it.
    """
    out = Path(out)
    for source in inputs:
        source = Path(source)
        if source.is_dir():
            if out.resolve().is_relative_to(source.resolve()):
                raise OutputError(f"{out} is inside {source}, which this command reads; write the output "
                                  "somewhere else")
        elif _same(out, source) or out.resolve() == source.resolve():
            raise OutputError(f"{out} is {source}, which this command reads; write the output to another file")
    if force or not out.exists():
        return out
    if out.is_dir():
        raise OutputError(f"{out} is a folder; give a file name (or --force to replace nothing: remove it first)")
    found = file_kind(out)
    if found != kind:
        raise OutputError(f"{out} exists and is a {found} file, not the {kind} file this command writes; "
                          "choose another name, or add --force to overwrite it")
    if suffixes and out.suffix.lower() not in suffixes:
        raise OutputError(f"{out} exists and its name does not end in {' or '.join(suffixes)} as a {kind} "
                          "output should; choose another name, or add --force to overwrite it")
    return out


def guard_out_dir(out, *, marker: str, inputs=(), force: bool = False) -> Path:
    """A folder to write into: refused if it is (or is inside) an input, or, unless ``force``, if it
    already holds files and no ``marker`` file of an earlier run of the same command."""
    out = Path(out)
    for source in inputs:
        source = Path(source)
        if source.is_dir() and out.resolve().is_relative_to(source.resolve()):
            raise OutputError(f"{out} is inside {source}, which this command reads; write the output "
                              "somewhere else")
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out} exists and is a file; give a folder name")
    if force or not out.exists() or not any(out.iterdir()) or (out / marker).exists():
        return out
    raise OutputError(f"{out} already holds files that are not an earlier output of this command (no {marker}); "
                      "choose an empty or new folder, or add --force")


# ---- renamed options -------------------------------------------------------------------------------
def renamed_option(new: str, old: str, dest: str, **kwargs):
    """Option ``new`` (stored in ``dest``), plus ``old`` accepted for one release with a note on stderr."""
    import functools

    multiple = kwargs.get("multiple", False)

    def decorate(f):
        @functools.wraps(f)
        def command(*args, **values):
            legacy = values.pop(f"{dest}_legacy")
            if legacy not in (None, ()):
                click.echo(f"note: {old} is deprecated and goes in the next release; use {new}", err=True)
                values[dest] = tuple(values[dest]) + tuple(legacy) if multiple else legacy
            return f(*args, **values)

        command = click.option(old, f"{dest}_legacy", hidden=True, default=None, multiple=multiple,
                               help=f"Deprecated spelling of {new}.")(command)
        return click.option(new, dest, **kwargs)(command)

    return decorate
