"""The read-only site, in-process through datasette's test client (no server, no browser)."""

from __future__ import annotations

import asyncio
import hashlib
import json
import re
import sqlite3
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import given
from hypothesis import strategies as st

from bodyplan import CAUTION
from bodyplan.site.app import SETTINGS, make_datasette, plugin_file, write_site
from bodyplan.site.metadata import FACETS, unit_in_words
from bodyplan.site.plugin import FILTER_OPS, describe_value, unknown_column
from bodyplan.site.queries import QUERIES

FIXTURE_TREE = Path(__file__).parent / "data" / "site"  # invented values, for when the bundled data fails
COLUMNS = {"id", "species_id", "value", "unit", "rowid"}  # a table's columns as the plugin reads them


def build_site_store(path: Path) -> Path:
    """The bundled curated files built into ``path``; the fixture tree while curation leaves them invalid."""
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import CuratedDataError, build

    try:
        build(bundled_data_dir(), path)
    except CuratedDataError:
        build(FIXTURE_TREE, path)
    return path


@pytest.fixture(scope="module")
def store(tmp_path_factory) -> Path:
    return build_site_store(tmp_path_factory.mktemp("site") / "store.sqlite")


@pytest.fixture(scope="module")
def site(store):
    """One app with the modeller pages rendered (they take seconds; every page test shares them)."""
    return make_datasette(store)


@pytest.fixture(scope="module")
def sample(store) -> dict:
    """Ids to ask for, read from whichever store was built (dog when it has values)."""
    conn = sqlite3.connect(store)
    one = lambda sql, *p: conn.execute(sql, p).fetchone()  # noqa: E731
    species = one("SELECT species_id FROM curated_values WHERE species_id = 'dog' AND value IS NOT NULL") or \
        one("SELECT species_id FROM curated_values GROUP BY species_id ORDER BY count(*) DESC")
    species = species[0]
    stage, compartment, quantity = one("SELECT life_stage_id, compartment_id, quantity_id FROM curated_values "
                                       "WHERE species_id = ? ORDER BY id", species)
    value_id, source = one("SELECT id, source_id FROM curated_values WHERE species_id = ? AND uncertainty "
                           "IN ('sd', 'se') AND value IS NOT NULL ORDER BY id", species) or \
        one("SELECT id, source_id FROM curated_values WHERE species_id = ? ORDER BY id", species)
    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
    return dict(species=species, life_stage=stage, compartment=compartment, quantity=quantity,
                value_id=value_id, source=source, tables=tables,
                source_count=one("SELECT count(*) FROM curated_values WHERE source_id = ?", source)[0],
                compartments=[r[0] for r in conn.execute("SELECT id FROM compartments")],
                species_values=one("SELECT count(*) FROM curated_values WHERE species_id = ?", species)[0])


def fetch(datasette, *requests):
    """Run (method, path[, data]) requests in one event loop; return the responses."""
    async def run():
        await datasette.invoke_startup()
        out = []
        for method, path, *data in requests:
            if method == "GET":
                out.append(await datasette.client.get(path))
            else:
                out.append(await datasette.client.post(path, data=data[0] if data else {}))
        return out
    return asyncio.run(run())


def get(datasette, path):
    return fetch(datasette, ("GET", path))[0]


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --- rendering ---------------------------------------------------------------------------------------

def test_value_shows_spread_unit_and_n():
    row = dict(value=3.29, unit="%", uncertainty="sd", spread=0.41, low=None, high=None, n=12)
    assert describe_value(row) == "3.29 ± 0.41 % (sd, n = 12)"


def test_value_shows_interval_cv_and_missing():
    ci = dict(value=0.55, unit="%", uncertainty="ci95", spread=None, low=0.48, high=0.62, n=12)
    assert describe_value(ci) == "0.55 % (95% CI 0.48 to 0.62 %, n = 12)"
    cv = dict(value=150, unit="mL/min/kg", uncertainty="cv", spread=10, low=None, high=None, n=None)
    assert describe_value(cv) == "150 mL/min/kg (cv 10 %)"
    missing = dict(value=None, unit="%", uncertainty="none", missing_reason="not reported")
    assert describe_value(missing) == "no value: not reported"


