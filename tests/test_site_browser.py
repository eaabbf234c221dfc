"""What a person sees: `bodyplan serve` in a subprocess, driven by Debian's Chromium through playwright.

Screenshots of each step go to test-artifacts/ (git-ignored) for a human to look at.
"""

from __future__ import annotations

import os
import socket
import sqlite3
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

CHROMIUM = Path("/usr/bin/chromium")
ARTIFACTS = Path(__file__).parents[1] / "test-artifacts"
FIXTURE_TREE = Path(__file__).parent / "data" / "site"  # invented values, for when the bundled data fails
LAUNCH_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
               "--disable-sync", "--no-first-run"]

pytestmark = pytest.mark.skipif(not CHROMIUM.exists(), reason="Debian chromium not installed at /usr/bin/chromium "
                                "(apt-get install chromium); the browser test needs it")


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture(scope="module")
def store(tmp_path_factory) -> Path:
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import CuratedDataError, build

    path = tmp_path_factory.mktemp("browser") / "store.sqlite"
    try:
        build(bundled_data_dir(), path)
    except CuratedDataError:  # curation in progress: serve the small fixture tree instead
        build(FIXTURE_TREE, path)
    return path


@pytest.fixture(scope="module")
def server(store):
    port = free_port()
    command = [sys.executable, "-c", "from bodyplan.cli import main; main()", "serve", "--port", str(port),
               "--store", str(store)]
    proc = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            env=dict(os.environ, BODYPLAN_STORE=""))
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            urllib.request.urlopen(f"{base}/-/versions.json", timeout=2).read()
            break
        except OSError:
            if proc.poll() is not None or time.monotonic() > deadline:
                proc.kill()
                pytest.fail(f"bodyplan serve did not start:\n{proc.communicate()[0]}")
            time.sleep(0.2)
    yield base
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()


@pytest.fixture(scope="module")
def page():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=LAUNCH_ARGS)
        tab = browser.new_page(viewport={"width": 1400, "height": 1000})
        yield tab
        browser.close()


def shot(page, name: str, full_page: bool = False) -> None:
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"site-{name}.png"), full_page=full_page)


def test_a_person_follows_a_value_to_its_source(server, page, store):
    from bodyplan import CAUTION

    conn = sqlite3.connect(store)
    species = (conn.execute("SELECT species_id FROM curated_values WHERE species_id = 'dog'").fetchone()
               or conn.execute("SELECT species_id FROM curated_values GROUP BY 1 ORDER BY count(*) DESC").fetchone())[0]
    n_species = conn.execute("SELECT count(*) FROM curated_values WHERE species_id = ?", (species,)).fetchone()[0]

    # 1. front page: title, caution, the store
    page.goto(server + "/")
    assert "bodyplan: species physiology for PBPK modelling" in page.locator("h1").first.inner_text()
    assert CAUTION in page.locator("body").inner_text()
    shot(page, "1-front")

    # 2. the values table, reached by links, then the species facet
    page.get_by_role("link", name="curated values").first.click()
    page.wait_for_url("**/bodyplan/curated_values")
    facet = page.locator(".facet-info[data-column='species_id'] a", has_text=species).first
    facet.click()
    page.wait_for_url(f"**species_id={species}*")
    assert f"{n_species:,} row" in page.locator("h3").first.inner_text()
    shown = page.locator("td.col-species_id").all_inner_texts()
    assert shown and all(text.strip().startswith(species) for text in shown)
    shot(page, "2-facet")

    # 3. one value (one with a spread if the species has any): uncertainty, unit, verified flag, source link
    rows = page.locator("tbody tr")
    with_spread = rows.filter(has=page.locator("td.col-value", has_text="±"))
    with_number = rows.filter(has_not=page.locator("td.col-value", has_text="no value:"))
    chosen = next(r for r in (with_spread, with_number, rows) if r.count())
    row_link = chosen.first.locator("td.col-id a")
    value_id = row_link.inner_text().strip()
    row_link.click()
    page.wait_for_url(f"**/bodyplan/curated_values/{value_id}")
    value_cell = page.locator("td.col-value").inner_text()
    # "% (percent)", "mL/min/(100 g) (milliliter per minute per 100 gram)": the unit itself may hold a space
    unit, words = page.locator("td.col-unit").inner_text().strip().rsplit(" (", 1)
    assert words.endswith(")") and (unit in value_cell or "no value:" in value_cell)
    assert "verified against the source text" in page.locator("td.col-verified").inner_text()
    source = page.locator("td.col-source_id a").inner_text().strip()
    summary = page.locator(".bodyplan-summary").inner_text()
    assert value_cell.strip() in summary and "verified against the source text" in summary
    shot(page, "3-value")

    # 4. its source: citation, DOI link when recorded, and the values it gave
    page.locator("td.col-source_id a").click()
    page.wait_for_url(f"**/bodyplan/sources/{source}")
    citation, doi, count = conn.execute("SELECT citation, doi, (SELECT count(*) FROM curated_values WHERE "
                                        "source_id = sources.id) FROM sources WHERE id = ?", (source,)).fetchone()
    assert citation in page.locator(".bodyplan-citation").inner_text()
    if doi:
        assert page.locator(f".bodyplan-citation a[href='https://doi.org/{doi}']").count() == 1
    assert f"Values from this source ({count})" in page.locator("h2", has_text="Values from this source").inner_text()
    assert page.locator(f".bodyplan-source-values a[href='/bodyplan/curated_values/{value_id}']").count() == 1
    shot(page, "4-source", full_page=True)


def test_coverage_query_in_the_browser(server, page):
    page.goto(server + "/bodyplan/coverage?species=dog")
    assert "Coverage and gaps for one species" in page.locator("h1").inner_text()
    statuses = set(page.locator("td.col-status").all_inner_texts())
    assert statuses and statuses <= {"covered", "gap", "reported missing"}
    shot(page, "5-coverage")
