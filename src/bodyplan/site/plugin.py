"""The site's datasette plugin: values shown with uncertainty, unit and source; source pages with citation;
every write method refused; repeated pages served from memory.

It imports only datasette and the standard library, so `bodyplan site` can copy this file into a
configuration folder that plain `datasette DIR` serves.
"""

from __future__ import annotations

import importlib
from collections import OrderedDict

from datasette import Response, hookimpl
from datasette.utils import tilde_decode, tilde_encode
from markupsafe import Markup, escape

PLUGIN = "bodyplan-site"
SPREADS = ("sd", "se")  # shown as value ± spread
LINKED = {"source_id": "sources", "species_id": "species", "life_stage_id": "life_stages",  # curated_values
          "compartment_id": "compartments", "quantity_id": "quantities"}
QUERY_LINKS = {"value_id": "curated_values", "source": "sources", "species": "species",  # named queries
               "life_stage": "life_stages", "compartment": "compartments", "quantity": "quantities"}
READ_METHODS = ("GET", "HEAD", "OPTIONS")


def _get(row, key):
    try:
        return row[key]
    except (IndexError, KeyError):
        return None


def _num(x) -> str:
    return format(float(x), ".6g")


def _unit(unit) -> str:
    return "" if unit in (None, "", "1") else f" {unit}"


def describe_value(row) -> str | None:
    """'3.29 ± 0.41 % (sd, n = 12)' from a row holding value, unit, uncertainty, spread, low, high, n."""
    value = _get(row, "value")
    if value is None:
        reason = _get(row, "missing_reason")
        return f"no value: {reason}" if reason else None
    unit = _unit(_get(row, "unit"))
    kind, spread, low, high, n = (_get(row, k) for k in ("uncertainty", "spread", "low", "high", "n"))
    notes = []
    if kind in SPREADS and spread is not None:
        text = f"{_num(value)} ± {_num(spread)}{unit}"
        notes.append(kind)
    else:
        text = f"{_num(value)}{unit}"
        if kind == "cv" and spread is not None:
            notes.append(f"cv {_num(spread)} %")
        elif kind in ("ci95", "range") and low is not None and high is not None:
            label = "95% CI" if kind == "ci95" else "range"
            notes.append(f"{label} {_num(low)} to {_num(high)}{unit}")
    if n is not None:
        notes.append(f"n = {n}")
    return text + (f" ({', '.join(notes)})" if notes else "")


def describe_canonical(row) -> str | None:
    value = _get(row, "value_canonical")
    if value is None:
        return None
    sd = _get(row, "sd_canonical")
    unit = _unit(_get(row, "unit_canonical"))
    return f"{_num(value)} ± {_num(sd)}{unit} (sd)" if sd is not None else f"{_num(value)}{unit}"


def _verified(flag) -> str:
    return "✓ verified against the source text" if flag else "not verified against the source text"


def _link(datasette, database, table, key, text=None) -> Markup:
    href = f"{datasette.urls.table(database, table)}/{tilde_encode(str(key))}"
    return Markup(f'<a href="{escape(href)}">{escape(text if text is not None else key)}</a>')


@hookimpl
def render_cell(row, value, column, table, database, datasette):
    keys = row.keys() if hasattr(row, "keys") else []
    if column == "value" and "uncertainty" in keys:  # curated_values and the named queries
        return describe_value(row)
    if column == "value_canonical" and "unit_canonical" in keys:
        return describe_canonical(row)
    if column == "verified" and "basis" in keys and value in (0, 1):
        return _verified(value)
    if column in ("unit", "unit_canonical") and "uncertainty" in keys and value:
        words = (datasette.plugin_config(PLUGIN) or {}).get("unit_words", {}).get(value)
        return f"{value} ({words})" if words and words != value else None
    if column == "doi" and table == "sources" and value:
        return Markup(f'<a href="https://doi.org/{escape(value)}">doi:{escape(value)}</a>')
    if table == "curated_values" and column in LINKED and isinstance(value, str):  # the row page
        return _link(datasette, database, LINKED[column], value)
    if table is None and column in QUERY_LINKS and value is not None:
        return _link(datasette, database, QUERY_LINKS[column], value)
    return None


@hookimpl
def startup(datasette):
    # datasette's error handler prints a rich traceback with every local variable for each 404 and each
    # refused or slow query; without rich it prints tracebacks only for real faults (status 500).
    importlib.import_module("datasette.handle_exception").rich = None


class PageCache:
    """Finished 200 responses by URL, least recently used first out. The database is immutable, so a
    URL's bytes cannot change while this process runs; responses that set a cookie are never kept."""

    def __init__(self, budget_bytes: int):
        self.budget, self.size, self.entries = budget_bytes, 0, OrderedDict()

    def get(self, key):
        entry = self.entries.get(key)
        if entry is not None:
            self.entries.move_to_end(key)
        return entry

    def put(self, key, start: dict, body: bytes) -> None:
        if len(body) > self.budget // 8 or key in self.entries:
            return
        self.entries[key] = (start, body)
        self.size += len(body)
        while self.size > self.budget:
            self.size -= len(self.entries.popitem(last=False)[1][1])


