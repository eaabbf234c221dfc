"""Gap reports: coverage counts against SQL, readiness, most wanted, and the rendered PNG and HTML.

Runs on the bundled curated data (copied into tmp_path with one species added that has no rows:
its vocabulary line says "invented for tests").
"""

from __future__ import annotations

import base64
import io
import json
import re
import shutil
from html.parser import HTMLParser

import pandas as pd
import pytest

import bodyplan
from bodyplan.api.gaps import STATES, gap_report, needed_for
from bodyplan.api.layouts import load_layout
from bodyplan.api.locate import bundled_data_dir
from bodyplan.ingest import build
from bodyplan.schema.model import slots

EMPTY = "test_species_without_data"


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    root = tmp_path_factory.mktemp("gaps") / "curated"
    shutil.copytree(bundled_data_dir(), root, ignore=shutil.ignore_patterns("__pycache__", "*.py"))
    with open(root / "vocab" / "species.csv", "a", encoding="utf-8", newline="") as fh:
        fh.write(f"{EMPTY},Nullus testorum,test species,1,mammal,,invented for tests: a species with no rows\n")
    build(root, root.parent / "store.sqlite")
    return bodyplan.open_store(root.parent / "store.sqlite")


@pytest.fixture(scope="module")
def report(store):
    return gap_report(store, layout="whole_body")


def sql_count(store, species, stage, compartments, quantities):
    marks = lambda xs: ", ".join("?" for _ in xs)  # noqa: E731
    row = store.conn.execute(
        "SELECT count(*), count(DISTINCT source_id) FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
        f"AND compartment_id IN ({marks(compartments)}) AND quantity_id IN ({marks(quantities)}) "
        "AND value IS NOT NULL", (species, stage, *compartments, *quantities)).fetchone()
    return tuple(row)


def sql_state(store, species, stage, compartments, quantities):
    """A cell's state straight from SQL, written apart from the report's own code."""
    compartments = [compartments] if isinstance(compartments, str) else list(compartments)
    marks = lambda xs: ", ".join("?" for _ in xs)  # noqa: E731
    absolute = "quantity_id NOT IN ('tissue_mass_fraction', 'blood_flow_fraction') AND normalisation = 'none'"
    base = (f"FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
            f"AND compartment_id IN ({marks(compartments)}) AND quantity_id IN ({marks(quantities)}) "
            "AND value IS NOT NULL")
    args = (species, stage, *compartments, *quantities)
    if not store.conn.execute(f"SELECT count(*) {base}", args).fetchone()[0]:
        return "absent"
    if not store.conn.execute(f"SELECT count(*) {base} AND {absolute}", args).fetchone()[0]:
        return "fraction only"
    n_src, n_unc, n_ver = store.conn.execute(
        f"SELECT count(DISTINCT source_id), sum(uncertainty <> 'none'), sum(verified) {base}", args).fetchone()
    if n_src >= 2:
        return "several sources"
    if not n_unc:
        return "no uncertainty"
    return "verified" if n_ver else "unverified"


def test_every_species_is_in_the_report_and_empty_ones_score_zero(store, report):
    """Every air breather is read in the whole-body layout; fish have no lungs for it and are left out,
    each with the reason."""
    fish = {sp for sp, taxon in store.query("SELECT id, taxon_class FROM species") if taxon == "fish"}
    species = set(store.ids("species")) - fish
    assert fish and sorted(report.readiness["species"]) == sorted(species)
    assert set(report.coverage["species"]) == species
    assert set(report.species_left_out) == fish
    assert report.left_out_lines() == [f"left out {', '.join(sorted(fish))}: a fish has no lung, which the "
                                       "whole_body layout needs; use --layout fish or rich_slow"]
    empty = report.readiness.set_index("species").loc[EMPTY]
    assert empty["readiness"] == 0 and empty["available"] == 0 and empty["covered_slots"] == 0
    cells = report.coverage[report.coverage["species"] == EMPTY]
    assert len(cells) == len(report.slots) and set(cells["state"]) == {"absent"}
    # the under-studied ranking starts with species that have nothing
    assert report.under_studied.iloc[0]["readiness"] == 0


