"""The one pint registry of bodyplan, and the dimension rules of each quantity.

Everything that parses or converts a unit imports ``ureg`` from here, so there is
exactly one registry (pint refuses to mix quantities of different registries).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from importlib.resources import files

import pint

ureg = pint.UnitRegistry(on_redefinition="raise", autoconvert_offset_to_baseunit=False)
ureg.load_definitions(str(files(__package__) / "definitions.txt"))
Quantity = ureg.Quantity

# What a unit's extra denominator means once the quantity's own dimension is taken out.
NORMALISERS = {
    "body_mass": ("kg", "[mass]", "per kg body mass"),
    "tissue_mass": ("kg", "[mass]", "per kg tissue mass"),
    "body_surface": ("m^2", "[length] ** 2", "per m² body surface"),
}


class UnitError(ValueError):
    """A unit that does not parse, or has a dimension the quantity does not accept."""


@dataclass(frozen=True)
class Form:
    """One accepted way of reporting a quantity: its normalisation and canonical unit."""

    normalisation: str  # "none", "body_mass", "tissue_mass" or "body_surface"
    canonical_unit: str
    dimensionality: pint.util.UnitsContainer

    @property
    def words(self) -> str:
        return "absolute" if self.normalisation == "none" else NORMALISERS[self.normalisation][2]


@lru_cache(maxsize=4096)
def parse_unit(text: str) -> pint.Quantity:
    """Parse a unit as reported, keeping any scale factor ("mL/min/(100 g)" is 0.01 mL/min/g)."""
    text = text.strip()
    if not text:
        raise UnitError("the unit is empty; give the unit the source reports, e.g. 'g' or '%'")
    try:
        parsed = ureg.parse_expression(text)
    except Exception as exc:  # pint raises several unrelated exception types here
        raise UnitError(f"cannot read unit {text!r} ({exc}); write it in pint syntax, e.g. 'mL/min/kg'") from None
    if not isinstance(parsed, pint.Quantity):  # a bare number such as "1"
        parsed = Quantity(float(parsed), "dimensionless")
    return parsed


def dimension_text(dim: pint.util.UnitsContainer) -> str:
    return "dimensionless" if not dim else str(dim)


@lru_cache(maxsize=256)
def forms(canonical_unit: str, per: str = "") -> tuple[Form, ...]:
    """The accepted forms of a quantity: absolute, plus one per declared normaliser."""
    base = parse_unit(canonical_unit)
    result = [Form("none", canonical_unit, base.dimensionality)]
    for name in per.split():
        unit, _, _ = NORMALISERS[name]
        normalised = base / parse_unit(unit)
        result.append(Form(name, f"{canonical_unit}/{unit}", normalised.dimensionality))
    dims = [f.dimensionality for f in result]
    if len(set(dims)) != len(dims):
        raise UnitError(f"normalisers {per!r} give two forms of one dimension; keep only one")
    return tuple(result)


@lru_cache(maxsize=4096)
def conversion(unit: str, canonical_unit: str, per: str = "") -> tuple[Form, float]:
    """Which form a reported unit is, and the factor taking it to that form's canonical unit.

    All bodyplan units are multiplicative, so one factor converts a whole unit group
    (values, spreads and bounds alike) with a single numpy multiplication.
    """
    reported = parse_unit(unit)
    for form in forms(canonical_unit, per):
        if reported.dimensionality == form.dimensionality:
            factor = float((reported / parse_unit(form.canonical_unit)).to("dimensionless").magnitude)
            if not (0 < factor < float("inf")):  # "0", "nan" or "inf" parse as plain numbers
                raise UnitError(f"unit {unit!r} scales values by {factor}; give a unit such as 'g' or '%'")
            return form, factor
    accepted = " or ".join(f"{dimension_text(f.dimensionality)} ({f.words}, e.g. {f.canonical_unit})"
                           for f in forms(canonical_unit, per))
    raise UnitError(
        f"unit {unit!r} has dimension {dimension_text(reported.dimensionality)} "
        f"but this quantity needs {accepted}"
    )


def to_quantity(text_or_quantity, default_unit: str | None = None) -> pint.Quantity:
    """Read '12 kg', '26 lb' or a pint quantity into this registry's Quantity."""
    if isinstance(text_or_quantity, pint.Quantity):
        return Quantity(text_or_quantity.magnitude, str(text_or_quantity.units))
    if isinstance(text_or_quantity, (int, float)):
        if default_unit is None:
            raise UnitError(f"{text_or_quantity!r} has no unit; write it with one, e.g. '12 kg'")
        return Quantity(float(text_or_quantity), default_unit)
    try:
        q = ureg.parse_expression(str(text_or_quantity).strip())
    except Exception as exc:
        raise UnitError(f"cannot read {text_or_quantity!r} as a quantity ({exc}); write e.g. '12 kg'") from None
    if not isinstance(q, pint.Quantity) or q.dimensionless:
        raise UnitError(f"{text_or_quantity!r} has no unit; write it with one, e.g. '12 kg'")
    return q
