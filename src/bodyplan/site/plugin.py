"""The site's datasette plugin: values shown with uncertainty, unit and source; source pages with citation;
every write method refused; repeated pages served from memory.

It imports only datasette and the standard library, so `bodyplan site` can copy this file into a
configuration folder that plain `datasette DIR` serves.
"""

from __future__ import annotations

import asyncio
import importlib
import json
import sqlite3
import threading
import time
from collections import OrderedDict
from pathlib import Path
from urllib.parse import parse_qsl

from datasette import Response, hookimpl
from datasette.utils import tilde_decode, tilde_encode
from markupsafe import Markup, escape

PLUGIN = "bodyplan-site"
DATABASE = "bodyplan"  # the store is always published under this name
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
    # called for every cell of every page: decide on the column first, touch the row only when needed
    if column in CELL_COLUMNS:
        keys = row.keys() if hasattr(row, "keys") else ()
        if column == "value" and table == "curated_values" and "id" in keys:  # the table page: made at start
            return _described(datasette).get(row["id"])
        if column == "value" and "uncertainty" in keys:  # the named queries
            return describe_value(row)
        if column == "value_canonical" and "unit_canonical" in keys:
            return describe_canonical(row)
        if column == "verified" and "basis" in keys and value in (0, 1):
            return _verified(value)
        if column in ("unit", "unit_canonical") and "uncertainty" in keys and value:
            words = _config(datasette).get("unit_words", {}).get(value)
            return f"{value} ({words})" if words and words != value else None
        if column == "doi" and table == "sources" and value:
            return Markup(f'<a href="https://doi.org/{escape(value)}">doi:{escape(value)}</a>')
    if table == "curated_values" and column in LINKED and isinstance(value, str):  # the row page
        return _link(datasette, database, LINKED[column], value)
    if table is None and column in QUERY_LINKS and value is not None:
        return _link(datasette, database, QUERY_LINKS[column], value)
    return None


CELL_COLUMNS = {"value", "value_canonical", "verified", "unit", "unit_canonical", "doi"}


def _described(datasette) -> dict:
    """Every curated value's text by row id, made once (the store is immutable)."""
    described = getattr(datasette, "bodyplan_described", None)
    if described is None:
        conn = sqlite3.connect(f"file:{datasette.get_database(DATABASE).path}?mode=ro", uri=True)
        conn.row_factory = sqlite3.Row
        try:
            described = {r["id"]: describe_value(r) for r in conn.execute("SELECT * FROM curated_values")}
        finally:
            conn.close()
        datasette.bodyplan_described = described
    return described


def _config(datasette) -> dict:
    """The plugin's configuration, read once: datasette resolves secrets through all of it on every read."""
    config = getattr(datasette, "bodyplan_config", None)
    if config is None:
        config = datasette.bodyplan_config = datasette.plugin_config(PLUGIN) or {}
    return config


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



# ---- modeller pages: rendered once per store, served from memory ------------------------------------

CONTENT_TYPES = {"html": "text/html; charset=utf-8", "json": "application/json; charset=utf-8",
                 "csv": "text/csv; charset=utf-8", "xml": "application/xml; charset=utf-8"}
PAGE_PREFIXES = ("/species", "/sets/", "/values/", "/coverage")


class Pages:
    """URL path → (content type, bytes); empty until rendered (``ready``)."""

    def __init__(self, files: dict | None = None):
        self.files, self.ready, self.error = dict(files or {}), threading.Event(), None
        if files is not None:
            self.ready.set()

    def fill(self, files: dict) -> None:
        self.files = dict(files)
        self.ready.set()

    @classmethod
    def from_folder(cls, folder: Path) -> "Pages":
        """Files written by `bodyplan site --out`: an .html file serves at its path without the suffix."""
        files = {}
        for path in sorted(p for p in folder.rglob("*") if p.is_file()):
            rel = "/" + path.relative_to(folder).as_posix()
            kind = path.suffix.lstrip(".")
            files[rel.removesuffix(".html") if kind == "html" else rel] = (
                CONTENT_TYPES.get(kind, "application/octet-stream"), path.read_bytes())
        return cls(files)


def _pages(datasette) -> Pages | None:
    pages = getattr(datasette, "bodyplan_pages", None)
    if pages is None:
        folder = _config(datasette).get("pages_dir")
        if folder and datasette.config_dir is not None:
            pages = Pages.from_folder(Path(datasette.config_dir) / folder)
            datasette.bodyplan_pages = pages
    return pages


