"""bodyplan's Python API: open a store, read values, build parameter sets."""

from .locate import StoreNotFoundError, locate_store
from .store import Store, UnknownIdError, open_store

__all__ = ["Store", "StoreNotFoundError", "UnknownIdError", "locate_store", "open_store"]
