"""diff between two stores, and export as a Frictionless data package."""

from __future__ import annotations

import csv
import json
import math
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from bodyplan.api import open_store
from bodyplan.api.diff import diff_stores
from bodyplan.api.export import ExportError, export_store
from bodyplan.cli import cli
from bodyplan.ingest import build

FIXTURE = Path(__file__).parent / "data" / "curator"


@pytest.fixture(scope="module")
def base_store(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("base") / "old.sqlite"
    build(FIXTURE, out)
    return out


def edited_store(tmp_path: Path, edit) -> Path:
    root = tmp_path / "tree"
    shutil.copytree(FIXTURE, root)
    edit(root)
    out = tmp_path / "new.sqlite"
    build(root, out)
    return out


# --- diff ------------------------------------------------------------------------------------------

def test_diff_of_a_store_with_itself_is_empty(base_store):
    result = diff_stores(open_store(base_store), open_store(base_store))
    assert result.is_empty
    assert result.to_dict()["summary"] == {"values_added": 0, "values_removed": 0, "values_changed": 0,
                                           "sources_added": 0, "sources_removed": 0}
    out = CliRunner().invoke(cli, ["diff", str(base_store), str(base_store), "--format", "markdown"])
    assert "No changes." in out.output


def test_diff_reports_exactly_one_edited_value(base_store, tmp_path):
    def edit(root):
        path = root / "values" / "testb2001.csv"
        path.write_text(path.read_text().replace("whole_body,gfr,,,,3.2,", "whole_body,gfr,,,,3.4,"))

    new = edited_store(tmp_path, edit)
    result = diff_stores(open_store(base_store), open_store(new))
    assert result.added.empty and result.removed.empty
    assert result.changed == [{"source_id": "testb2001", "row_id": "gfr", "species_id": "dog",
                               "changes": {"value": [3.2, 3.4], "value_canonical": [0.192, pytest.approx(0.204)]}}]
    assert result.old_build["content_hash"] != result.new_build["content_hash"]
    md = CliRunner().invoke(cli, ["diff", str(base_store), str(new), "--format", "markdown"]).output
    assert "| testb2001 | gfr | dog | value | 3.2 | 3.4 |" in md
    assert "| dog | 0 | 0 | 1 |" in md
    assert result.old_build["content_hash"] in md and result.new_build["content_hash"] in md


def test_diff_ignores_moved_rows(base_store, tmp_path):
    def edit(root):  # reverse the rows: same values at other lines
        path = root / "values" / "testa2000.csv"
        lines = path.read_text().splitlines()
        path.write_text("\n".join([lines[0], *reversed(lines[1:])]) + "\n")

    assert diff_stores(open_store(base_store), open_store(edited_store(tmp_path, edit))).is_empty


def test_diff_added_removed_and_sources(base_store, tmp_path):
    def edit(root):
        (root / "values" / "testc2002.csv").unlink()
        bib = root / "sources.bib"
        bib.write_text(bib.read_text().split("@misc{testc2002")[0].rstrip() + "\n\n@misc{testd2003,\n"
                       "  title = {Invented source D for the bodyplan tests},\n  year = {2003}\n}\n")
        (root / "values" / "testd2003.csv").write_text(
            (root / "values" / "testa2000.csv").read_text().splitlines()[0] + "\n"
            "hct,dog,adult,,mixed,,,,blood,hematocrit,,,,45,%,none,,,,,,4,,,,,measured,Table 1,no,,invented for tests\n")

    result = diff_stores(open_store(base_store), open_store(edited_store(tmp_path, edit)))
    assert [s["id"] for s in result.sources_added] == ["testd2003"]
    assert [s["id"] for s in result.sources_removed] == ["testc2002"]
    assert list(result.added["row_id"]) == ["hct"] and list(result.added["value"]) == [45.0]
    assert sorted(result.removed["row_id"]) == ["co", "gfr", "gfr_m2", "hct", "liver"]
    per = result.per_species().set_index("species")
    assert per.loc["dog"].tolist() == [1, 2, 0] and per.loc["human"].tolist() == [0, 3, 0]
    data = json.loads(CliRunner().invoke(cli, ["diff", str(base_store), str(tmp_path / "new.sqlite"),
                                               "--format", "json"]).output)
    assert data["summary"]["values_removed"] == 5 and data["sources_added"][0]["id"] == "testd2003"


# --- export ----------------------------------------------------------------------------------------

def _stored(store, table, columns):
    cols = ", ".join(f'"{c}"' for c in columns)
    return store.query(f'SELECT {cols} FROM "{table}"')


def test_export_csv_round_trips(base_store, tmp_path):
    out = tmp_path / "export"
    result = CliRunner().invoke(cli, ["export", "--store", str(base_store), "--out", str(out)])
    assert result.exit_code == 0, result.output
    package = json.loads((out / "datapackage.json").read_text())
    store = open_store(base_store)
    for resource in package["resources"]:
        fields = resource["schema"]["fields"]
        with open(out / resource["path"], newline="", encoding="utf-8") as f:
            exported = list(csv.reader(f))
        assert exported[0] == [fl["name"] for fl in fields]
        key = resource["schema"]["primaryKey"]
        stored = {tuple(r[k] for k in key): r for r in _stored(store, resource["name"], exported[0])}
        assert len(exported) - 1 == len(stored)
        for row in exported[1:]:
            record = dict(zip(exported[0], row))
            original = stored[tuple(record[k] for k in key)]
            for fl in fields:
                text, value = record[fl["name"]], original[fl["name"]]
                if value is None:
                    assert text == ""
                elif fl["type"] == "number":
                    assert float(text) == value
                elif fl["type"] == "integer":
                    assert int(text) == value
                elif fl["type"] == "boolean":
                    assert text == ("true" if value else "false")
                else:
                    assert text == value


def test_export_csv_package_validates_with_frictionless(base_store, tmp_path):
    frictionless = pytest.importorskip("frictionless")
    descriptor = export_store(open_store(base_store), tmp_path, "csv")
    report = frictionless.validate(str(descriptor))  # descriptor, every row against its schema, foreign keys
    assert report.valid, report.flatten(["title", "message"])[:5]
    rows = {task.name: task.stats.get("rows", 0) for task in report.tasks}
    assert rows["curated_values"] == 17 and rows["species"] == 3 and rows["input_files"] == 13


def test_export_json_descriptor_is_valid(base_store, tmp_path):
    # reading JSON tables needs the frictionless[json] extra; the descriptor itself is checked here
    frictionless = pytest.importorskip("frictionless")
    descriptor = export_store(open_store(base_store), tmp_path, "json")
    report = frictionless.Package.validate_descriptor(json.loads(descriptor.read_text()))
    assert report.valid, report.flatten(["message"])[:5]


def test_export_descriptor_catches_a_broken_table(base_store, tmp_path):
    frictionless = pytest.importorskip("frictionless")
    descriptor = export_store(open_store(base_store), tmp_path, "csv")
    path = tmp_path / "curated_values.csv"
    path.write_text(path.read_text().replace(",3.2,mL/min/kg,", ",three,mL/min/kg,"))
    assert not frictionless.validate(str(descriptor)).valid


def test_export_json_keeps_numbers(base_store, tmp_path):
    export_store(open_store(base_store), tmp_path, "json")
    rows = json.loads((tmp_path / "curated_values.json").read_text())
    gfr = next(r for r in rows if (r["source_id"], r["row_id"]) == ("testb2001", "gfr"))
    assert gfr["value"] == 3.2 and gfr["value_canonical"] == pytest.approx(0.192) and gfr["verified"] is False
    missing = next(r for r in rows if r["row_id"] == "gfr_m2")
    assert missing["value"] is None and missing["missing_reason"] == "not measured in this study"
    assert not any(isinstance(v, float) and math.isnan(v) for r in rows for v in r.values())


def test_export_refuses_an_unknown_format(base_store, tmp_path):
    with pytest.raises(ExportError, match="use csv or json"):
        export_store(open_store(base_store), tmp_path / "p", "parquet")
    assert not (tmp_path / "p").exists()
