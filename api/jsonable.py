"""Plain JSON values from what pandas and NumPy hand back (NaN is no JSON number: it becomes null)."""

from __future__ import annotations

import math


def json_scalar(x):
    """None for None or NaN, a list for a tuple, a Python number for a NumPy one, else ``x``."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return None
    if isinstance(x, (list, tuple)):
        return list(x)
    return x.item() if hasattr(x, "item") else x