def test_coverage_counts_match_sql(store, report):
    """Each cell's value and source counts equal a direct count over curated_values."""
    params = {p.id: p for p in report.slots}
    for cell in report.coverage.itertuples(index=False):
        p = params[cell.slot]
        n_values, n_sources = sql_count(store, cell.species, cell.life_stage, p.stored, p.quantities)
        assert cell.n_values + cell.n_set_aside == n_values, (cell.species, cell.slot)
        if not cell.n_set_aside:
            assert cell.n_sources == n_sources, (cell.species, cell.slot)
    # the same for a few cells written out by hand, independent of the report's own mapping
    for species in ("human", "rat", "dog"):
        liver = report.coverage.query("species == @species and slot == 'liver.volume'").iloc[0]
        assert liver["n_values"] + liver["n_set_aside"] == sql_count(store, species, "adult", ["liver"],
                                              ["tissue_mass", "tissue_mass_fraction", "tissue_volume"])[0]
        co = report.coverage.query("species == @species and slot == 'cardiac_output'").iloc[0]
        assert co["n_values"] + co["n_set_aside"] == sql_count(store, species, "adult", ["whole_body"],
                                                               ["cardiac_output"])[0]
    assert report.coverage["n_values"].sum() > 0


def test_cell_states_follow_their_definitions(store, report):
    seen = set(report.coverage["state"])
    assert seen <= set(STATES)
    assert report.coverage["level"].tolist() == [STATES.index(s) for s in report.coverage["state"]]
    for cell in report.coverage.itertuples(index=False):
        if cell.state == "absent":  # nothing stored, or a lumped compartment with a part lacking data
            assert cell.n_values == 0 or cell.parts_lacking
        elif cell.state == "fraction only":
            assert cell.n_values > 0 and cell.n_absolute == 0
        else:
            assert cell.n_absolute > 0
        if cell.state == "verified":
            assert cell.n_verified > 0 and cell.n_with_uncertainty > 0
        if cell.state == "several sources":
            assert cell.n_sources >= 2
    params = {p.id: p for p in report.slots}
    for cell in report.coverage.itertuples(index=False):
        p = params[cell.slot]
        if len(p.stored) == 1 and not cell.n_set_aside:
            assert cell.state == sql_state(store, cell.species, cell.life_stage, p.stored, p.quantities)
    # the human adult set is the best curated one: several sources behind its liver volume
    assert report.coverage.query("species == 'human' and slot == 'liver.volume'")["state"].item() == \
        "several sources"


def test_rows_a_set_would_not_count_cover_nothing(store, report):
    """Pieces of an organ cover nothing: the rat's only adipose row is one fat depot (a segment), so its
    adipose volume is absent, as in its parameter set, and the row is counted apart."""
    cell = report.coverage.query("species == 'rat' and life_stage == 'adult' and slot == 'adipose.volume'").iloc[0]
    parts = store.conn.execute("SELECT part_id FROM curated_values WHERE species_id = 'rat' AND life_stage_id = "
                               "'adult' AND compartment_id = 'adipose' AND quantity_id IN ('tissue_mass', "
                               "'tissue_mass_fraction', 'tissue_volume')").fetchall()
    assert parts and {p for (p,) in parts} == {"segment"}
    assert (cell.state, cell.n_values, cell.n_set_aside) == ("absent", 0, len(parts))
    ps = store.parameter_set("rat", body_mass="0.25 kg")
    assert ps.volumes["adipose"].origin == "gap"


def test_readiness_is_the_non_gap_share_of_the_parameter_set(store, report):
    for species in ("human", "rat", EMPTY):
        table = store.parameter_set(species, fill="none").table
        table = table[(table["compartment"] != "rest_of_body") & (table["origin"] != "not_applicable")]
        expected = (table["origin"] != "gap").mean()
        got = report.readiness.set_index("species").loc[species, "readiness"]
        assert got == pytest.approx(expected, abs=1e-4)
    ranked = report.under_studied["readiness"].tolist()
    assert ranked == sorted(ranked)


