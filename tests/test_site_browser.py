"""What a person sees: `bodyplan serve` in a subprocess, driven by Debian's Chromium through playwright.

Screenshots of each step go to test-artifacts/ (git-ignored) for a human to look at, each modeller page
also at a phone's width (390 px).
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
            urllib.request.urlopen(f"{base}/species", timeout=2).read()  # 503 until the pages are rendered
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
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=LAUNCH_ARGS)
        yield browser
        browser.close()


@pytest.fixture(scope="module")
def page(browser):
    return browser.new_page(viewport={"width": 1400, "height": 1000})


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


PHONE = {"width": 390, "height": 844}


@pytest.fixture(scope="module")
def phone(browser):
    return browser.new_page(viewport=PHONE)


def fits(tab, selector: str) -> None:
    """Nothing scrolls sideways, and the element holding the main number lies inside the screen."""
    width = tab.viewport_size["width"]
    assert tab.evaluate("document.documentElement.scrollWidth") <= width
    box = tab.locator(selector).first.bounding_box()
    assert box and box["x"] >= 0 and box["x"] + box["width"] <= width, box


def test_modeller_pages_in_the_browser(server, page, phone, store):
    """Species → parameter set → a value behind one of its numbers → coverage, at desktop and phone width."""
    conn = sqlite3.connect(store)
    species = (conn.execute("SELECT species_id FROM curated_values WHERE species_id = 'dog'").fetchone()
               or conn.execute("SELECT species_id FROM curated_values GROUP BY 1 ORDER BY count(*) DESC").fetchone())[0]

    page.goto(f"{server}/species")
    page.locator(f"a[href='/species/{species}']").first.click()
    page.wait_for_url(f"**/species/{species}")
    assert "numbers" in page.locator("h3").first.inner_text() and page.locator("table.coverage-strip").count()
    shot(page, "6-species", full_page=True)

    page.locator("a.set-link").first.click()
    page.wait_for_url(f"**/sets/{species}/*/whole_body")
    assert page.locator("#command").inner_text().startswith(f"bodyplan params {species}")
    for label in ("JSON", "CSV", "SBML"):
        assert page.get_by_role("link", name=label).count() == 1
    assert page.locator("#body-weight").inner_text().endswith("kg")
    shot(page, "7-parameter-set", full_page=True)

    value_link = page.locator("table.compartments a[href^='/values/']").first
    value_id = value_link.get_attribute("href").rsplit("/", 1)[1]
    value_link.click()
    page.wait_for_url(f"**/values/{value_id}")
    number = page.locator("#number").inner_text()
    source = conn.execute("SELECT s.citation, v.locator FROM curated_values v JOIN sources s ON s.id = v.source_id "
                          "WHERE v.id = ?", (value_id,)).fetchone()
    assert number and source[0] in page.locator("#source").inner_text()
    assert source[1] in page.locator("#source").inner_text()
    shot(page, "8-value")

    page.goto(f"{server}/coverage")
    assert page.locator("td[data-state]").count() > 0
    shot(page, "9-coverage")

    # the values table: the value column is on the first screen at 1,400 px
    page.goto(f"{server}/bodyplan/curated_values?species_id={species}")
    box = page.locator("th.col-value").bounding_box()
    assert box and box["x"] + box["width"] <= 1400
    shot(page, "10-values-table")

    for path, selector, name in ((f"/species/{species}", "h1", "11-phone-species"),
                                 (f"/sets/{species}/adult/whole_body", "#body-weight", "12-phone-parameter-set"),
                                 (f"/values/{value_id}", "#number", "13-phone-value"),
                                 ("/coverage", "h1", "14-phone-coverage")):
        phone.goto(server + path)
        fits(phone, selector)
        if "parameter-set" in name:  # every number of the set, not only the first, stays on the screen
            for cell in phone.locator("table.compartments td.num").all()[:6]:
                box = cell.bounding_box()
                assert box["x"] + box["width"] <= PHONE["width"], box
        shot(phone, name, full_page=True)
