"""Find the store: an explicit path, $BODYPLAN_STORE, else build the bundled files into the cache."""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

from ..errors import BodyplanError


class StoreNotFoundError(BodyplanError, FileNotFoundError):
    """No store at the path given."""


def sqlite_uri(path: str | os.PathLike, mode: str = "ro") -> str:
    """A proper SQLite URI for ``path``: '#', '?', '%' and spaces in folder or file names are
    percent-encoded, so they never cut the path short or create a stray file."""
    return f"{Path(path).absolute().as_uri()}?mode={mode}"


def bundled_data_dir() -> Path:
    from importlib.resources import files  # imported here: a command given a store never needs it

    return Path(str(files("bodyplan.data_curated")))


def cache_dir() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache"
    return Path(base) / "bodyplan"


def inputs_fingerprint(root: Path) -> str:
    """Hash of every curated file's path and bytes: the cache key of the built store."""
    digest = hashlib.sha256()
    for path in sorted(p for p in root.rglob("*") if p.suffix in (".csv", ".bib") and p.is_file()):
        digest.update(str(path.relative_to(root)).encode())
        digest.update(path.read_bytes())
    return digest.hexdigest()[:16]


def locate_store(path: str | os.PathLike | None = None) -> Path:
    if path is None:
        path = os.environ.get("BODYPLAN_STORE") or None
    if path is not None:
        path = Path(path)
        if not path.is_file():
            raise StoreNotFoundError(f"no store at {path}; build one with 'bodyplan build --out {path}'")
        return path
    root = bundled_data_dir()
    target = cache_dir() / f"store-{inputs_fingerprint(root)}.sqlite"
    if not target.exists():
        from ..ingest import build

        build(root, target)
        for old in target.parent.glob("store-*.sqlite"):  # earlier builds of changed files
            if old != target:
                old.unlink(missing_ok=True)
    return target
