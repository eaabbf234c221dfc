"""Bad input at the command line: one row per case, each a clean located error line, a non-zero exit
and nothing written; never silence, a hang, a wrong number or an overwritten input.

Every tree here is a copy of tests/data/good/ (numbers invented for tests); stores are built from it
into tmp_path.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pytest

from bodyplan.cli import main

V = "values/testsource2020.csv"


def run(argv, capsys) -> tuple[int, str, str]:
    capsys.readouterr()
    try:
        main([str(a) for a in argv])
        code = 0
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else 1
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def store(bundled_store) -> Path:
    return bundled_store  # the guards under test keep it unchanged (a test below checks its bytes)


def edit(path: Path, old: str, new: str) -> None:
    text = path.read_text(encoding="utf-8")
    assert old in text, old
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


@dataclass
class Case:
    """argv(tree, store, tmp) after setup(tree, store, tmp); the error line must contain ``error``."""

    argv: Callable
    error: str
    code: int = 1
    setup: Callable = lambda tree, store, tmp: None
    unchanged: Callable = lambda tree, store, tmp: []  # files whose bytes must not change
    absent: Callable = lambda tree, store, tmp: []  # files that must not appear
    env: dict = field(default_factory=dict)


def _unclosed_quote(tree, store, tmp):
    edit(tree / V, "Table 2,no,,invented for tests\ndog_liver_frac", 'Table 2,no,,"invented for tests\ndog_liver_frac')


def _symlink_out(tree, store, tmp):
    secret = tmp / "outside.csv"
    secret.write_text("first line of a file outside the tree\n")
    (tree / "values" / "testsource2021.csv").unlink()
    (tree / "values" / "testsource2021.csv").symlink_to(secret)


def _hash_dir(tree, store, tmp):
    folder = tmp / "a #b?c"
    folder.mkdir()
    shutil.copy(store, folder / "s#1?.sqlite")


CASES = {
    # silent data loss: an unclosed quote used to swallow the rest of the file into one cell
    "unclosed quote: check": Case(lambda t, s, x: ["check", t], f"{V}:3: row: a quote opened on this line is never "
                                  "closed", setup=_unclosed_quote),
    "unclosed quote: build": Case(lambda t, s, x: ["build", t, "--out", x / "new.sqlite"], "quote opened on this line",
                                  setup=_unclosed_quote, absent=lambda t, s, x: [x / "new.sqlite"]),
    "unclosed quote: lint": Case(lambda t, s, x: ["lint", t], f"{V}:3: a quote opened on this line is never closed",
                                 setup=_unclosed_quote, unchanged=lambda t, s, x: [t / V]),
    # silent wrong numbers
    "decimal comma": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "4,5 kg"],
                          "use '.' as the decimal point"),
    "unit only": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "kg"],
                      "does not start with a number"),
    "emoji": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "\U0001f415 kg"],
                  "does not start with a number"),
    "nan": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "nan kg"], "does not start with a number"),
    "overflow into JSON": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "1e308 kg",
                                                "--units", "clinical", "--format", "json"],
                               "too large to represent"),
    "no number at all": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "-12 kg"], "is negative"),
    # hangs: pint would evaluate the power tower
    "power tower in a unit cell": Case(lambda t, s, x: ["check", t], "exponents are whole numbers from -4 to 4",
                                       setup=lambda t, s, x: edit(t / V, ",12,kg,sd,", ",12,g**9**9**9,sd,")),
    "overflow on conversion": Case(lambda t, s, x: ["check", t], f"{V}:8: value: 1e308 L/min is too large once "
                                   "converted to L/h", setup=lambda t, s, x: edit(t / V, ",2.4,L/min,ci95,,2.0,2.8,",
                                                                                 ",1e308,L/min,none,,,,")),
    "power tower in --body-mass": Case(lambda t, s, x: ["params", "dog", "--store", s, "--body-mass", "1 g**9**9**9"],
                                       "exponents are whole numbers"),
    # overwrites
    "params --out is its store": Case(lambda t, s, x: ["params", "dog", "--store", s, "--out", s, "--force"],
                                      "which this command reads", unchanged=lambda t, s, x: [s]),
    "build --out a curated file": Case(lambda t, s, x: ["build", t, "--out", t / "sources.bib", "--force"],
                                       "which this command reads", unchanged=lambda t, s, x: [t / "sources.bib"]),
    "build --out a text file": Case(lambda t, s, x: ["build", t, "--out", x / "notes.txt"],
                                    "is a text file, not the sqlite file",
                                    setup=lambda t, s, x: (x / "notes.txt").write_text("my notes\n"),
                                    unchanged=lambda t, s, x: [x / "notes.txt"]),
    "params --out a store": Case(lambda t, s, x: ["params", "dog", "--store", s, "--format", "json", "--out",
                                                  x / "other.sqlite"], "is a sqlite file",
                                 setup=lambda t, s, x: shutil.copy(s, x / "other.sqlite"),
                                 unchanged=lambda t, s, x: [x / "other.sqlite"]),
    "params --out another format": Case(lambda t, s, x: ["params", "dog", "--store", s, "--format", "json", "--out",
                                                         x / "model.csv"], "does not end in .json",
                                        setup=lambda t, s, x: (x / "model.csv").write_text("a,b\n"),
                                        unchanged=lambda t, s, x: [x / "model.csv"]),
    "gaps --out the store": Case(lambda t, s, x: ["gaps", "--store", s, "--out", s], "write a .html report", code=2,
                                 unchanged=lambda t, s, x: [s]),
    "allometry --out a text file": Case(lambda t, s, x: ["allometry", "body_mass", "--store", s, "--out",
                                                         x / "plot.png"], "is a text file, not the png file",
                                        setup=lambda t, s, x: (x / "plot.png").write_text("not a picture\n"),
                                        unchanged=lambda t, s, x: [x / "plot.png"]),
    "export --out a curated folder": Case(lambda t, s, x: ["export", "--store", s, "--out", t / "vocab"],
                                          "already holds files", unchanged=lambda t, s, x: [t / "vocab/species.csv"]),
    # small ones
    "unknown species": Case(lambda t, s, x: ["values", "--store", s, "--species", "unicorn"],
                            "unknown species 'unicorn' (--species); valid choices: alpaca, atlantic_salmon"),
    "unknown life stage": Case(lambda t, s, x: ["params", "dog", "--store", s, "--life-stage", "teen"],
                               "unknown life stage 'teen' (--life-stage); valid choices:"),
    "unknown sex": Case(lambda t, s, x: ["trace", "dog", "body_mass", "--store", s, "--sex", "males"],
                        "unknown sex 'males' (--sex); valid choices: male, female, mixed, unknown"),
    "unknown quantity": Case(lambda t, s, x: ["trace", "dog", "weight", "--store", s],
                             "unknown quantity 'weight'; valid choices:"),
    "unknown compartment": Case(lambda t, s, x: ["values", "--store", s, "--compartment", "livr"],
                                "unknown compartment 'livr' (--compartment); valid choices:"),
    "unknown class": Case(lambda t, s, x: ["allometry", "body_mass", "--store", s, "--class", "reptiles"],
                          "'reptiles' is not one of", code=2),
    "negative age": Case(lambda t, s, x: ["check", t], f"{V}:2: age:",
                         setup=lambda t, s, x: edit(t / V, "dog_bm,dog,adult,3 year", "dog_bm,dog,adult,-3 year")),
    "no values folder": Case(lambda t, s, x: ["build", t, "--out", x / "new.sqlite"], "values/:0: directory: is "
                             "missing", setup=lambda t, s, x: shutil.rmtree(t / "values"),
                             absent=lambda t, s, x: [x / "new.sqlite"]),
    "symlink out of the tree": Case(lambda t, s, x: ["check", t], "values/testsource2021.csv:0: file: is a symbolic "
                                    "link to", setup=_symlink_out),
    "--store a text file": Case(lambda t, s, x: ["info", "--store", t / "sources.bib"], "is not a bodyplan store"),
    "--store another database": Case(lambda t, s, x: ["info", "--store", x / "other.sqlite"],
                                     "is an SQLite file but not a bodyplan store",
                                     setup=lambda t, s, x: sqlite3.connect(x / "other.sqlite").execute(
                                         "CREATE TABLE t (a)").connection.commit()),
    "lint through a symlink": Case(lambda t, s, x: ["lint", t], "values/testsource2021.csv:0: is a symbolic link",
                                   setup=_symlink_out, unchanged=lambda t, s, x: [x / "outside.csv"]),
    "unknown finding code": Case(lambda t, s, x: ["check", "--explain", "Z999"], "unknown finding code 'Z999'"),
    "usage error": Case(lambda t, s, x: ["params", "dog", "--store", s, "--no-such-option"],
                        "error: No such option '--no-such-option'", code=2),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_input_is_one_clean_line(name, fixture_tree, store, tmp_path, capsys, monkeypatch):
    case = CASES[name]
    for key, value in case.env.items():
        monkeypatch.setenv(key, value)
    case.setup(fixture_tree, store, tmp_path)
    before = {p: p.read_bytes() for p in case.unchanged(fixture_tree, store, tmp_path)}
    code, out, err = run(case.argv(fixture_tree, store, tmp_path), capsys)
    assert code == case.code, (out, err)
    text = out + err
    assert case.error in text, text
    assert "Traceback" not in text and "internal error" not in text
    lines = [line for line in err.splitlines() if line.startswith("error:")]
    assert len(lines) <= 1, err  # one clean error line (located findings are their own lines)
    for path, data in before.items():
        assert path.read_bytes() == data, f"{path} changed"
    for path in case.absent(fixture_tree, store, tmp_path):
        assert not path.exists(), path


def test_symlinked_file_is_not_printed(fixture_tree, store, tmp_path, capsys):
    _symlink_out(fixture_tree, store, tmp_path)
    code, out, err = run(["check", fixture_tree], capsys)
    assert code == 1 and "first line of a file outside" not in out + err


def test_crlf_cr_and_bom_read_as_lint_writes_them(fixture_tree, capsys):
    from bodyplan.ingest import check

    expected = len(check(fixture_tree)[2])
    for variant in ("\r\n", "\r", "bom"):
        path = fixture_tree / V
        text = path.read_text(encoding="utf-8").replace("\r\n", "\n").replace("\r", "\n").removeprefix("\ufeff")
        path.write_text("\ufeff" + text if variant == "bom" else text.replace("\n", variant), encoding="utf-8",
                        newline="")
        findings, _, frame = check(fixture_tree)
        assert [str(f) for f in findings.sorted()] == [] and len(frame) == expected, variant


def test_sex_matches_case_insensitively(store, capsys):
    upper = run(["trace", "dog", "body_mass", "--store", store, "--sex", "Male", "--format", "csv"], capsys)
    lower = run(["trace", "dog", "body_mass", "--store", store, "--sex", "male", "--format", "csv"], capsys)
    assert upper[0] == 0 and upper[1] == lower[1] and "dog_bm" in upper[1]


def test_deprecated_spellings_still_work_with_a_note(store, capsys):
    old = run(["params", "dog", "--store", store, "--stage", "adult", "--body-weight", "12 kg", "--format", "json"],
              capsys)
    new = run(["params", "dog", "--store", store, "--life-stage", "adult", "--body-mass", "12 kg", "--format", "json"],
              capsys)
    assert old[0] == new[0] == 0 and old[1] == new[1]
    assert "--stage is deprecated" in old[2] and "--body-weight is deprecated" in old[2]
    assert "deprecated" not in new[2]


def test_store_paths_with_hash_and_question_mark(store, tmp_path, capsys):
    _hash_dir(None, store, tmp_path)
    path = tmp_path / "a #b?c" / "s#1?.sqlite"
    code, out, err = run(["info", "--store", path, "--format", "json"], capsys)
    assert code == 0, err
    assert sorted(p.name for p in (tmp_path / "a #b?c").iterdir()) == ["s#1?.sqlite"]  # no stray file


def test_build_into_a_folder_with_hash_and_question_mark(fixture_tree, tmp_path, capsys):
    out = tmp_path / "x #y?z" / "s.sqlite"
    code, _, err = run(["build", fixture_tree, "--out", out], capsys)
    assert code == 0, err
    assert sorted(p.name for p in out.parent.iterdir()) == ["s.sqlite"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["curated", "x #y?z"]


def test_stale_temporary_store_is_removed_at_the_next_build(fixture_tree, tmp_path):
    from bodyplan.ingest import build

    out = tmp_path / "store.sqlite"
    dead = tmp_path / ".store.sqlite.999999999.abcd.tmp"  # no such pid: its build was killed
    old_style = tmp_path / ".store.sqlite.k2j3h4.tmp"
    live = tmp_path / f".store.sqlite.{os.getpid()}.efgh.tmp"  # a build still running keeps its file
    for p in (dead, old_style, live):
        p.write_bytes(b"")
    build(fixture_tree, out)
    assert not dead.exists() and not old_style.exists() and live.exists()


def test_programming_error_is_an_internal_error(store, capsys, monkeypatch):
    import bodyplan.api.store as store_module

    def broken(self, species, **options):
        raise KeyError("a bug")

    monkeypatch.setattr(store_module.Store, "parameter_set", broken)
    code, out, err = run(["params", "dog", "--store", store], capsys)
    assert code == 3
    assert err.startswith("error: internal error (a bodyplan bug") and "--debug" in err


def test_user_error_is_not_internal(store, capsys):
    code, _, err = run(["params", "dog", "--store", store, "--layout", "no_such_layout"], capsys)
    assert code == 1 and err.startswith("error: ") and "internal" not in err


def test_every_library_exception_has_one_root():
    import inspect

    import bodyplan.api.allometry
    import bodyplan.api.export
    import bodyplan.api.layouts
    import bodyplan.api.locate
    import bodyplan.api.parameters
    import bodyplan.api.store
    import bodyplan.ingest.findings
    import bodyplan.ingest.lint
    import bodyplan.ingest.scaffold
    import bodyplan.units
    from bodyplan.errors import BodyplanError

    modules = [bodyplan.api.allometry, bodyplan.api.export, bodyplan.api.layouts, bodyplan.api.locate,
               bodyplan.api.parameters, bodyplan.api.store, bodyplan.ingest.findings, bodyplan.ingest.lint,
               bodyplan.ingest.scaffold, bodyplan.units]
    found = [obj for m in modules for _, obj in inspect.getmembers(m, inspect.isclass)
             if issubclass(obj, BaseException) and obj.__module__ == m.__name__]
    assert len(found) >= 10
    assert [c.__name__ for c in found if not issubclass(c, BodyplanError)] == []
    from bodyplan.units import UnitError
    assert issubclass(UnitError, ValueError)  # callers catching the builtin keep working


def test_no_class_error_outside_the_root():
    """Every `class …Error` in the source subclasses BodyplanError (grep over the package)."""
    import re

    root = Path(__file__).parent.parent
    offenders = []
    for path in [*root.glob("api/*.py"), *root.glob("ingest/*.py"), *root.glob("units/*.py"),
                 *root.glob("schema/*.py"), *root.glob("src/bodyplan/**/*.py")]:
        for m in re.finditer(r"^class (\w+Error)\(([^)]*)\)", path.read_text(encoding="utf-8"), re.M):
            if "BodyplanError" not in m.group(2) and m.group(1) != "BodyplanError":
                offenders.append(f"{path.name}: {m.group(0)}")
    assert offenders == []


def test_store_is_opened_read_only_by_uri(store):
    import bodyplan

    s = bodyplan.open_store(store)
    with pytest.raises(sqlite3.OperationalError):
        s.conn.execute("CREATE TABLE x (a)")


def test_cache_folder_with_hash_and_question_mark(tmp_path, capsys, monkeypatch):
    """The bundled files built into a cache whose path holds '#' and '?': every command still works."""
    cache = tmp_path / "cache #1?x"
    monkeypatch.setenv("XDG_CACHE_HOME", str(cache))
    monkeypatch.delenv("BODYPLAN_STORE", raising=False)
    code, out, err = run(["info", "--format", "json"], capsys)
    assert code == 0, err
    assert '"values"' in out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cache #1?x"]  # no stray file beside it
    stores = list((cache / "bodyplan").glob("store-*.sqlite"))
    assert len(stores) == 1 and sorted(p.name for p in (cache / "bodyplan").iterdir()) == [stores[0].name]