def test_units_in_words():
    assert unit_in_words("L/h/kg") == "liter per hour per kilogram"
    assert unit_in_words("m^2") == "square meter"
    assert unit_in_words("1") == "a plain number (no unit)"
    assert unit_in_words("1/d") == "one per day"
    assert unit_in_words("mL/min/(1.73 m^2)") == "milliliter per minute per 1.73 square meter"


# --- pages, metadata, facets, named queries -----------------------------------------------------------

def test_every_table_answers_as_page_and_json(store, sample):
    ds = make_datasette(store, pages="none")
    responses = fetch(ds, *[("GET", f"/bodyplan/{t}") for t in sample["tables"]],
                      *[("GET", f"/bodyplan/{t}.json?_shape=array&_size=5") for t in sample["tables"]])
    assert [r.status_code for r in responses] == [200] * len(responses)
    for response in responses[len(sample["tables"]):]:
        assert isinstance(response.json(), list)


def test_every_named_query_answers(store, sample):
    params = {"parameter_set": f"species={sample['species']}&life_stage={sample['life_stage']}",
              "parameter_across_species": f"quantity={sample['quantity']}&compartment={sample['compartment']}",
              "coverage": f"species={sample['species']}",
              "source_values": f"source={sample['source']}"}
    assert set(params) == set(QUERIES)
    ds = make_datasette(store, pages="none")
    for name, query in params.items():
        response = get(ds, f"/bodyplan/{name}.json?{query}&_shape=objects")
        assert response.status_code == 200, name
        rows = response.json()["rows"]
        assert rows, f"{name} returned no rows for {query}"
    by_source = get(ds, f"/bodyplan/source_values.json?source={sample['source']}&_shape=array").json()
    assert len(by_source) == sample["source_count"]


def test_coverage_lists_every_compartment_even_without_values(store, sample):
    ds = make_datasette(store, pages="none")
    rows = get(ds, f"/bodyplan/coverage.json?species={sample['species']}&_shape=array").json()
    assert {r["compartment"] for r in rows} == set(sample["compartments"])
    assert sum(r["rows_curated"] for r in rows) == sample["species_values"]
    assert {"gap", "covered"} <= {r["status"] for r in rows}


def test_metadata_describes_every_table_and_column(store, sample):
    ds = make_datasette(store, pages="none")
    meta = get(ds, "/-/metadata.json").json()
    assert CAUTION in meta["description_html"]
    tables = meta["databases"]["bodyplan"]["tables"]
    conn = sqlite3.connect(store)
    for table in sample["tables"]:
        entry = tables[table]
        assert entry["license"] and entry["source"] and entry["description"], table
        columns = [r[1] for r in conn.execute(f"PRAGMA table_info('{table}')")]
        assert set(entry["columns"]) == set(columns), table
        assert all(entry["columns"].values()), f"{table} has a column without description"
    assert "liter per hour" in tables["quantities"]["columns"]["canonical_unit"]


def test_front_page_shows_title_and_caution(store):
    page = get(make_datasette(store, pages="none"), "/").text
    assert "bodyplan: species physiology for PBPK modelling" in page
    assert CAUTION in page


def test_table_page_shows_description_licence_and_facets(store, sample):
    ds = make_datasette(store, pages="none")
    page = get(ds, "/bodyplan/curated_values").text
    assert "One row per value printed in a source" in page and "MIT" in page
    data = get(ds, f"/bodyplan/curated_values.json?species_id={sample['species']}").json()
    assert set(data["facet_results"]) == set(FACETS)
    species = data["facet_results"]["species_id"]["results"]
    assert [(f["value"], f["count"]) for f in species] == [(sample["species"], sample["species_values"])]


def test_value_page_shows_uncertainty_verified_and_source_link(store, sample):
    page = get(make_datasette(store, pages="none"), f"/bodyplan/curated_values/{sample['value_id']}").text
    conn = sqlite3.connect(store)
    conn.row_factory = sqlite3.Row
    row = conn.execute("SELECT * FROM curated_values WHERE id = ?", (sample["value_id"],)).fetchone()
    assert describe_value(row) in page
    assert f"{row['unit']} ({unit_in_words(row['unit'])})" in page
    assert "verified against the source text" in page
    assert f'href="/bodyplan/sources/{sample["source"]}"' in page


