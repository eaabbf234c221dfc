"""check, build and info: the curated files and the store built from them."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from ..output import emit, force_option, format_option, guard_out, store_option


def data_dir_or_bundled(data_dir) -> Path:
    if data_dir:
        return Path(data_dir)
    from ..api.locate import bundled_data_dir

    return bundled_data_dir()


def curated_inputs(root: Path) -> list[Path]:
    """The parts of a curated tree a build reads (a store must never be written over them)."""
    return [root / "vocab", root / "values", root / "sources.bib", root / "bib_parts", root / "layouts"]


def _explain(ctx, _param, code):
    if code is None or ctx.resilient_parsing:
        return
    from ..ingest.findings import explain

    click.echo(explain(code))
    ctx.exit(0)


@click.command("check")
@click.argument("paths", nargs=-1, type=click.Path())
@click.option("--strict", is_flag=True, help="Treat warnings as errors (exit 1).")
@click.option("--explain", metavar="CODE", callback=_explain, expose_value=False, is_eager=True,
              help="Print what a finding code (the [R104] at the end of a line) means, and exit.")
def check_cmd(paths, strict):
    """Validate curated files (a data folder, the bundled one by default, or named values files); exit 0
    clean or with warnings check_baseline.csv accepts, 1 errors, 2 new warnings."""
    from pathlib import Path

    from ..ingest import check_files
    from ..ingest.baseline import split_accepted

    if len(paths) <= 1 and (not paths or Path(paths[0]).is_dir()):
        from ..ingest import check

        root = data_dir_or_bundled(paths[0] if paths else None)
        findings, tree, frame = check(root)
        findings, accepted = split_accepted(findings, frame, root)
        where = f"{root}: {len(frame)} value rows in {len(tree.file_hashes)} files"
    else:
        result = check_files(paths)
        findings, accepted = result.findings, result.accepted
        where = f"{result.root}: {result.rows} value rows in {len(paths)} named file(s)"
        for file, row_id, code in result.stale:
            click.echo(f"{file}: {row_id}: check_baseline.csv accepts {code}, which no longer occurs; "
                       "remove that line", err=True)
    for finding in findings.sorted():
        click.echo(f"{finding} [{finding.code}]" if finding.code else str(finding))
    errors, warnings = len(findings.errors), len(findings.warnings)
    click.echo(f"{where}: {errors} error(s), {warnings} warning(s)"
               + (f", {len(accepted)} accepted in check_baseline.csv" if accepted else ""), err=True)
    sys.exit(1 if errors or (strict and warnings) else 2 if warnings else 0)


@click.command("build")
@click.argument("data_dir", required=False, type=click.Path(file_okay=False))
@click.option("--out", "out", type=click.Path(dir_okay=False), default="bodyplan.sqlite", show_default=True,
              help="Where to write the store.")
@click.option("--warnings", "warnings", is_flag=True,
              help="Also print plausibility warnings (as bodyplan check does); slower on large trees.")
@force_option
def build_cmd(data_dir, out, warnings, force):
    """Validate, then build the store atomically (a failed build leaves OUT untouched)."""
    from ..ingest import CuratedDataError, build

    root = data_dir_or_bundled(data_dir)
    guard_out(out, kind="sqlite", inputs=curated_inputs(root), force=force)
    try:
        result = build(root, out, plausibility=warnings)
    except CuratedDataError as exc:
        for finding in exc.findings.sorted():
            click.echo(f"{finding} [{finding.code}]" if finding.code else str(finding), err=True)
        click.echo(f"error: {len(exc.findings.errors)} error(s); {out} left unchanged", err=True)
        sys.exit(1)
    for finding in result.warnings:
        click.echo(f"{finding} [{finding.code}]" if finding.code else str(finding), err=True)
    c = result.counts
    click.echo(f"built {result.path}: {c['curated_values']} values, {c['species']} species, "
               f"{c['sources']} sources; content hash {result.content_hash[:16]}")
    if not warnings:
        click.echo("plausibility warnings: bodyplan check (or build --warnings)", err=True)


@click.command("info")
@format_option()
@store_option
def info_cmd(fmt, store_path):
    """What the store holds: counts, sources, content hash."""
    from ..api import open_store

    emit(open_store(store_path).info(), fmt, title="bodyplan store")
