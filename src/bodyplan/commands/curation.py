"""The curator's workflow: add a source, lint the files, trace a parameter, diff two stores, export."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from ..errors import OutputError
from ..schema.model import LIVER
from ..output import (choose, choose_ids, emit, force_option, format_option, guard_out_dir, renamed_option,
                      store_option, to_json)
from .store_commands import data_dir_or_bundled as _data_dir


@click.command("add")
@click.argument("citekey")
@click.option("--data", "data_dir", type=click.Path(file_okay=False), default=None,
              help="Curated data folder (default: the bundled data_curated).")
@click.option("--bibtex", "bibtex", type=click.File("r", encoding="utf-8"), default=None,
              help="File holding the source's BibTeX entry, or '-' to paste it (end with Ctrl-D).")
def add_cmd(citekey, data_dir, bibtex):
    """Start a new source: values/CITEKEY.csv (header only) and its BibTeX entry in sources.bib."""
    from ..ingest.scaffold import ScaffoldError, example_line, header_line, scaffold_source

    if bibtex is None:
        raise ScaffoldError("give the source's BibTeX entry with --bibtex FILE, or --bibtex - and paste it; "
                            "nothing was written")
    root = _data_dir(data_dir)
    made = scaffold_source(root, citekey, bibtex.read())
    click.echo(f"created {made.values_file} (header only)")
    click.echo(f"added @{citekey} to {made.bib_file}")
    click.echo("\nan example row (the header, then one row to copy and overwrite):\n")
    click.echo(header_line() + example_line())
    click.echo("next steps:")
    click.echo(f"  1. add one row per value the source prints to {made.values_file}")
    click.echo(f"  2. bodyplan check {root}      # fix every finding in your file")
    click.echo(f"  3. bodyplan lint {root}       # canonical order and spelling")
    click.echo(f"  4. bodyplan build {root} --out bodyplan.sqlite && "
               f"bodyplan trace SPECIES QUANTITY --store bodyplan.sqlite")


@click.command("lint")
@click.argument("data_dir", required=False, type=click.Path(file_okay=False))
@click.option("--check", "check_only", is_flag=True,
              help="Only report files that are not in canonical form (exit 1 if any); write nothing.")
def lint_cmd(data_dir, check_only):
    """Rewrite the curated files of DATA_DIR (default: the bundled data_curated) in canonical form."""
    from ..ingest.lint import lint_tree

    root = _data_dir(data_dir)
    report = lint_tree(root, write=not check_only)
    for problem in report.problems:
        click.echo(f"error: {problem}", err=True)
    verb = "would rewrite" if check_only else "rewrote"
    for rel in report.changed:
        click.echo(f"{verb} {rel} (first difference at line {report.first_difference[rel]})")
    click.echo(f"{root}: {len(report.changed)} of {report.checked} file(s) "
               f"{'not in canonical form' if check_only else 'rewritten'}"
               f"{f', {len(report.problems)} left alone (errors above)' if report.problems else ''}", err=True)
    sys.exit(1 if report.problems or (check_only and report.changed) else 0)


def _short_number(x) -> str:
    import pandas as pd

    return "" if x is None or pd.isna(x) else f"{x:.6g}"


def _trace_table(rows):
    """The rows in a width a terminal can show: citations are listed once below the table."""
    import pandas as pd

    def spread(r):
        if r["uncertainty"] in ("sd", "se", "cv"):
            return f"{r['uncertainty']} {_short_number(r['spread'])}" + (" %" if r["uncertainty"] == "cv" else "")
        if r["uncertainty"] in ("ci95", "range"):
            return f"{r['uncertainty']} {_short_number(r['low'])}..{_short_number(r['high'])}"
        return "none"

    out = [{"compartment": r["compartment"], "source": r["source"], "locator": r["locator"], "row": r["row_id"],
            "sex": r["sex"], "reported": f"{_short_number(r['value'])} {r['unit']}" if pd.notna(r["value"])
            else "(missing; see --format json)", "uncertainty": spread(r), "n": _short_number(r["n"]),
            "canonical": f"{_short_number(r['value_canonical'])} {r['unit_canonical']}" if pd.notna(r["value_canonical"])
            else "", "sd (canonical)": _short_number(r["sd_canonical"]), "verified": "yes" if r["verified"] else "no",
            "used": ("yes" if r["used"] else f"no: {r['left_out']}" if r.get("left_out") else "no")
            if "used" in r else "",
            "at": f"{r['file']}:{r['line']}"} for r in rows.to_dict("records")]
    columns = ["compartment", "source", "locator", "row", "sex", "reported", "uncertainty", "n", "canonical",
               "sd (canonical)", "verified", "used", "at"]
    return pd.DataFrame(out, columns=columns if "used" in rows else [c for c in columns if c != "used"])


def _combination_line(c: dict) -> str:
    head = f"combined: {c['compartment']} {c['parameter']}"
    if c["compartment"] == LIVER and c["parameter"] == "blood_flow":  # the layout's liver keeps its arterial share
        head += (" (all the liver's inflow; a set's liver compartment takes the hepatic artery, this less the "
                 "portal organs' flows)")
    if c["value"] is None:
        return f"{head}: gap ({c['reason']})"
    spread = f", se {_short_number(c['se'])}" if c.get("se") is not None else \
        f", sd {_short_number(c['sd'])}" if c.get("sd") is not None else ""
    kind = "95 % prediction interval" if "prediction interval" in (c["method"] or "") else "range of study values"
    span = f", {kind} {_short_number(c['low'])}..{_short_number(c['high'])}" if c.get("low") is not None else ""
    # the sources of the rows used: a density or body mass borrowed from other sources is not one of them
    n, k = c["n_studies"], len({r["source"] for r in c.get("rows_used") or ()} or set(c.get("sources") or ()))
    # independent groups of one source pool as studies do, but are not more publications
    studies = f"{n} independent groups from {k} source{'s' if k > 1 else ''}" if 0 < k < n else \
        f"{n} stud{'y' if n == 1 else 'ies'}"
    return f"{head} = {_short_number(c['value'])} {c['unit']}{spread}{span}; {c['method']}; {studies}; rows used:"


@click.command("trace")
@click.argument("species")
@click.argument("quantity")
@click.argument("compartment", required=False)
@renamed_option("--life-stage", "--stage", "life_stage", default="adult", show_default=True, help="Life stage id.")
@click.option("--sex", default=None, help="Rows of this sex (male, female, mixed, unknown) plus mixed and unknown "
              "ones, as a parameter set of that sex uses them.")
@format_option()
@store_option
def trace_cmd(species, quantity, compartment, life_stage, sex, fmt, store_path):
    """Every curated row behind a parameter, with its source, and how the parameter set combines them."""
    from .. import CAUTION
    from ..api import open_store
    from ..api.trace import trace

    store = open_store(store_path)
    species = choose_ids(store, "species", species, "species")
    quantity = choose_ids(store, "quantities", quantity, "quantity")
    compartment = choose_ids(store, "compartments", compartment, "compartment")
    life_stage = choose_ids(store, "life_stages", life_stage, "life stage", "--life-stage")
    from ..schema.descriptors import SEXES

    sex = None if sex is None else choose(sex, SEXES, "sex", "--sex")
    result = trace(store, species, quantity, compartment, life_stage=life_stage, sex=sex)
    if fmt == "json":
        click.echo(to_json(result.to_dict()))
        return
    if fmt == "csv":
        emit(result.rows, "csv")
        return
    title = f"{species} {life_stage} {quantity}" + (f" in {compartment}" if compartment else "")
    emit(_trace_table(result.rows), "table", title=f"{title}: {len(result.rows)} curated row(s)")
    for source, citation in result.rows[["source", "citation"]].drop_duplicates().itertuples(index=False):
        click.echo(f"{source}: {citation}")
    for c in result.combined:
        click.echo(_combination_line(c))
        for r in c["rows_used"]:
            click.echo(f"    {r['source']} {r['row_id']} ({r['quantity']} in {r['compartment']}, route {r['route']}): "
                       f"{_short_number(r['value_in_unit'])}  {r['at']}")
    if result.note:
        click.echo(f"note: {result.note}")
    click.echo(CAUTION)


@click.command("diff")
@click.argument("old_store", type=click.Path(dir_okay=False, exists=True))
@click.argument("new_store", type=click.Path(dir_okay=False, exists=True))
@format_option(choices=["table", "json", "markdown"])
def diff_cmd(old_store, new_store, fmt):
    """Values added, removed and changed between two stores (identity: source and row id)."""
    from ..api import open_store
    from ..api.diff import diff_stores

    result = diff_stores(open_store(old_store), open_store(new_store))
    if fmt == "json":
        click.echo(to_json(result.to_dict()))
        return
    if fmt == "markdown":
        click.echo(result.to_markdown(), nl=False)
        return
    info = result.to_dict()
    s = info["summary"]
    click.echo(f"old {old_store}: content hash {info['old'].get('content_hash', '?')}")
    click.echo(f"new {new_store}: content hash {info['new'].get('content_hash', '?')}")
    click.echo(f"{s['values_added']} value(s) added, {s['values_removed']} removed, {s['values_changed']} changed; "
               f"{s['sources_added']} source(s) added, {s['sources_removed']} removed")
    if result.is_empty:
        return
    emit(result.per_species(), "table", title="per species")
    for title, sources in (("source added", result.sources_added), ("source removed", result.sources_removed)):
        for x in sources:
            click.echo(f"{title}: {x['id']}: {x['citation']}")
    for frame, title in ((result.added, "values added"), (result.removed, "values removed"),
                         (result.changes_frame(), "values changed")):
        if not frame.empty:
            emit(frame, "table", title=title)


@click.command("export")
@click.option("--format", "fmt", type=click.Choice(["csv", "json"]), default="csv", show_default=True,
              help="File format of the tables.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default="bodyplan-export", show_default=True,
              help="Folder to write the tables and datapackage.json into.")
@force_option
@store_option
def export_cmd(fmt, out_dir, force, store_path):
    """The whole store as tidy files with a Frictionless data package descriptor (datapackage.json)."""
    from ..api import locate_store, open_store
    from ..api.export import export_store

    store_file = locate_store(store_path)
    # a folder holding other files (curated vocabularies, say) is refused: export would overwrite them
    guard_out_dir(out_dir, marker="datapackage.json", force=force)
    if (Path(out_dir) / store_file.name).exists() and (Path(out_dir) / store_file.name).samefile(store_file):
        raise OutputError(f"{out_dir} holds the store this command reads; export to another folder")
    store = open_store(store_file)
    descriptor = export_store(store, out_dir, fmt)
    click.echo(f"wrote {descriptor} and {len(list(Path(out_dir).glob('*.' + fmt)))} {fmt} table(s) to {out_dir}")