def test_other_layouts_and_stages(store):
    small = gap_report(store, ["human", "rat"], life_stage="all", layout="rich_slow")
    assert {"richly_perfused.volume", "slowly_perfused.blood_flow"} <= {p.id for p in small.slots}
    assert "blood.blood_flow" not in {p.id for p in small.slots}  # blood carries the cardiac output
    # a lumped compartment stands as its worst part (each part counted with the parts it may be summed from)
    parts = {"gut": ["gut", "stomach", "small_intestine", "large_intestine", "rumen"]}
    for cell in small.coverage.itertuples(index=False):
        p = next(q for q in small.slots if q.id == cell.slot)
        named = load_layout("rich_slow").compartments.get(p.compartment, [])
        if len(named) > 1 and cell.n_values:
            worst = min(STATES.index(sql_state(store, cell.species, cell.life_stage, parts.get(c, [c]),
                                               p.quantities)) for c in named)
            assert cell.level == worst, (cell.species, cell.slot)
    stages = set(zip(small.readiness["species"], small.readiness["life_stage"]))
    assert ("human", "adult") in stages and ("rat", "adult") in stages
    in_store = {tuple(r) for r in store.query("SELECT DISTINCT species_id, life_stage_id FROM curated_values "
                                              "WHERE species_id IN ('human', 'rat')")}
    assert in_store <= stages


def test_needed_for_traces_gaps_to_what_would_close_them():
    """A hand-made parameter-set table (invented for tests): body mass and cardiac output are gaps; each
    row lists the slots it rests on, as parameter sets write them."""
    table = pd.DataFrame([
        ("body_mass", "gap", "body_mass"), ("cardiac_output", "gap", "cardiac_output; body_mass"),
        ("liver.volume", "gap", "liver.volume; body_mass"),
        ("liver.blood_flow", "gap", "liver.blood_flow; cardiac_output; body_mass; gut.blood_flow"),
        ("gut.volume", "scaled", "gut.volume; body_mass"),
        ("gut.blood_flow", "gap", "gut.blood_flow; cardiac_output; body_mass"),
        ("lung.volume", "gap", "lung.volume; body_mass"), ("lung.blood_flow", "gap", "cardiac_output; body_mass"),
        ("blood.volume", "gap", "blood.volume; body_mass"), ("blood.blood_flow", "not_applicable", "")],
        columns=["slot", "origin", "depends_on"])
    cover = {"body_mass": "absent", "cardiac_output": "absent", "liver.volume": "fraction only",
             "liver.blood_flow": "fraction only", "lung.volume": "absent", "blood.volume": "fraction only",
             "gut.volume": "fraction only", "gut.blood_flow": "fraction only", "lung.blood_flow": "absent"}
    needs = needed_for(table, cover)
    assert needs["body_mass"] == {"body_mass"}
    assert needs["liver.volume"] == {"body_mass"}  # a fraction is stored; the body mass is missing
    assert needs["lung.volume"] == {"lung.volume", "body_mass"}
    assert needs["lung.blood_flow"] == {"cardiac_output", "body_mass"}  # lung flow is the cardiac output
    assert needs["liver.blood_flow"] == {"gut.blood_flow", "body_mass", "cardiac_output"}
    assert "blood.blood_flow" not in needs and "gut.volume" not in needs


def test_most_wanted_counts_are_consistent(report):
    mw = report.most_wanted
    assert len(mw) > 0
    n_keys = len(report.readiness)
    assert (mw["species_needing"] <= n_keys).all()
    assert (mw["species_made_ready"] <= mw["species_needing"]).all()
    assert mw["species_needing"].tolist() == [len(s.split(", ")) for s in mw["species"]]
    ranked = list(zip(mw["species_made_ready"], mw["gaps_closed_alone"], mw["species_needing"]))
    assert ranked == sorted(ranked, reverse=True)
    # a species with no rows at all waits on body mass among others
    assert EMPTY in mw.set_index("slot").loc["body_mass", "species"]


