"""Build the datasette app over a store, render its modeller pages, and write a self-contained site folder."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
import threading
from importlib.resources import files
from pathlib import Path

from .metadata import DATABASE, build_metadata

# Arbitrary SQL is off (datasette's default_allow_sql): the tables, named queries and modeller pages
# answer every question a modeller asks, and a SQL box open to anyone lets one visitor starve the site.
# `serve --allow-sql` turns it on for local use, behind the plugin's authorizer, caps and pool.
# Facet suggestions are off: they cost a query per column on every table page. Pages hold 30 rows: each
# row's cells are rendered through the plugin hooks, the larger part of a table page's cost.
# num_sql_threads 0: the page queries of this small immutable store take well under a millisecond, less
# than handing each to a thread; with --allow-sql a query may run up to the time limit, so it runs on
# threads (after its trial on the plugin's own pool) and never on the loop that serves the pages.
SETTINGS = {
    "default_page_size": 30,
    "sql_time_limit_ms": 1000,
    "facet_time_limit_ms": 300,
    "max_returned_rows": 1000,
    "suggest_facets": False,
    "default_facet_size": 10,  # each facet value shown costs a toggle link to build; the rest are one click away
    "allow_download": True,  # the whole store is open data; the download is the immutable file
    "default_cache_ttl": 3600,
    "default_allow_sql": False,
    "num_sql_threads": 0,
}


def settings(allow_sql: bool = False) -> dict:
    return dict(SETTINGS, default_allow_sql=allow_sql, num_sql_threads=3 if allow_sql else 0)


def templates_dir() -> Path:
    return Path(str(files("bodyplan.site") / "templates"))


def plugin_file() -> Path:
    return Path(str(files("bodyplan.site") / "plugin.py"))


def _register_plugin() -> None:
    from datasette.plugins import pm

    from . import plugin

    if not pm.is_registered(plugin):
        pm.register(plugin, name="bodyplan_site")


def render_store_pages(store: str | Path) -> dict:
    from ..api import open_store
    from .render import render_pages

    return render_pages(open_store(store))


def make_datasette(store: str | Path, *, allow_sql: bool = False, pages: str = "now", limits: dict | None = None):
    """A Datasette over ``store`` (immutable) with generated metadata, the plugin and the templates.

    ``pages``: "now" renders the modeller pages before returning, "background" in a thread (they
    answer 503 until ready), "none" leaves them out. ``limits`` overrides the plugin's bounds on arbitrary
    SQL (sql_workers, sql_queue, sql_max_mb).
    """
    from datasette.app import Datasette
    from datasette.database import Database

    from .plugin import PLUGIN, Pages

    _register_plugin()
    store = Path(store).resolve()
    metadata = build_metadata(store, allow_sql=allow_sql)
    metadata["plugins"][PLUGIN].update(limits or {})
    ds = Datasette(memory=False, metadata=metadata, settings=settings(allow_sql),
                   template_dir=str(templates_dir()))
    ds.remove_database("_memory")  # added when no file is given; the store is added under a fixed name
    ds.add_database(Database(ds, path=str(store), is_mutable=False), name=DATABASE)
    if pages == "now":
        ds.bodyplan_pages = Pages(render_store_pages(store))
    elif pages == "background":
        ds.bodyplan_pages = Pages()

        def render():
            try:
                ds.bodyplan_pages.fill(render_store_pages(store))
            except Exception as exc:  # the tables stay up; the pages say what went wrong
                ds.bodyplan_pages.error = exc
                ds.bodyplan_pages.fill({})
                print(f"bodyplan: rendering the modeller pages failed: {exc}", file=sys.stderr)
        threading.Thread(target=render, name="bodyplan-render", daemon=True).start()
    return ds


def write_site(out: str | Path, store: str | Path) -> Path:
    """A configuration folder `datasette OUT` serves as is: store, metadata, inspect data, templates, plugin,
    and the modeller pages rendered under OUT/pages."""
    from .render import write_pages

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    db_file = out / f"{DATABASE}.sqlite"
    shutil.copyfile(store, db_file)
    (out / "metadata.json").write_text(json.dumps(build_metadata(db_file), indent=2, ensure_ascii=False) + "\n",
                                       encoding="utf-8")
    (out / "settings.json").write_text(json.dumps(settings(), indent=2) + "\n", encoding="utf-8")
    shutil.copytree(templates_dir(), out / "templates", dirs_exist_ok=True,
                    ignore=shutil.ignore_patterns("__pycache__"))
    (out / "plugins").mkdir(exist_ok=True)
    shutil.copyfile(plugin_file(), out / "plugins" / "bodyplan_site.py")
    if (out / "pages").exists():
        shutil.rmtree(out / "pages")
    write_pages(render_store_pages(db_file), out / "pages")
    # inspect-data.json makes datasette open the file immutable and skip counting rows at start-up
    inspected = subprocess.run([sys.executable, "-m", "datasette", "inspect", db_file.name],
                               check=True, capture_output=True, text=True, cwd=out).stdout
    (out / "inspect-data.json").write_text(inspected, encoding="utf-8")
    return out
