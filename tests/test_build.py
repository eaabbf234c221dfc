"""The check/build/info commands over the good fixture tree and the bundled curated files."""

from __future__ import annotations

import json
import shutil
import sqlite3

import pytest
from click.testing import CliRunner

from bodyplan.cli import cli
from bodyplan.ingest import build

V = "values/testsource2020.csv"


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def test_check_clean_tree_exits_0(fixture_tree):
    result = run("check", fixture_tree)
    assert result.exit_code == 0, result.output
    assert result.stdout == ""
    assert result.stderr.endswith(": 12 value rows in 12 files: 0 error(s), 0 warning(s)\n")


def test_check_errors_exit_1(scenario_tree):
    tree = scenario_tree("bad/negative_mass")
    result = run("check", tree)
    assert result.exit_code == 1
    assert result.stdout == f"{V}:3: value: -350 is negative; physiological amounts are never below 0 [V216]\n"


def test_check_warnings_only_exit_2_and_strict_exit_1(scenario_tree):
    tree = scenario_tree("warn/out_of_range")
    loose = run("check", tree)
    assert loose.exit_code == 2
    assert loose.stdout.startswith(f"{V}:2: value: warning: 12000 kg lies outside the plausible range")
    strict = run("check", "--strict", tree)
    assert strict.exit_code == 1
    assert strict.stdout == loose.stdout


def test_build_prints_what_it_built(fixture_tree, tmp_path):
    out = tmp_path / "store.sqlite"
    result = run("build", fixture_tree, "--out", out)
    assert result.exit_code == 0, result.output
    conn = sqlite3.connect(out)
    digest = conn.execute("SELECT value FROM build_info WHERE key = 'content_hash'").fetchone()[0]
    assert result.stdout == f"built {out}: 12 values, 3 species, 2 sources; content hash {digest[:16]}\n"
    assert conn.execute("SELECT count(*) FROM curated_values").fetchone()[0] == 12


def test_failed_build_leaves_previous_store_byte_identical(fixture_tree, tmp_path):
    (tmp_path / "stores").mkdir()
    out = tmp_path / "stores" / "store.sqlite"
    assert run("build", fixture_tree, "--out", out).exit_code == 0
    before = out.read_bytes()
    path = fixture_tree / V
    path.write_text(path.read_text().replace("dog_co,dog,", "dog_co,dgo,"))
    result = run("build", fixture_tree, "--out", out)
    assert result.exit_code == 1
    assert f"{V}:8: species: unknown species 'dgo'" in result.stderr
    assert result.stderr.endswith(f"error: 1 error(s); {out} left unchanged\n")
    assert out.read_bytes() == before
    assert sorted(p.name for p in out.parent.iterdir()) == ["store.sqlite"]  # no temporary file left


def test_build_failing_while_writing_leaves_previous_store(fixture_tree, tmp_path, monkeypatch):
    import bodyplan.ingest.build_store as build_store

    (tmp_path / "stores").mkdir()
    out = tmp_path / "stores" / "store.sqlite"
    build(fixture_tree, out)
    before = out.read_bytes()

    def broken(tree, frame, path):
        path.write_bytes(b"half a store")
        raise OSError("disk full")

    monkeypatch.setattr(build_store, "write_store", broken)
    with pytest.raises(OSError):
        build(fixture_tree, out)
    assert out.read_bytes() == before
    assert sorted(p.name for p in out.parent.iterdir()) == ["store.sqlite"]


def test_same_files_same_content_hash(fixture_tree, tmp_path):
    first = build(fixture_tree, tmp_path / "a.sqlite")
    copy = shutil.copytree(fixture_tree, tmp_path / "elsewhere")
    second = build(copy, tmp_path / "b.sqlite")
    assert first.content_hash == second.content_hash
    assert len(first.content_hash) == 64


def test_changed_value_changes_content_hash(fixture_tree, tmp_path):
    first = build(fixture_tree, tmp_path / "a.sqlite")
    path = fixture_tree / V
    path.write_text(path.read_text().replace(",350,g,", ",351,g,"))
    assert build(fixture_tree, tmp_path / "b.sqlite").content_hash != first.content_hash


def test_info_json(fixture_tree, tmp_path):
    out = build(fixture_tree, tmp_path / "store.sqlite").path
    result = run("info", "--format", "json", "--store", out)
    assert result.exit_code == 0, result.output
    info = json.loads(result.stdout)
    assert info["values"] == 12
    assert info["species"] == 3
    assert info["sources"] == 2
    assert info["species_with_data"] == 3  # dog, human and rat each have a value
    assert info["values_with_uncertainty"] == 10
    assert info["content_hash"] == sqlite3.connect(out).execute(
        "SELECT value FROM build_info WHERE key = 'content_hash'").fetchone()[0]


def test_info_without_store_is_one_clean_line(tmp_path):
    from bodyplan.cli import main

    with pytest.raises(SystemExit) as caught:
        main(["info", "--store", str(tmp_path / "absent.sqlite")])
    assert caught.value.code == 1


def test_bundled_store_builds(bundled_store):
    conn = sqlite3.connect(bundled_store)
    values = conn.execute("SELECT count(*) FROM curated_values").fetchone()[0]
    sources = {r[0] for r in conn.execute("SELECT id FROM sources")}
    used = {r[0] for r in conn.execute("SELECT DISTINCT source_id FROM curated_values")}
    assert values > 0
    assert used <= sources


def test_content_hash_is_the_hash_of_the_stored_rows(fixture_tree, tmp_path, bundled_store):
    from bodyplan.ingest.build_store import content_hash

    path = fixture_tree / V
    path.write_text(path.read_text().replace(",20,%,none,", ",-0,%,none,"))  # -0 is stored as 0
    result = build(fixture_tree, tmp_path / "store.sqlite")
    assert content_hash(sqlite3.connect(result.path)) == result.content_hash
    stored = sqlite3.connect(bundled_store).execute(
        "SELECT value FROM build_info WHERE key = 'content_hash'").fetchone()[0]
    assert content_hash(sqlite3.connect(bundled_store)) == stored