@hookimpl
def asgi_wrapper(datasette):
    """Refuse every method that could write, before any view sees it; serve repeated GETs from memory."""
    budget = int((datasette.plugin_config(PLUGIN) or {}).get("page_cache_mb", 64)) * 2**20
    cache = PageCache(budget) if budget else None

    def wrap(app):
        async def read_only(scope, receive, send):
            if scope["type"] != "http":
                return await app(scope, receive, send)
            if scope["method"] not in READ_METHODS:
                response = Response.text("This site is read-only.", status=405, headers={"Allow": "GET, HEAD"})
                return await response.asgi_send(send)
            if cache is None or scope["method"] != "GET":
                return await app(scope, receive, send)
            host = next((v for k, v in scope["headers"] if k == b"host"), b"")  # next_url links are absolute
            key = (host, scope.get("root_path", ""), scope["path"], scope["query_string"])
            hit = cache.get(key)
            if hit is not None:
                await send(hit[0])
                return await send({"type": "http.response.body", "body": hit[1]})
            start, chunks, size = {}, [], 0

            async def keep(message):
                nonlocal size
                if message["type"] == "http.response.start":
                    start.update(message)
                elif size <= budget // 8:
                    chunks.append(message.get("body", b""))
                    size += len(chunks[-1])
                    if not message.get("more_body") and start.get("status") == 200 and not any(
                            k.lower() == b"set-cookie" for k, _ in start.get("headers", [])):
                        cache.put(key, dict(start), b"".join(chunks))
                await send(message)
            await app(scope, receive, keep)
        return read_only
    return wrap


@hookimpl
def extra_template_vars(template, database, table, view_name, request, datasette):
    config = datasette.plugin_config(PLUGIN) or {}
    extra = {"bodyplan_caution": config.get("caution", "")}
    if view_name == "page" and request is not None and request.path.rstrip("/") == "/coverage":
        return _coverage_vars(datasette, request, extra)
    if view_name != "row" or table not in ("sources", "curated_values") or request is None:
        return extra
    key = tilde_decode(request.url_vars.get("pks", ""))

    async def value_page():
        db = datasette.get_database(database)
        row = (await db.execute(
            "SELECT v.*, s.citation FROM curated_values v JOIN sources s ON s.id = v.source_id WHERE v.id = ?",
            [key])).first()
        if row is None:
            return extra
        value = {k: row[k] for k in ("species_id", "life_stage_id", "sex", "quantity_id", "compartment_id",
                                      "basis", "citation", "locator")}
        value = {k.removesuffix("_id"): v for k, v in value.items()}
        value.update(shown=describe_value(row) or "", verified=_verified(row["verified"]),
                     source_href=f"{datasette.urls.table(database, 'sources')}/{tilde_encode(row['source_id'])}")
        return dict(extra, bodyplan_value=value)

    async def source_page():
        db = datasette.get_database(database)
        source = (await db.execute("SELECT id, citation, doi FROM sources WHERE id = ?", [key])).first()
        rows = (await db.execute(
            "SELECT id, species_id, life_stage_id, sex, compartment_id, quantity_id, value, unit, "
            "uncertainty, spread, low, high, n, missing_reason, basis, verified, locator "
            "FROM curated_values WHERE source_id = ? ORDER BY file, line", [key])).rows
        values = [{"link": _link(datasette, database, "curated_values", r["id"]),
                   "species": r["species_id"], "life_stage": r["life_stage_id"], "sex": r["sex"],
                   "compartment": r["compartment_id"], "quantity": r["quantity_id"],
                   "shown": describe_value(r) or "", "basis": r["basis"],
                   "verified": "✓" if r["verified"] else "no", "locator": r["locator"]} for r in rows]
        return dict(extra, bodyplan_source={k: source[k] for k in source.keys()} if source else None,
                    bodyplan_source_values=values)

    return source_page if table == "sources" else value_page


def _coverage_sql() -> str:
    """Rows per species, compartment and parameter, the parameter named by the model declaration."""
    from bodyplan.schema.model import PARAMETERS, routes  # absolute: the plugin file is also copied out

    quoted = lambda qs: ", ".join(f"'{q}'" for q in qs)  # noqa: E731  (ids from the declaration, not input)
    volume = quoted(dict.fromkeys((*routes("volume"), *routes("volume", "blood"))))
    return f"""
SELECT species_id, compartment_id,
       CASE WHEN quantity_id IN ({volume}) THEN 'volume'
            WHEN quantity_id IN ({quoted(PARAMETERS["blood_flow"].routes)}) THEN 'flow'
            ELSE quantity_id END AS param,
       count(*) AS n, sum(verified) AS n_verified, count(DISTINCT source_id) AS n_sources
FROM curated_values WHERE life_stage_id = ? AND value IS NOT NULL GROUP BY 1, 2, 3
"""


def _coverage_vars(datasette, request, extra):
    """The coverage page's matrix: rows per species × parameter for one life stage."""

    async def coverage():
        db = datasette.get_database("bodyplan")
        stage = request.args.get("stage", "adult")
        cells = {f"{r['species_id']}|{r['compartment_id']}|{r['param']}": dict(r)
                 for r in (await db.execute(_coverage_sql(), [stage])).rows}
        species = [dict(r) for r in (await db.execute("SELECT id, common_name FROM species ORDER BY id")).rows]
        stages = [r["id"] for r in (await db.execute("SELECT id FROM life_stages ORDER BY id")).rows]
        return dict(extra, coverage_cells=cells, coverage_species=species, coverage_stages=stages,
                    coverage_stage=stage, values_url=datasette.urls.table("bodyplan", "curated_values"))

    return coverage