# ---- abuse: debug endpoints, unknown columns, arbitrary SQL ------------------------------------------

DEBUG_PATHS = ("/-/threads", "/-/actor", "/-/messages", "/-/permissions", "/-/allow-debug", "/-/plugins",
               "/-/databases", "/-/patterns", "/-/auth-token", "/-/logout", "/-/create-token")
# the filter operators of datasette (datasette.filters.Filters); a test keeps the two the same
FILTER_OPS = {"exact", "not", "contains", "endswith", "startswith", "gt", "gte", "lt", "lte", "like", "notlike",
              "glob", "in", "notin", "arraycontains", "arraynotcontains", "date", "isnull", "notnull", "isblank",
              "notblank"}
# The values table's HTML page selects only the columns it shows (the value text, with unit and spread, comes
# from the descriptions made at start-up): datasette renders every selected cell through the plugin hooks,
# and the cells are most of the page's cost.
# (Ask for others with ?_col=NAME; JSON and CSV keep every column.)
PAGE_COLUMNS = {"curated_values": ("value", "species_id", "life_stage_id", "sex", "compartment_id", "quantity_id",
                                   "source_id", "locator", "verified", "basis")}
COLUMN_ARGS = ("_sort", "_sort_desc", "_facet", "_facet_array", "_facet_date", "_col", "_nocol", "_label")
# zeroblob/randomblob make huge values, fts3_tokenizer hands out native pointers, load_extension loads code;
# printf/format loop in C over a width the time limit cannot interrupt (%.*c with 2e9 runs for seconds)
DENIED_FUNCTIONS = {"zeroblob", "randomblob", "fts3_tokenizer", "load_extension", "readfile", "writefile", "edit",
                    "printf", "format"}
# pragmas that only read; those that take an argument take a table or index name, never a new value
READ_PRAGMAS = {"table_info", "table_xinfo", "table_list", "index_list", "index_info", "index_xinfo",
                "foreign_key_list", "database_list", "schema_version", "user_version", "application_id",
                "collation_list", "function_list", "module_list", "pragma_list", "encoding", "page_size",
                "page_count", "freelist_count", "data_version", "compile_options", "foreign_keys", "query_only"}
NAMED_ARG_PRAGMAS = {"table_info", "table_xinfo", "table_list", "index_list", "index_info", "index_xinfo",
                     "foreign_key_list"}
LIMITS = {  # per connection: the largest string or blob, SQL text and result width SQLite will make
    "SQLITE_LIMIT_LENGTH": 1_000_000, "SQLITE_LIMIT_SQL_LENGTH": 100_000, "SQLITE_LIMIT_COLUMN": 100,
}


def authorizer(action, arg1, arg2, db_name, source):
    """Deny functions that make huge or native values and every pragma that could write or load."""
    if action == getattr(sqlite3, "SQLITE_FUNCTION", 31):
        return sqlite3.SQLITE_DENY if (arg2 or "").lower() in DENIED_FUNCTIONS else sqlite3.SQLITE_OK
    if action == sqlite3.SQLITE_PRAGMA:
        name = (arg1 or "").lower()
        ok = name in READ_PRAGMAS and (arg2 is None or name in NAMED_ARG_PRAGMAS)
        return sqlite3.SQLITE_OK if ok else sqlite3.SQLITE_DENY
    if action in (sqlite3.SQLITE_ATTACH, sqlite3.SQLITE_DETACH):
        return sqlite3.SQLITE_DENY
    return sqlite3.SQLITE_OK


def guard_connection(conn) -> None:
    conn.set_authorizer(authorizer)
    for name, value in LIMITS.items():
        conn.setlimit(getattr(sqlite3, name), value)


@hookimpl
def prepare_connection(conn, database, datasette):
    guard_connection(conn)


def _columns(datasette) -> dict[str, set[str]]:
    """Columns of every table of the published database (read once: the file is immutable)."""
    cached = getattr(datasette, "bodyplan_columns", None)
    if cached is None:
        db = datasette.get_database(DATABASE)
        conn = sqlite3.connect(f"file:{db.path}?mode=ro", uri=True)
        try:
            tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'view')")]
            cached = {t: {r[1] for r in conn.execute("SELECT * FROM pragma_table_info(?)", (t,))} | {"rowid"}
                      for t in tables}
        finally:
            conn.close()
        datasette.bodyplan_columns = cached
    return cached