def test_source_page_shows_citation_doi_and_all_its_values(store, sample):
    conn = sqlite3.connect(store)
    citation, doi = conn.execute("SELECT citation, doi FROM sources WHERE id = ?", (sample["source"],)).fetchone()
    page = get(make_datasette(store, pages="none"), f"/bodyplan/sources/{sample['source']}").text
    assert citation.replace("&", "&amp;").replace("'", "&#39;") in page
    if doi:
        assert f'href="https://doi.org/{doi}"' in page
    assert f"Values from this source ({sample['source_count']})" in page
    assert page.count('href="/bodyplan/curated_values/') >= sample["source_count"]


# --- safety -------------------------------------------------------------------------------------------

WRITES = [
    "INSERT INTO species (id, scientific_name, common_name, ncbi_taxon, taxon_class) "
    "VALUES ('x', 'x', 'x', 1, 'mammal')",
    "WITH doomed AS (SELECT id FROM curated_values) DELETE FROM curated_values WHERE id IN (SELECT id FROM doomed)",
    "UPDATE curated_values SET value = 0",
    "DROP TABLE sources",
    "ATTACH DATABASE ':memory:' AS other",
    "PRAGMA writable_schema = 1",
]


def test_writes_are_refused_and_the_store_is_unchanged(store):
    from urllib.parse import quote

    before = sha256(store)
    count = sqlite3.connect(store).execute("SELECT count(*) FROM curated_values").fetchone()[0]
    ds = make_datasette(store, pages="none")
    responses = fetch(ds, *[("GET", f"/bodyplan.json?sql={quote(sql)}") for sql in WRITES],
                      ("POST", "/bodyplan", {"sql": WRITES[1]}),
                      ("POST", "/bodyplan/curated_values", {"value": "0"}),
                      ("POST", "/bodyplan/coverage", {"species": "dog"}),
                      ("POST", "/bodyplan/curated_values/1/-/delete", {}),
                      ("POST", "/bodyplan/-/create", {}))
    for request, response in zip(WRITES + ["POST"] * 5, responses):
        assert response.status_code >= 400, (request, response.status_code)
    assert fetch(ds, ("GET", "/bodyplan/curated_values.json?_size=0"))[0].json()["filtered_table_rows_count"] \
        == count
    assert sha256(store) == before
    assert ds.get_database("bodyplan").is_mutable is False


def test_select_is_allowed_with_allow_sql_but_time_limited(store):
    from urllib.parse import quote

    ds = make_datasette(store, allow_sql=True, pages="none")
    ok = get(ds, "/bodyplan.json?sql=" + quote("SELECT count(*) AS n FROM species") + "&_shape=array")
    assert ok.status_code == 200 and ok.json()[0]["n"] > 0
    endless = "WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT max(i) FROM c"
    slow = get(ds, "/bodyplan.json?sql=" + quote(endless))
    assert slow.status_code == 400 and "longer than" in slow.text
    assert get(ds, "/-/settings.json").json()["sql_time_limit_ms"] == SETTINGS["sql_time_limit_ms"]


def test_serve_listens_on_loopback_by_default():
    from bodyplan.cli import cli

    result = CliRunner().invoke(cli, ["serve", "--help"])
    assert result.exit_code == 0 and "127.0.0.1" in result.output and "--allow-sql" in result.output


# --- site folder --------------------------------------------------------------------------------------

def test_site_folder_serves_as_is(store, tmp_path):
    from datasette.app import Datasette

    from bodyplan.cli import cli

    out = tmp_path / "site"
    result = CliRunner().invoke(cli, ["site", "--out", str(out), "--store", str(store)])
    assert result.exit_code == 0, result.output
    assert {p.name for p in out.iterdir()} >= {"bodyplan.sqlite", "metadata.json", "inspect-data.json",
                                               "settings.json", "templates", "plugins"}
    assert sha256(out / "bodyplan.sqlite") == sha256(store)
    assert json.loads((out / "inspect-data.json").read_text())["bodyplan"]["file"] == "bodyplan.sqlite"
    ds = Datasette(config_dir=out)  # exactly what `datasette OUT` builds
    assert ds.get_database("bodyplan").is_mutable is False
    source = sqlite3.connect(store).execute("SELECT source_id FROM curated_values LIMIT 1").fetchone()[0]
    front, source_page = fetch(ds, ("GET", "/"), ("GET", f"/bodyplan/sources/{source}"))
    assert CAUTION in front.text
    assert "Values from this source" in source_page.text
    assert "Caution:" in source_page.text  # the copied _footer.html template is in use


