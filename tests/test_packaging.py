"""pyproject's package mapping: every mapped folder with Python files is a listed package, and the
package data globs carry every curated file the ingest reads (so an installed copy can build its store)."""

from __future__ import annotations

import tomllib
from pathlib import Path, PurePosixPath

import pytest

ROOT = Path(__file__).resolve().parents[1]
CONFIG = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]
PACKAGES = set(CONFIG["packages"])
PACKAGE_DIR = CONFIG["package-dir"]
PACKAGE_DATA = CONFIG.get("package-data", {})


def python_folders():
    """(import name, folder) of every folder under a mapped folder that holds .py files."""
    found = []
    for name, folder in PACKAGE_DIR.items():
        base = ROOT / folder
        for path in sorted([base, *(p for p in base.rglob("*") if p.is_dir())]):
            if "__pycache__" in path.parts or not any(path.glob("*.py")):
                continue
            rel = path.relative_to(base).parts
            found.append((".".join((name, *rel)), path.relative_to(ROOT)))
    return found


@pytest.mark.parametrize("package, folder", python_folders(), ids=[p for p, _ in python_folders()])
def test_python_folder_is_a_listed_package(package, folder):
    assert package in PACKAGES, f"{folder} holds Python files; add {package!r} to [tool.setuptools] packages"
    assert (ROOT / folder / "__init__.py").exists(), f"{folder} needs an __init__.py to be package {package}"


def test_every_listed_package_has_a_folder():
    for package in PACKAGES:
        parent = max((n for n in PACKAGE_DIR if package == n or package.startswith(n + ".")), key=len)
        folder = ROOT / PACKAGE_DIR[parent] / Path(*package[len(parent):].split(".")[1:])
        assert folder.is_dir(), f"{package} is listed but {folder} does not exist"
        if any(folder.glob("*.py")):  # data-only folders (vocab/, templates/) are listed so their files ship
            assert (folder / "__init__.py").exists(), f"{package} is listed but {folder} has no __init__.py"


def covered(package: str, rel: PurePosixPath) -> bool:
    return any(rel.match(glob) and len(rel.parts) == len(PurePosixPath(glob).parts)
               for glob in PACKAGE_DATA.get(package, []))


def test_package_data_covers_the_curated_files():
    from bodyplan.ingest.read import BIB_FILE, VALUES_DIR, VOCAB_DIR

    base = ROOT / PACKAGE_DIR["bodyplan.data_curated"]
    read = [base / BIB_FILE, *sorted(base.glob("*.csv")), *sorted((base / VOCAB_DIR).glob("*.csv")),
            *sorted((base / VALUES_DIR).glob("*.csv"))]
    assert {"groups.csv", "check_baseline.csv"} <= {p.name for p in base.glob("*.csv")}  # root tables ship too
    layouts = sorted((base / "layouts").glob("*")) if (base / "layouts").exists() else []
    assert len(read) > 5
    missing = [str(p.relative_to(base)) for p in read + layouts
               if not covered("bodyplan.data_curated", PurePosixPath(p.relative_to(base).as_posix()))]
    assert missing == [], f"add globs to [tool.setuptools.package-data] 'bodyplan.data_curated' for {missing}"


def test_package_data_covers_the_unit_definitions():
    assert covered("bodyplan.units", PurePosixPath("definitions.txt"))


def test_readme_python_example_runs_from_the_repository_root(bundled_store):
    """No folder at the root shadows the installed package: the README's Python block runs where the
    quick start leaves a newcomer."""
    import os
    import re
    import subprocess
    import sys

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    block = re.search(r"```python\n(.*?)```", readme, re.S).group(1)
    assert "open_store" in block
    done = subprocess.run([sys.executable, "-c", block + "\nprint('example ran')"], cwd=ROOT, text=True,
                          capture_output=True, env=dict(os.environ, BODYPLAN_STORE=str(bundled_store)), timeout=300)
    assert done.returncode == 0, done.stderr
    assert "example ran" in done.stdout