def unknown_column(columns: set[str], args: list[tuple[str, str]], tables: dict | None = None) -> str | None:
    """A message naming the first sort, facet or filter argument that names no column of the table."""
    for key, value in args:
        if key == "_through":  # {"table": ..., "column": ..., "value": ...}: a column of another table
            try:
                through = json.loads(value)
                ok = set(through) == {"table", "column", "value"} and through["column"] in (tables or {}).get(
                    through["table"], ())
            except (ValueError, TypeError):
                ok = False
            if not ok:
                return ('_through: expected JSON {"table": T, "column": C, "value": V} naming a table and one of '
                        "its columns")
        if key in COLUMN_ARGS and value and value not in columns:
            return f"{key}={value}: the table has no column {value!r}; columns: {', '.join(sorted(columns - {'rowid'}))}"
        if key.startswith("_"):
            continue
        column, _, op = key.rpartition("__") if "__" in key else (key, "", "")
        if not op or not column:  # "a__" or "__x": no filter operator, so the whole key names a column
            column, op = key, ""
        if column not in columns:
            return f"{key!r}: the table has no column {column!r}; columns: {', '.join(sorted(columns - {'rowid'}))}"
        if op and op not in FILTER_OPS:
            return f"{key!r}: unknown filter {op!r}; use one of: {', '.join(sorted(FILTER_OPS))}"
    return None


class SqlGate:
    """Arbitrary SQL (with --allow-sql only): a few queries at a time, each first run on a pool of its own
    with the time limit, the row cap and a byte cap, so slow or huge queries never reach the threads that
    render pages. Queries past the queue bound are turned away at once."""

    def __init__(self, path: str, workers: int, queue: int, time_limit_ms: int, max_rows: int, max_bytes: int):
        from concurrent.futures import ThreadPoolExecutor

        self.path, self.time_limit, self.max_rows, self.max_bytes = path, time_limit_ms / 1000, max_rows, max_bytes
        self.pool = ThreadPoolExecutor(workers, thread_name_prefix="bodyplan-sql")
        self.slots, self.waiting, self.queue = asyncio.Semaphore(workers), 0, queue
        self.local = threading.local()

    def _conn(self):
        conn = getattr(self.local, "conn", None)
        if conn is None:
            conn = sqlite3.connect(f"file:{self.path}?immutable=1", uri=True, check_same_thread=False)
            guard_connection(conn)
            self.local.conn = conn
        return conn

    def trial(self, sql: str, params: dict) -> str | None:
        """Run the query once within every bound; a message if it breaks one, else None."""
        conn = self._conn()
        deadline = time.monotonic() + self.time_limit
        conn.set_progress_handler(lambda: time.monotonic() > deadline, 10_000)
        try:
            cursor = conn.execute(sql, params)
            size = 0
            for _ in range(self.max_rows + 1):
                row = cursor.fetchone()
                if row is None:
                    break
                size += sum(len(v) if isinstance(v, (str, bytes)) else 8 for v in row)
                if size > self.max_bytes:
                    return (f"the result is larger than {self.max_bytes // 2**20} MB; select fewer or shorter "
                            "columns, or add LIMIT")
            return None
        except sqlite3.OperationalError as exc:
            if "interrupted" in str(exc):
                return f"the query took longer than {self.time_limit * 1000:.0f} ms and was stopped"
            return f"refused: {exc}"
        except sqlite3.Error as exc:
            return f"refused: {exc}"
        finally:
            conn.set_progress_handler(None, 10_000)


def _sql_args(args: list[tuple[str, str]]) -> tuple[str | None, dict]:
    sql = next((v for k, v in args if k == "sql"), None)
    return sql, {k: v for k, v in args if not k.startswith("_") and k != "sql"}


async def _answer(send, status: int, text: str, headers: dict | None = None) -> None:
    await Response.text(text + "\n", status=status, headers=headers or {}).asgi_send(send)


@hookimpl
def startup(datasette):
    # datasette's error handler prints a rich traceback with every local variable for each 404 and each
    # refused or slow query; without rich it prints tracebacks only for real faults (status 500).
    importlib.import_module("datasette.handle_exception").rich = None
    _pages(datasette)
    _columns(datasette)
    _described(datasette)