def test_heatmap_png_is_written_and_names_every_species(report, tmp_path):
    import matplotlib.image as mpimg

    from bodyplan.report.heatmap import heatmap_figure, write_heatmap

    path = tmp_path / "gaps.png"
    data = write_heatmap(report, path)
    assert path.read_bytes() == data and data[:8] == b"\x89PNG\r\n\x1a\n"
    height, width = mpimg.imread(path).shape[:2]
    # at least 0.25 inch per species row and per parameter column at 150 dpi: legible when printed
    assert height >= 0.25 * 150 * len(report.readiness) and width >= 0.4 * 150 * len(report.slots)
    fig = heatmap_figure(report)
    ax = fig.axes[0]
    row_text = " ".join(t.get_text() for t in ax.get_yticklabels())
    for species in report.readiness["species"]:
        assert species in row_text
    assert [t.get_text() for t in ax.get_xticklabels()] == [p.label for p in report.slots]
    legend = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend == STATES


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tables: dict[str, list[list[str]]] = {}
        self.images: list[str] = []
        self._table = None
        self._row = None
        self._cell = None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "table":
            self._table = self.tables.setdefault(attrs.get("id", f"t{len(self.tables)}"), [])
        elif tag == "tr" and self._table is not None:
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = ""
        elif tag == "img":
            self.images.append(attrs.get("src", ""))

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._row.append(self._cell)
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self._table.append(self._row)
            self._row = None
        elif tag == "table":
            self._table = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data


def test_html_report_is_self_contained_and_complete(store, report, tmp_path):
    from bodyplan.report.page import write_gap_report_html

    path = tmp_path / "gaps.html"
    write_gap_report_html(report, path, store.info())
    text = path.read_text(encoding="utf-8")
    parser = _Collector()
    parser.feed(text)
    # every link from a cell to a source lands on that source's row
    targets = set(re.findall(r'href="#(src-[a-z0-9_]+)"', text))
    assert targets and targets <= set(re.findall(r'<tr id="(src-[a-z0-9_]+)"', text))
    # one embedded PNG, nothing fetched from elsewhere
    assert len(parser.images) == 1 and parser.images[0].startswith("data:image/png;base64,")
    assert base64.b64decode(parser.images[0].split(",", 1)[1])[:4] == b"\x89PNG"
    assert "http" not in "".join(parser.images)
    ranked = parser.tables["under-studied"]
    assert ranked[0][:3] == ["rank", "species", "stage"]
    assert sorted(r[1] for r in ranked[1:]) == sorted(set(store.ids("species")) - set(report.species_left_out))
    assert report.left_out_lines()[0].capitalize() in text  # the fish, left out of the whole-body layout
    assert [r[1] for r in ranked[1:]] == list(report.under_studied["species"])
    assert [r[0] for r in parser.tables["most-wanted"][1:]] == list(report.most_wanted["slot"])
    # every covered cell is listed with its sources, and every source is cited
    cells = parser.tables["cells"][1:]
    covered = report.coverage[report.coverage["n_values"] > 0]
    assert len(cells) == len(covered)
    cited = {r[0] for r in parser.tables["sources"][1:]}
    assert {s for r in cells for s in r[-1].split("; ")} == cited
    assert [r[0] for r in parser.tables["states"][1:]] == STATES


def test_cli_gaps(store, tmp_path):
    from click.testing import CliRunner

    from bodyplan.cli import cli

    runner = CliRunner()
    result = runner.invoke(cli, ["gaps", "--species", "rat", "--species", EMPTY, "--format", "json",
                                 "--store", str(store.path)])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    assert {r["species"] for r in data["readiness"]} == {"rat", EMPTY}
    assert {c["species"] for c in data["coverage"]} == {"rat", EMPTY}
    out = tmp_path / "r.html"
    result = runner.invoke(cli, ["gaps", "--species", "human", "--species", "dog", "--layout", "rich_slow",
                                 "--out", str(out), "--store", str(store.path)])
    assert result.exit_code == 0, result.output
    assert out.stat().st_size > 10_000 and "human" in result.output and "dog" in result.output
    csv = runner.invoke(cli, ["gaps", "--species", "rat", "--format", "csv", "--store", str(store.path)])
    frame = pd.read_csv(io.StringIO(csv.output))
    # one species asked for: each of its stages with data (and adult), every slot of the layout for each
    stages = {r["life_stage_id"] for r in store.query("SELECT DISTINCT life_stage_id FROM curated_values "
                                                         "WHERE species_id = 'rat'")} | {"adult"}
    assert set(frame["species"]) == {"rat"} and set(frame["life_stage"]) == stages
    assert (frame.groupby("life_stage").size() == len(slots(load_layout("whole_body")))).all()
    adult = runner.invoke(cli, ["gaps", "--species", "rat", "--life-stage", "adult", "--format", "csv",
                                "--store", str(store.path)])
    assert set(pd.read_csv(io.StringIO(adult.output))["life_stage"]) == {"adult"}
    bad = runner.invoke(cli, ["gaps", "--out", str(tmp_path / "x.txt"), "--store", str(store.path)])
    assert bad.exit_code != 0


