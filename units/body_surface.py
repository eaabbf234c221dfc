"""Body surface area from body mass (and height), to turn per-m² values into absolute ones.

The formulas per species are curated in vocab/body_surface.csv (species, formula, k, preferred, source);
the arithmetic is here, with quantities in the one pint registry.

- Du Bois & Du Bois (1916): BSA [m²] = 0.007184 · W[kg]^0.425 · H[cm]^0.725
- Mosteller (1987):         BSA [m²] = √(H[cm] · W[kg] / 3600)
- Meeh (1879):              BSA [cm²] = k · W[g]^(2/3), with a species' constant k
"""

from __future__ import annotations

import math

from ..errors import BodyplanError
from . import UnitError, to_quantity

FORMULAS = ("du_bois", "mosteller", "meeh")
NEEDS_HEIGHT = {"du_bois", "mosteller"}


class BodySurfaceError(BodyplanError, ValueError):
    """A body surface that cannot be computed as asked (no formula for the species, height missing)."""


def _kg(weight) -> float:
    try:
        w = float(to_quantity(weight, "kg").to("kg").magnitude)
    except UnitError as exc:
        raise BodySurfaceError(f"body mass {weight!r}: {exc}") from None
    if not (w > 0 and math.isfinite(w)):
        raise BodySurfaceError(f"body mass {weight!r} must be a positive amount, e.g. '70 kg'")
    return w


def _cm(height) -> float:
    h = float(to_quantity(height, "cm").to("cm").magnitude)
    if not (h > 0 and math.isfinite(h)):
        raise BodySurfaceError(f"height {height!r} must be a positive length, e.g. '170 cm'")
    return h


# m² from kg and cm as plain floats: parameter sets convert per-m² rows without building the registry
AREA_M2 = {
    "du_bois": lambda kg, cm, k: 0.007184 * kg ** 0.425 * cm ** 0.725,
    "mosteller": lambda kg, cm, k: math.sqrt(cm * kg / 3600),
    "meeh": lambda kg, cm, k: k * (kg * 1000) ** (2 / 3) / 1e4,  # k · W[g]^(2/3) in cm²
}


def _m2(value: float):
    from . import Quantity

    return Quantity(value, "m^2")


def du_bois(weight, height):
    return _m2(AREA_M2["du_bois"](_kg(weight), _cm(height), None))


def mosteller(weight, height):
    return _m2(AREA_M2["mosteller"](_kg(weight), _cm(height), None))


def meeh(weight, k: float):
    if not (k > 0 and math.isfinite(k)):
        raise BodySurfaceError(f"Meeh's k must be a positive number, not {k!r}")
    return _m2(AREA_M2["meeh"](_kg(weight), None, k))


def body_surface_area(formulas, species: str, weight, height=None, formula: str | None = None):
    """BSA of one animal of ``species`` from the curated formulas (rows of vocab/body_surface.csv as
    dicts, or a DataFrame of it); ``formula`` picks one, else the species' preferred formula."""
    rows = formulas.to_dict("records") if hasattr(formulas, "to_dict") else list(formulas)
    mine = [r for r in rows if r["species"] == species]
    if not mine:
        raise BodySurfaceError(f"no body surface formula for {species!r}; add one to vocab/body_surface.csv")
    if formula:
        chosen = [r for r in mine if r["formula"] == formula]
        if not chosen:
            raise BodySurfaceError(f"{species} has no formula {formula!r}; it has "
                                   f"{', '.join(r['formula'] for r in mine)}")
    else:
        chosen = [r for r in mine if r["preferred"] == "yes"] or mine
    row = chosen[0]
    if row["formula"] in NEEDS_HEIGHT:
        if height is None:
            raise BodySurfaceError(f"the {row['formula']} formula of {species} needs the height, e.g. '170 cm'")
        return (du_bois if row["formula"] == "du_bois" else mosteller)(weight, height)
    return meeh(weight, float(row["k"]))
