"""One output path for every command: --format table|csv|json."""

from __future__ import annotations

import json
import sys

import click

FORMATS = ["table", "csv", "json"]


def format_option(default="table", choices=FORMATS):
    return click.option("--format", "fmt", type=click.Choice(choices), default=default, show_default=True,
                        help="Output format.")


def store_option(f):
    return click.option("--store", "store_path", type=click.Path(dir_okay=False), default=None,
                        help="Store file (default: $BODYPLAN_STORE, else the bundled store).")(f)


def to_json(data) -> str:
    return json.dumps(data, indent=2, ensure_ascii=False, default=str)


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
