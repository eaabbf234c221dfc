"""serve and site: the read-only site over the store (datasette, immutable)."""

from __future__ import annotations

import click

from ..output import store_option


@click.command("serve")
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Interface to listen on; the default keeps the site on this machine.")
@click.option("--port", default=8001, show_default=True, type=click.IntRange(0, 65535), help="Port to listen on.")
@click.option("--access-log/--no-access-log", default=False, show_default=True,
              help="Log every request (off by default so the log shows only problems).")
@click.option("--allow-sql", is_flag=True, default=False,
              help="Let visitors run their own read-only SQL (for local use): functions that make huge values "
                   "and writing pragmas are refused, results are capped, and queries run a few at a time.")
@store_option
def serve_cmd(host, port, access_log, allow_sql, store_path):
    """Serve the store read-only in the browser: a page per species, parameter set and value; tables with
    provenance, facets and named queries. The modeller pages are rendered in the background at start."""
    import asyncio

    import uvicorn

    from ..api import locate_store
    from ..site.app import make_datasette

    ds = make_datasette(locate_store(store_path), allow_sql=allow_sql, pages="background")
    asyncio.run(ds.invoke_startup())
    sql = "arbitrary SQL allowed" if allow_sql else "arbitrary SQL off"
    click.echo(f"serving {ds.get_database('bodyplan').path} read-only ({sql}) at http://{host}:{port}/", err=True)
    # warnings and errors only: a request log line per page (and datasette's traceback per 404, which the
    # plugin switches off) would bury real problems
    uvicorn.run(ds.app(), host=host, port=port, log_level="warning", access_log=access_log, lifespan="on",
                workers=1)


@click.command("site")
@click.option("--out", "out", required=True, type=click.Path(file_okay=False),
              help="Folder to write; `datasette OUT` then serves it as is.")
@store_option
def site_cmd(out, store_path):
    """Write a self-contained site folder: store, metadata.json, inspect-data.json, templates, plugin, and the
    modeller pages (species, parameter sets with downloads, values, coverage) rendered under pages/."""
    from ..api import locate_store
    from ..site.app import write_site

    folder = write_site(out, locate_store(store_path))
    click.echo(f"wrote {folder}; serve it with: datasette {folder}")