def test_unknown_species_is_refused(store):
    from bodyplan.api import UnknownIdError

    with pytest.raises(UnknownIdError):
        gap_report(store, ["unicorn"])


def test_store_method_and_subsets_match_the_full_report(store, report):
    """A report on a few species gives those species' rows of the full report."""
    few = ["human", "rat", EMPTY]
    same = store.gap_report(few)
    full = report.coverage[report.coverage["species"].isin(few)].reset_index(drop=True)
    pd.testing.assert_frame_equal(same.coverage.sort_values(["species", "slot"]).reset_index(drop=True),
                                  full.sort_values(["species", "slot"]).reset_index(drop=True))
    ready = report.readiness.set_index("species").loc[few, ["readiness", "waits_on"]]
    assert same.readiness.set_index("species").loc[few, ["readiness", "waits_on"]].equals(ready)


def test_each_species_is_read_in_its_own_layout_by_default(store):
    """Without a layout, fish are read in the fish layout (gills, no lungs) and mammals in whole_body:
    a trout's readiness does not count lungs it lacks, and the matrix says which slots are not its own."""
    from bodyplan.api.gaps import BY_SPECIES, NOT_IN_LAYOUT

    both = gap_report(store, ["rat", "rainbow_trout"])
    assert both.layout == BY_SPECIES
    fish, mammal = slots(load_layout("fish")), slots(load_layout("whole_body"))
    cells = both.coverage.groupby("species")["slot"].apply(list).to_dict()
    assert cells["rainbow_trout"] == [p.id for p in fish] and cells["rat"] == [p.id for p in mammal]
    states = both.matrix("state")
    assert states.loc[("rainbow_trout", "adult"), "lung.volume"] == NOT_IN_LAYOUT
    assert states.loc[("rat", "adult"), "gills.blood_flow"] == NOT_IN_LAYOUT
    total = both.readiness.set_index("species")["total"]
    ps = store.parameter_set("rainbow_trout")
    assert total["rainbow_trout"] == sum(1 for c, _, cell in ps.cells()
                                         if c != "rest_of_body" and cell.origin != "not_applicable")
    assert gap_report(store, ["rat"]).layout == "whole_body"


def test_what_each_species_waits_on(report):
    ready = report.readiness.set_index("species")
    assert "body_mass" in ready.loc[EMPTY, "waits_on"].split(", ")
    for row in ready.itertuples():
        assert (row.waits_on == "") == (row.readiness == 1.0), row.Index


def test_the_report_shows_which_kp_methods_each_species_composition_allows(real_store):
    """Per species, the tissues whose own composition holds every input a Kp method needs, counted here by
    hand from the composition rows; a species without plasma lipids can run no tissue at all, and the
    report says what to curate."""
    from bodyplan.api.partition import PLASMA, listed_tissues, species_composition

    report = real_store.gap_report(["human", "rat", "pig"])
    rows = report.composition.set_index("species")
    for species in ("human", "rat", "pig"):
        own = species_composition(real_store, species)
        plasma = all((PLASMA, r) in own for r in ("water", "neutral_lipid", "neutral_phospholipid"))
        by_hand = sum(all((t, r) in own for r in ("water", "neutral_lipid", "neutral_phospholipid"))
                      for t in listed_tissues({}, []))
        assert rows.loc[species, "poulin_theil"] == (by_hand if plasma else 0), species
    assert rows.loc["human", "poulin_theil"] > 0  # human plasma and tissue lipids are stored
    assert "plasma" in rows.loc["rat", "to_curate"]  # rat plasma lipids are not
    assert {r["species"] for r in report.to_dict()["composition"]} == {"human", "rat", "pig"}
