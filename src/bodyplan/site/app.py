"""Build the datasette app over a store, and write a self-contained site folder."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from importlib.resources import files
from pathlib import Path

from .metadata import DATABASE, build_metadata

# Arbitrary SQL stays on, time-limited: the store is immutable and opened read-only, so SQL can only
# read, and researchers need joins the named queries do not cover; the limit bounds the CPU a query
# may take. Facet suggestions are off: they cost a query per column on every table page. Pages hold
# 50 rows: rendering the 33 columns of a value row dominates the time of a table page.
SETTINGS = {
    "default_page_size": 50,
    "sql_time_limit_ms": 1000,
    "facet_time_limit_ms": 300,
    "max_returned_rows": 1000,
    "suggest_facets": False,
    "allow_download": True,  # the whole store is open data; the download is the immutable file
    "default_cache_ttl": 3600,
}


def templates_dir() -> Path:
    return Path(str(files("bodyplan.site") / "templates"))


def plugin_file() -> Path:
    return Path(str(files("bodyplan.site") / "plugin.py"))


def _register_plugin() -> None:
    from datasette.plugins import pm

    from . import plugin

    if not pm.is_registered(plugin):
        pm.register(plugin, name="bodyplan_site")


def make_datasette(store: str | Path):
    """A Datasette over ``store`` (immutable) with generated metadata, the plugin and the templates."""
    from datasette.app import Datasette
    from datasette.database import Database

    _register_plugin()
    store = Path(store).resolve()
    ds = Datasette(memory=False, metadata=build_metadata(store), settings=SETTINGS,
                   template_dir=str(templates_dir()))
    ds.remove_database("_memory")  # added when no file is given; the store is added under a fixed name
    ds.add_database(Database(ds, path=str(store), is_mutable=False), name=DATABASE)
    return ds


def write_site(out: str | Path, store: str | Path) -> Path:
    """A configuration folder `datasette OUT` serves as is: store, metadata, inspect data, templates, plugin."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    db_file = out / f"{DATABASE}.sqlite"
    shutil.copyfile(store, db_file)
    (out / "metadata.json").write_text(json.dumps(build_metadata(db_file), indent=2, ensure_ascii=False) + "\n",
                                       encoding="utf-8")
    (out / "settings.json").write_text(json.dumps(SETTINGS, indent=2) + "\n", encoding="utf-8")
    shutil.copytree(templates_dir(), out / "templates", dirs_exist_ok=True,
                    ignore=shutil.ignore_patterns("__pycache__"))
    (out / "plugins").mkdir(exist_ok=True)
    shutil.copyfile(plugin_file(), out / "plugins" / "bodyplan_site.py")
    # inspect-data.json makes datasette open the file immutable and skip counting rows at start-up
    inspected = subprocess.run([sys.executable, "-m", "datasette", "inspect", db_file.name],
                               check=True, capture_output=True, text=True, cwd=out).stdout
    (out / "inspect-data.json").write_text(inspected, encoding="utf-8")
    return out
