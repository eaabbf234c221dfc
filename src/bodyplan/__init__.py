"""bodyplan: curated, source-traced species physiology for PBPK modelling.

Imports stay light here: pandas, pint and the store load only when first used.
"""

from __future__ import annotations

__version__ = "0.1.0"

CAUTION = ("Parameters are for research modelling only. Dosing and withdrawal-time decisions belong to a "
           "licensed veterinarian or physician under local regulations.")


def open_store(path=None):
    """Open the store: ``path``, else $BODYPLAN_STORE, else the bundled curated files built into the cache."""
    from .api import open_store as _open

    return _open(path)


__all__ = ["CAUTION", "__version__", "open_store"]