@hookimpl
def asgi_wrapper(datasette):
    """Before any view: refuse writes and debug endpoints, answer bad column names with 400, serve the
    modeller pages, bound arbitrary SQL; then serve repeated GETs from memory."""
    config = _config(datasette)
    budget = int(config.get("page_cache_mb", 64)) * 2**20
    cache = PageCache(budget) if budget else None
    gate: list[SqlGate] = []

    def sql_gate() -> SqlGate:
        if not gate:
            gate.append(SqlGate(datasette.get_database(DATABASE).path, int(config.get("sql_workers", 2)),
                                int(config.get("sql_queue", 16)), datasette.setting("sql_time_limit_ms"),
                                datasette.setting("max_returned_rows"),
                                int(config.get("sql_max_mb", 8)) * 2**20))
        return gate[0]

    db_path = f"/{DATABASE}"

    def wrap(app):
        async def guarded(scope, receive, send):
            if scope["type"] != "http":
                return await app(scope, receive, send)
            if scope["method"] not in READ_METHODS:
                response = Response.text("This site is read-only.", status=405, headers={"Allow": "GET, HEAD"})
                return await response.asgi_send(send)
            path = scope["path"]
            if path.startswith(DEBUG_PATHS):
                return await _answer(send, 404, "Not available on this site.")
            args = parse_qsl(scope["query_string"].decode("utf-8", "replace"), keep_blank_values=True)
            if path.startswith(PAGE_PREFIXES):
                pages = _pages(datasette)
                if pages is not None:
                    return await _page(pages, path, args, send)
            parts = path.split("/")
            if len(parts) == 3 and parts[1] == DATABASE:  # /bodyplan/<table>[.<format>]
                tables = _columns(datasette)
                columns = tables.get(tilde_decode(parts[2].rsplit(".", 1)[0]))
                problem = unknown_column(columns, args, tables) if columns is not None else None
                if problem:
                    return await _answer(send, 400, problem)
                if parts[2] in PAGE_COLUMNS and not any(k in ("_col", "_nocol") for k, _ in args):
                    extra = "&".join(f"_col={c}" for c in PAGE_COLUMNS[parts[2]]).encode()
                    scope = dict(scope, query_string=b"&".join(q for q in (scope["query_string"], extra) if q))
            sql, params = _sql_args(args)
            if sql and path.split(".", 1)[0] == db_path:
                if not config.get("allow_sql"):
                    return await _answer(send, 403, "Arbitrary SQL is off on this site; use the tables, the named "
                                                     "queries or the modeller pages (bodyplan serve --allow-sql "
                                                     "turns it on for local use).")
                return await _gated_sql(sql_gate(), sql, params, app, scope, receive, send)
            return await _cached(cache, budget, app, scope, receive, send)
        return guarded
    return wrap


async def _page(pages: Pages, path: str, args, send):
    if path == "/coverage" and any(k == "stage" for k, _ in args):  # the old ?stage= form
        stage = next(v for k, v in args if k == "stage")
        return await Response.redirect(f"/coverage/own/{tilde_encode(stage)}").asgi_send(send)
    if not pages.ready.is_set():
        return await _answer(send, 503, "The modeller pages are being rendered; try again in a few seconds.",
                             {"Retry-After": "5"})
    if pages.error is not None:  # the tables still work; the server's log has the cause too
        return await _answer(send, 503, f"The modeller pages could not be rendered: {pages.error}")
    hit = pages.files.get(path.rstrip("/") or path)
    if hit is None:
        return await _answer(send, 404, f"No page {path}; start at /species or /coverage.")
    ctype, body = hit
    headers = [(b"content-type", ctype.encode()), (b"content-length", str(len(body)).encode()),
               (b"cache-control", b"max-age=3600")]
    await send({"type": "http.response.start", "status": 200, "headers": headers})
    await send({"type": "http.response.body", "body": body})


async def _gated_sql(gate: SqlGate, sql, params, app, scope, receive, send):
    if gate.waiting >= gate.queue:
        return await _answer(send, 503, "Too many SQL queries at once; try again shortly.", {"Retry-After": "2"})
    gate.waiting += 1
    try:
        await gate.slots.acquire()
    finally:
        gate.waiting -= 1
    try:
        problem = await asyncio.get_running_loop().run_in_executor(gate.pool, gate.trial, sql, params)
        if problem:
            return await _answer(send, 400, problem)
        return await app(scope, receive, send)
    finally:
        gate.slots.release()


async def _cached(cache, budget, app, scope, receive, send):
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


@hookimpl
def extra_template_vars(template, database, table, view_name, request, datasette):
    extra = {"bodyplan_caution": _config(datasette).get("caution", "")}
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
        state = [] if row["condition_id"] == "rest" else [f"condition {row['condition_id']}"]
        if row["temperature_c"] is not None:
            state.append(f"at {row['temperature_c']:g} °C")
        value.update(shown=describe_value(row) or "", verified=_verified(row["verified"]), id=row["id"],
                     state=", ".join(state),
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
