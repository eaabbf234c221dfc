"""bodyplan's schema: store tables and curated-file descriptors, each declared once.

The store tables load on first use: they import SQLModel and SQLAlchemy, which a command that only
reads a built store (``bodyplan params``) never needs.
"""

from . import descriptors

_TABLE_NAMES = ["TABLES", "BodySurfaceFormula", "BuildInfo", "Compartment", "Condition", "Group", "InputFile", "LifeStage", "Method",
                "Part", "QuantityDef", "Source", "Species", "SpeciesClass", "Value"]


def __getattr__(name):
    if name in _TABLE_NAMES:
        from . import tables

        return getattr(tables, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = ["descriptors", *_TABLE_NAMES]