def test_site_folder_keeps_unrelated_files(tmp_path, store):
    """Writing into an existing folder replaces the site's files and keeps unrelated ones."""
    out = tmp_path / "site"
    out.mkdir()
    (out / "README.txt").write_text("kept")
    write_site(out, store)
    assert (out / "README.txt").read_text() == "kept"
    assert (out / "plugins" / "bodyplan_site.py").read_text() == plugin_file().read_text()


def test_page_cache_keeps_recent_pages_within_its_budget():
    from bodyplan.site.plugin import PageCache

    cache = PageCache(budget_bytes=800)
    start = {"type": "http.response.start", "status": 200, "headers": []}
    cache.put("a", start, b"x" * 90)
    cache.put("b", start, b"y" * 90)
    cache.put("too big", start, b"z" * 101)  # over an eighth of the budget: never kept
    assert cache.get("a")[1] == b"x" * 90 and cache.get("too big") is None
    for key in "cdefghij":  # 8 more pages of 90 bytes overflow 800 bytes; "b" is the least recently used
        cache.put(key, start, b"w" * 90)
    assert cache.get("b") is None and cache.get("j") is not None and cache.size <= 800


def test_repeated_page_comes_from_the_cache(store):
    ds = make_datasette(store, pages="none")
    first, second = fetch(ds, ("GET", "/bodyplan/curated_values?_size=5"), ("GET", "/bodyplan/curated_values?_size=5"))
    assert first.status_code == second.status_code == 200
    assert "Queries took" in first.text  # a fresh render would print a different time here
    assert first.content == second.content


# --- modeller pages -------------------------------------------------------------------------------------

def _open(store):
    from bodyplan.api import open_store

    return open_store(store)


