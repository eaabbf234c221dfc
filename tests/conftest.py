"""Shared fixtures: the small good tree of tests/data/good/ and a store built from the bundled files."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
GOOD = DATA / "good"


def make_tree(dest: Path, *overlays: Path) -> Path:
    """Copy the good tree to ``dest`` and lay each overlay folder over it (its files replace or add)."""
    shutil.copytree(GOOD, dest)
    for overlay in overlays:
        shutil.copytree(overlay, dest, dirs_exist_ok=True)
    return dest


@pytest.fixture
def fixture_tree(tmp_path) -> Path:
    """A private copy of tests/data/good/ that a test may edit."""
    return make_tree(tmp_path / "curated")


@pytest.fixture(scope="session")
def bundled_store(tmp_path_factory) -> Path:
    """The bundled curated files built into a temporary store; nothing global is set."""
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import build

    out = tmp_path_factory.mktemp("bundled") / "bodyplan.sqlite"
    build(bundled_data_dir(), out)
    return out


@pytest.fixture(scope="session")
def real_store(bundled_store):
    """The bundled store, open (read-only use)."""
    import bodyplan

    return bodyplan.open_store(bundled_store)


@pytest.fixture
def scenario_tree(tmp_path):
    """A function: scenario folder under tests/data/ (e.g. 'bad/duplicate_id') → good tree with it laid over."""
    def make(name: str) -> Path:
        return make_tree(tmp_path / name.replace("/", "_"), DATA / name)
    return make



@pytest.fixture(scope="session")
def store_from_tree(tmp_path_factory):
    """A function: a tree's values/ and sources.bib over the bundled vocabularies → the open store."""
    import bodyplan
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import build

    def make(tree: Path):
        root = tmp_path_factory.mktemp(tree.name)
        shutil.copytree(bundled_data_dir() / "vocab", root / "vocab")
        shutil.copytree(tree / "values", root / "values")
        shutil.copy(tree / "sources.bib", root / "sources.bib")
        build(root, root / "store.sqlite")
        return bodyplan.open_store(root / "store.sqlite")
    return make
