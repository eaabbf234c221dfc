"""Layouts: which stored compartments make up each model compartment."""

from __future__ import annotations

from ..errors import BodyplanError

import tomllib
from dataclasses import dataclass
from pathlib import Path

from ..schema.model import LACKS
from .locate import bundled_data_dir

REST = "rest_of_body"


class LayoutError(BodyplanError, ValueError):
    """A layout that is missing, malformed or names an unknown compartment."""


@dataclass(frozen=True)
class Layout:
    name: str
    description: str
    compartments: dict[str, list[str]]  # model compartment → stored compartment ids

    def members(self) -> set[str]:
        return {c for parts in self.compartments.values() for c in parts}

    def for_animal(self, species: str, taxon_class: str) -> "Layout":
        """This layout as the animal's body has it: a lumped compartment without the organs its taxon
        lacks (a fish's richly perfused tissues have no lung); refused when a model compartment is only
        such organs (a whole-body layout's lung, for a fish)."""
        lacks = LACKS.get(taxon_class, frozenset())
        missing = [model for model, parts in self.compartments.items() if set(parts) <= lacks]
        if missing:
            fitting = [name for name in builtin_layouts() if not any(
                set(parts) <= lacks for parts in load_layout(name).compartments.values())]
            raise LayoutError(f"{species}: a {taxon_class} has no {', '.join(missing)}, which the "
                              f"{self.name} layout needs; use --layout {' or '.join(fitting)}")
        kept = {model: [c for c in parts if c not in lacks] for model, parts in self.compartments.items()}
        return self if kept == self.compartments else Layout(self.name, self.description, kept)


def builtin_layouts() -> list[str]:
    return sorted(p.stem for p in (bundled_data_dir() / "layouts").glob("*.toml"))


def load_layout(name_or_path: str | Path, known: set[str] | None = None) -> Layout:
    """A built-in layout by name, or a TOML file with a [compartments] table of lists."""
    path = Path(name_or_path)
    if not path.suffix:
        path = bundled_data_dir() / "layouts" / f"{name_or_path}.toml"
        if not path.exists():
            raise LayoutError(f"unknown layout {str(name_or_path)!r}; built-in: {', '.join(builtin_layouts())}, "
                              "or give a .toml file")
    if not path.exists():
        raise LayoutError(f"layout file {path} does not exist")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise LayoutError(f"{path}: not valid TOML ({exc})") from None
    comps = data.get("compartments")
    if not isinstance(comps, dict) or not comps:
        raise LayoutError(f"{path}: needs a [compartments] table mapping model compartments to lists of "
                          "stored compartment ids")
    seen: dict[str, str] = {}
    for model, parts in comps.items():
        if model == REST:
            raise LayoutError(f"{path}: {REST} is added by bodyplan; do not declare it")
        if isinstance(parts, str):
            parts = [parts]
        if not isinstance(parts, list) or not all(isinstance(p, str) for p in parts) or not parts:
            raise LayoutError(f"{path}: compartments.{model} must be a list of stored compartment ids")
        for part in parts:
            if known is not None and part not in known:
                raise LayoutError(f"{path}: compartments.{model} names unknown compartment {part!r}")
            if part in seen:
                raise LayoutError(f"{path}: {part!r} is in both {seen[part]} and {model}; "
                                  "each stored compartment belongs to one model compartment")
            seen[part] = model
        comps[model] = list(parts)
    return Layout(str(data.get("name", path.stem)), str(data.get("description", "")), dict(comps))