def test_coverage_page_is_the_gap_report(store, site):
    """/coverage: every cell carries the gap report's state and colour, and links to exactly the rows it counts;
    it reads each species in its own layout, as `bodyplan gaps` does (a fish's gills, not lungs)."""
    import re
    from html import unescape

    from bodyplan.api.gaps import gap_report
    from bodyplan.report.heatmap import state_colours
    from matplotlib.colors import to_hex

    report = gap_report(_open(store), None, life_stage="adult")
    page = get(site, "/coverage")
    assert "each species' own layout" in unescape(page.text) and "bodyplan gaps --out gaps.html" in page.text
    assert page.status_code == 200
    cells = re.findall(r'<td class="state-(\d)" data-state="([^"]+)" style="background: (#[0-9a-f]{6});', page.text)
    assert len(cells) == len(report.coverage)  # one cell per species × parameter of the report
    assert sorted(s for _, s, _ in cells) == sorted(report.coverage["state"])
    colours = {state: to_hex(c) for state, c in state_colours().items()}
    assert all(colours[state] == colour for _, state, colour in cells)
    links = re.findall(r'href="(/bodyplan/curated_values\?[^"]+)" data-count="(\d+)"', page.text)
    # a link lists the rows a cell counts and the rows it sets aside (pieces, other conditions …)
    shown = report.coverage["n_values"] + report.coverage["n_set_aside"]
    assert links and sorted(int(n) for _, n in links) == sorted(n for n in shown if n)
    for href, count in links[::max(1, len(links) // 10)]:
        rows = get(site, unescape(href).replace("/curated_values?", "/curated_values.json?") +
                   "&_shape=array&_size=max").json()
        assert len(rows) == int(count), href
    assert "COVERAGE_SQL" not in plugin_file().read_text()  # the site no longer declares its own coverage


def test_species_page_shows_stages_readiness_and_links(store, site, sample):
    from bodyplan.api.gaps import gap_report

    sp = sample["species"]
    page = get(site, f"/species/{sp}")
    assert page.status_code == 200
    ready = gap_report(_open(store), sp, life_stage="adult").readiness.iloc[0]
    assert f"{ready.available} of {ready.total} numbers" in page.text
    assert f'href="/sets/{sp}/adult/whole_body"' in page.text and f'href="/sets/{sp}/adult/rich_slow"' in page.text
    stages = [r[0] for r in sqlite3.connect(store).execute(
        "SELECT DISTINCT life_stage_id FROM curated_values WHERE species_id = ?", (sp,))]
    assert all(f'id="stage-{st}"' in page.text for st in stages)
    index = get(site, "/species").text
    names = [r[0] for r in sqlite3.connect(store).execute("SELECT id FROM species")]
    assert all(f'href="/species/{name}"' in index for name in names)


def test_parameter_set_page_matches_params_and_downloads_reproduce_it(store, site, sample):
    """The page's numbers, JSON, CSV and SBML are those of `bodyplan params` with the command it shows."""
    import libsbml

    from bodyplan.cli import cli
    from bodyplan.site.sets import number_text

    sp = sample["species"]
    base = f"/sets/{sp}/adult/whole_body"
    page, as_json, as_csv, as_sbml = fetch(site, *[("GET", base + ext) for ext in ("", ".json", ".csv", ".sbml.xml")])
    assert [r.status_code for r in (page, as_json, as_csv, as_sbml)] == [200] * 4
    command = re.search(r"bodyplan params [^<]*", page.text).group(0).strip()
    assert command.startswith(f"bodyplan params {sp} --life-stage adult --layout whole_body")
    assert ("--allow-gaps" in command) == bool(as_json.json()["gaps"])  # gaps are exported marked, never hidden
    args = command.split()[1:] + ["--store", str(store)]
    for fmt, response in (("json", as_json), ("csv", as_csv), ("sbml", as_sbml)):
        result = CliRunner().invoke(cli, args + ["--format", fmt])
        assert result.exit_code == 0, result.output
        assert result.output.strip() == response.text.strip(), fmt
    d = as_json.json()
    for c in d["compartments"]:  # every number on the page, formatted as the CLI formats it
        assert f'<tr id="c-{c["compartment"]}">' in page.text
        assert number_text(c["volume"]).replace("&", "&amp;") in page.text
    assert f'{len(d["gaps"])})</h2>' in page.text
    for check in d["checks"]:
        assert check["check"] in page.text
    doc = libsbml.readSBMLFromString(as_sbml.text)
    assert doc.getModel() is not None and doc.getModel().getNumCompartments() > 0


def test_value_page_shows_number_first_with_source_and_locator(store, site, sample):
    conn = sqlite3.connect(store)
    conn.row_factory = sqlite3.Row
    row = conn.execute("SELECT v.*, s.citation FROM curated_values v JOIN sources s ON s.id = v.source_id "
                       "WHERE v.id = ?", (sample["value_id"],)).fetchone()
    text = get(site, f"/values/{sample['value_id']}").text
    number = text.index(f'<p class="big" id="number">{describe_value(row)}</p>')
    assert number < text.index(row["locator"].replace("&", "&amp;")) and number < text.index('id="source"')
    assert f'href="/bodyplan/sources/{row["source_id"]}"' in text
    assert ("✓ verified" if row["verified"] else "not verified") in text


def test_modeller_pages_ignore_query_strings_and_answer_404_and_503(store, site):
    from bodyplan.site.plugin import Pages

    assert get(site, "/species?_miss=17").status_code == 200  # a distinct URL is the same page
    missing = get(site, "/species/no_such_species")
    assert missing.status_code == 404 and "start at /species" in missing.text
    old = get(site, "/coverage?stage=juvenile")
    assert old.status_code == 302 and old.headers["location"] == "/coverage/own/juvenile"
    pending = make_datasette(store, pages="none")
    pending.bodyplan_pages = Pages()  # not yet rendered
    response = get(pending, "/species")
    assert response.status_code == 503 and response.headers["retry-after"] == "5"


def test_site_folder_serves_the_modeller_pages(store, tmp_path):
    from datasette.app import Datasette

    out = write_site(tmp_path / "site", store)
    sp = sqlite3.connect(store).execute("SELECT species_id FROM curated_values LIMIT 1").fetchone()[0]
    assert (out / "pages" / "species" / f"{sp}.html").exists()
    ds = Datasette(config_dir=out)
    page, download = fetch(ds, ("GET", f"/species/{sp}"), ("GET", f"/sets/{sp}/adult/whole_body.json"))
    assert page.status_code == 200 and "<h1>" in page.text
    assert download.status_code == 200 and download.json()["species"] == sp


# --- abuse: each tried, each refused, the store unchanged ------------------------------------------------

def _sql(sql: str) -> str:
    from urllib.parse import quote

    return "/bodyplan.json?sql=" + quote(sql)


BIG = ("WITH RECURSIVE s(x) AS (SELECT 'xxxxxxxxxx' UNION ALL SELECT x || x FROM s WHERE length(x) < 400000), "
       "c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c LIMIT 100) SELECT i, (SELECT max(x) FROM s) AS x FROM c")
ABUSE = {  # query → a word of the refusal
    "SELECT zeroblob(200000000) AS b": "zeroblob",
    "SELECT length(randomblob(200000000)) AS b": "randomblob",
    "SELECT fts3_tokenizer('simple') AS t": "fts3_tokenizer",
    "SELECT load_extension('/tmp/x')": "load_extension",
    "SELECT length(printf('%.*c', 2000000000, 'x'))": "printf",
    "PRAGMA user_version = 3": "not authorized",
    "PRAGMA query_only = 0": "not authorized",
    "WITH RECURSIVE s(x) AS (SELECT 'x' UNION ALL SELECT x || x FROM s) SELECT max(length(x)) FROM s": "too big",
    "WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT max(i) FROM c": "longer than",
    BIG: "larger than",
}


def test_arbitrary_sql_is_off_by_default(store):
    before = sha256(store)
    ds = make_datasette(store, pages="none")
    responses = fetch(ds, *[("GET", _sql(q)) for q in ["SELECT 1", *ABUSE]],
                      ("GET", "/bodyplan/curated_values?_where=1%3D1"), ("GET", "/bodyplan.csv?sql=SELECT+1"))
    assert [r.status_code for r in responses] == [403] * len(responses)
    assert "--allow-sql" in responses[0].text
    assert sha256(store) == before


def test_every_sql_abuse_is_refused_when_sql_is_allowed(store):
    before = sha256(store)
    ds = make_datasette(store, allow_sql=True, pages="none")
    responses = fetch(ds, *[("GET", _sql(q)) for q in ABUSE], ("GET", _sql("SELECT count(*) AS n FROM sources")))
    for (query, word), response in zip(ABUSE.items(), responses):
        assert response.status_code == 400 and word in response.text, (query, response.status_code, response.text)
    assert responses[-1].status_code == 200  # ordinary reading still works
    assert sha256(store) == before


def test_authorizer_denies_on_every_connection():
    """The rule itself, on a plain connection: read pragmas pass, writing ones and the listed functions fail."""
    from bodyplan.site.plugin import guard_connection

    conn = sqlite3.connect(":memory:")
    conn.execute("CREATE TABLE t (a)")
    guard_connection(conn)
    assert conn.execute("PRAGMA table_info(t)").fetchall()
    assert conn.execute("SELECT name FROM pragma_table_info('t')").fetchall() == [("a",)]
    for sql in ("PRAGMA journal_mode = WAL", "PRAGMA writable_schema = 1", "SELECT zeroblob(10)",
                "ATTACH DATABASE ':memory:' AS other"):
        with pytest.raises(sqlite3.DatabaseError, match="not authorized"):
            conn.execute(sql)


def test_slow_query_flood_is_bounded_and_pages_keep_answering(store):
    """More endless queries than the pool and its queue hold: each is stopped or turned away, none is
    answered 500, and pages answer meanwhile."""
    endless = _sql("WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT max(i) FROM c")
    ds = make_datasette(store, allow_sql=True, pages="none", limits={"sql_workers": 1, "sql_queue": 2})

    async def run():
        await ds.invoke_startup()
        flood = [asyncio.create_task(ds.client.get(endless)) for _ in range(6)]
        await asyncio.sleep(0.05)
        page = await ds.client.get("/bodyplan/species.json?_shape=array")
        return page, await asyncio.gather(*flood)

    page, flood = asyncio.run(run())
    assert page.status_code == 200
    statuses = sorted(r.status_code for r in flood)
    assert set(statuses) <= {400, 503} and 503 in statuses and 400 in statuses, statuses


@pytest.mark.parametrize("query, column", [
    ("_sort=nope", "nope"), ("_sort_desc=nope", "nope"), ("_facet=nope", "nope"), ("nope__exact=1", "nope"),
    ("nope=1", "nope"), ("species_id__nope=1", "nope"), ("_facet_array=nope", "nope"), ("_col=nope", "nope"),
    ("_through=abc", "_through"), ('_through={"table":"nope","column":"id","value":"x"}', "_through"),
])
def test_unknown_sort_or_filter_answers_400_with_a_message(store, query, column):
    response = get(make_datasette(store, pages="none"), f"/bodyplan/curated_values?{query}")
    assert response.status_code == 400 and (column if column.startswith("_") else repr(column)) in response.text, \
        response.text[:200]


@pytest.mark.parametrize("path", ["/-/threads.json", "/-/threads", "/-/permissions", "/-/allow-debug", "/-/plugins.json",
                                  "/-/messages", "/-/actor.json", "/-/databases.json"])
def test_debug_endpoints_are_off(store, path):
    assert get(make_datasette(store, pages="none"), path).status_code == 404


def test_table_pages_stay_within_their_query_budget(store):
    """A page's cost is counted in SQL statements, not timed: the values table with its facets, a filtered
    view, its JSON and a row page each run a bounded number of queries (the budget of this site)."""
    from datasette.tracer import capture_traces

    budget = {"/bodyplan/curated_values": 20, "/bodyplan/curated_values?species_id=dog&quantity_id=gfr": 20,
              "/bodyplan/curated_values.json?_size=100": 20, "/bodyplan/curated_values/1": 12}
    ds = make_datasette(store, pages="none")

    async def run():
        await ds.invoke_startup()
        counts = {}
        for path in budget:
            await ds.client.get(path)  # schema introspection happens once, on first use
            traces: list = []
            with capture_traces(traces):
                response = await ds.client.get(path + ("&" if "?" in path else "?") + "_miss=1")
            assert response.status_code == 200, path
            counts[path] = len(traces)
        return counts

    counts = asyncio.run(run())
    assert all(counts[p] <= budget[p] for p in budget), counts
    assert len(FACETS) == 3


@given(st.sampled_from(sorted(COLUMNS)), st.sampled_from(["", *sorted(FILTER_OPS)]),
       st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=12))
def test_known_columns_pass_and_unknown_ones_are_named(column, op, name):
    """Every column with every filter passes; any other name is refused with that name in the message."""
    key = f"{column}__{op}" if op else column
    assert unknown_column(COLUMNS, [(key, "1"), ("_sort", column), ("_facet", column), ("_size", "5")]) is None
    if name not in COLUMNS and not name.startswith("_"):
        assert repr(name) in unknown_column(COLUMNS, [(name, "1")])
        assert repr(name) in unknown_column(COLUMNS, [("_sort_desc", name)])
    if op:
        assert unknown_column(COLUMNS, [(f"{column}__{name}x", "1")]) is not None  # no filter ends in x


def test_filter_operators_are_datasettes():
    from datasette.filters import Filters

    assert FILTER_OPS == {f.key for f in Filters._filters}


def test_value_pages_say_the_animals_condition_and_temperature(store, site):
    """Steinhausen et al. (2008), Table 1: the same sockeye swimming at 15 °C; both value pages say so."""
    conn = sqlite3.connect(store)
    found = conn.execute("SELECT id FROM curated_values WHERE source_id = 'steinhausen2008' AND row_id = 'co_swim'"
                         ).fetchone()
    if found is None:
        pytest.skip("bundled data: steinhausen2008 not in this store")
    assert "<dt>condition</dt><dd>exercise, at 15 °C</dd>" in get(site, f"/values/{found[0]}").text
    assert "· condition exercise, at 15 °C ·" in get(make_datasette(store, pages="none"),
                                                   f"/bodyplan/curated_values/{found[0]}").text


def test_a_fish_is_shown_in_the_fish_layout_only(store, site):
    """A fish's parameter sets are in the fish layout (gills in place of lungs); the air breathers' layouts,
    whose lungs a fish lacks, are not offered for it."""
    conn = sqlite3.connect(store)
    fish = conn.execute("SELECT s.id, v.life_stage_id FROM species s JOIN curated_values v ON v.species_id = s.id "
                        "WHERE s.taxon_class = 'fish' ORDER BY s.id, v.life_stage_id").fetchone()
    if fish is None:
        pytest.skip("this store has no fish")
    sp, stage = fish
    page = get(site, f"/species/{sp}").text
    assert f'href="/sets/{sp}/{stage}/fish"' in page and "/whole_body" not in page and "/rich_slow" not in page
    ps = get(site, f"/sets/{sp}/{stage}/fish")
    assert ps.status_code == 200 and '<tr id="c-gills">' in ps.text and '<tr id="c-lung">' not in ps.text
    assert "Other layout" not in ps.text
    assert get(site, f"/sets/{sp}/{stage}/whole_body").status_code == 404
