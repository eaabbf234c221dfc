"""The one pint registry of bodyplan, the strict grammar every unit and quantity text passes first,
and the dimension rules of each quantity.

Everything that parses or converts a unit goes through here, so there is exactly one registry
(pint refuses to mix quantities of different registries). The registry is built on first use from
pint's on-disk cache of parsed definitions, so commands that never touch a unit never pay for it.

Text reaches pint only after ``grammar`` accepted it: an unsigned decimal number, an optional
uncertainty (``± 0.5`` or ``+/- 0.5``), and a unit made of registry names, ``*``, ``/``, parentheses
and small integer exponents (``^2``, ``**-1``); a number inside a unit stands only first (``1/d``) or
opens a bracket after ``/`` (``mL/min/(100 g)``). pint's own parser evaluates arbitrary
arithmetic (``g**9**9**9`` never finishes), reads ``4,5`` as 45 and ``nan`` as a number; the grammar
rules all of those out before pint sees them.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from functools import lru_cache

from ..errors import BodyplanError

MAX_EXPONENT = 4  # m^2, L/h/m^2, 1/d, cm^3: physiology needs nothing above 4 (common practice, no source)
MAX_DEPTH = 2  # parentheses: mL/min/(1.73 m^2) is one level

# What a unit's extra denominator means once the quantity's own dimension is taken out.
NORMALISERS = {
    "body_mass": ("kg", "[mass]", "per kg body mass"),
    "tissue_mass": ("kg", "[mass]", "per kg tissue mass"),
    "body_surface": ("m^2", "[length] ** 2", "per m² body surface"),
}


class UnitError(BodyplanError, ValueError):
    """A unit that does not parse, or has a dimension the quantity does not accept."""


_registry = None


def registry():
    """The one registry, built on first use (from pint's definition cache when it can write one)."""
    global _registry
    if _registry is None:
        import pint

        options = dict(on_redefinition="raise", autoconvert_offset_to_baseunit=False)
        try:
            reg = pint.UnitRegistry(cache_folder=":auto:", **options)
        except OSError:  # no writable cache: parse the definitions every time
            reg = pint.UnitRegistry(**options)
        reg.load_definitions(os.path.join(os.path.dirname(__file__), "definitions.txt"))
        _registry = reg
    return _registry


def __getattr__(name):  # ``from bodyplan.units import ureg, Quantity`` builds the registry then
    if name == "ureg":
        return registry()
    if name == "Quantity":
        return registry().Quantity
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


# ---- the grammar -------------------------------------------------------------------------------
NUMBER = r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
TOKEN = re.compile(rf"\s*(?:(?P<number>{NUMBER})|(?P<name>[A-Za-z_µμΩ°][A-Za-z_0-9µμΩ°]*|%)"
                   r"|(?P<power>\*\*|\^)|(?P<op>[*/])|(?P<paren>[()])|(?P<bad>\S))")
QUANTITY = re.compile(rf"\s*(?P<number>{NUMBER})\s*(?:(?:±|\+/-)\s*(?P<uncertainty>{NUMBER}))?\s*(?P<unit>.*?)\s*$",
                      re.DOTALL)
EXPONENT = re.compile(r"\s*(-?\d{1,2})")


def _known(name: str) -> bool:
    if name in ("%", "kg"):  # kg: the body mass unit of nearly every request, known without building pint
        return True
    try:
        return bool(registry().parse_unit_name(name))
    except Exception:  # pint raises several types for odd names
        return False


def grammar(text: str) -> None:
    """Raise UnitError unless ``text`` is a unit in bodyplan's grammar; names must be in the registry.

    unit := factor ((' ' | '*' | '/') factor)* ; factor := (NAME | NUMBER | '(' unit ')') [('^'|'**') INT]
    """
    pos, depth, expect_factor, last = 0, 0, True, None
    denominators = []  # per open bracket: does it follow '/'? Only there may a number scale a unit
    number_needs_unit = False
    example = "write it as the source prints it, e.g. 'mL/min/kg', 'mL/min/(100 g)' or 'L/min/m^2'"
    while pos < len(text):
        m = TOKEN.match(text, pos)
        if m is None:  # only trailing whitespace is left
            break
        pos = m.end()
        kind = m.lastgroup
        tok = m.group(kind)
        if number_needs_unit and not (kind == "name" or tok == "("):
            raise UnitError(f"cannot read unit {text!r}: a number in a unit scales the unit after it, as in "
                            f"'mL/min/(100 g)'; {example}")
        number_needs_unit = False
        if kind == "bad":
            hint = " (use '.' as the decimal point)" if tok == "," else ""
            raise UnitError(f"cannot read unit {text!r}: {tok!r} is not allowed in a unit{hint}; {example}")
        if kind == "power":
            if last not in ("name", "close"):
                raise UnitError(f"cannot read unit {text!r}: an exponent must follow a unit name or a bracket; "
                                f"{example}")
            e = EXPONENT.match(text, pos)
            if e is None or abs(int(e.group(1))) > MAX_EXPONENT:
                raise UnitError(f"cannot read unit {text!r}: exponents are whole numbers from -{MAX_EXPONENT} "
                                f"to {MAX_EXPONENT}; {example}")
            pos, last, expect_factor = e.end(), "power", False
            continue
        if kind == "op":
            if expect_factor:
                raise UnitError(f"cannot read unit {text!r}: {tok!r} needs a unit on both sides; {example}")
            expect_factor, last = True, "op"
            continue
        if tok == ")":
            if expect_factor or depth == 0:
                raise UnitError(f"cannot read unit {text!r}: unbalanced ')'; {example}")
            depth, last = depth - 1, "close"
            denominators.pop()
            continue
        # a factor: a name, a number or '('; two factors side by side multiply ("1.73 m^2")
        if tok == "(":
            denominators.append(last == "op" and text[:m.start()].rstrip().endswith("/"))
            depth += 1
            if depth > MAX_DEPTH:
                raise UnitError(f"cannot read unit {text!r}: brackets nest at most {MAX_DEPTH} deep; {example}")
            expect_factor, last = True, "open"
            continue
        if kind == "number":
            # a number stands first (the '1' of '1/d', the value of '10 year') or opens a bracket after '/'
            # ('mL/min/(1.73 m^2)'); anywhere else ('g/12', '2 3 kg') it would silently rescale the value
            opens_denominator = last == "open" and denominators and denominators[-1]
            if last is not None and not opens_denominator:
                raise UnitError(f"cannot read unit {text!r}: the number {tok} can only stand first or open a "
                                f"bracket after '/', e.g. 'mL/min/(100 g)'; {example}")
            number_needs_unit = opens_denominator
        if kind == "number" and not math.isfinite(float(tok)):
            raise UnitError(f"cannot read unit {text!r}: {tok} is not a finite number; {example}")
        if kind == "name" and not _known(tok):
            raise UnitError(f"cannot read unit {text!r} ({tok!r} is not defined in the unit registry); "
                            "write it in pint syntax, e.g. 'mL/min/kg'")
        expect_factor, last = False, kind
    if depth:
        raise UnitError(f"cannot read unit {text!r}: a '(' is not closed; {example}")
    if expect_factor:
        raise UnitError(f"cannot read unit {text!r}: it ends where a unit is expected; {example}")


@dataclass(frozen=True)
class QuantityText:
    """'12 kg' or '12 ± 0.5 kg' as read by the grammar: number, uncertainty, unit."""

    number: float
    uncertainty: float | None
    unit: str


def parse_quantity_text(text: str) -> QuantityText:
    """Split a quantity's text by the grammar; UnitError naming the problem and the fix."""
    raw = str(text)
    m = QUANTITY.fullmatch(raw)
    example = "write a number and a unit, e.g. '12 kg' or '26 lb'"
    if m is None:
        stripped = raw.strip()
        if not stripped:
            raise UnitError(f"the quantity is empty; {example}")
        if re.match(r"\s*[-−]", raw):
            raise UnitError(f"{raw!r} is negative; {example} (a positive amount)")
        raise UnitError(f"{raw!r} does not start with a number; {example}")
    number = float(m.group("number"))
    if not math.isfinite(number):
        raise UnitError(f"{raw!r}: {m.group('number')} is not a finite number; {example}")
    unit = m.group("unit")
    if unit.startswith(","):
        raise UnitError(f"{raw!r}: use '.' as the decimal point, e.g. '4.5 kg'")
    if not unit:
        raise UnitError(f"{raw!r} has no unit; write it with one, e.g. '12 kg'")
    if re.match(r"[\d.]", unit):
        raise UnitError(f"{raw!r} holds two numbers before its unit; {example}")
    grammar(unit)
    if not re.search(r"[A-Za-z_µμΩ°%]", unit):
        raise UnitError(f"{raw!r} has no unit; write it with one, e.g. '12 kg'")
    spread = m.group("uncertainty")
    return QuantityText(number, None if spread is None else float(spread), unit)


@dataclass(frozen=True)
class Form:
    """One accepted way of reporting a quantity: its normalisation and canonical unit."""

    normalisation: str  # "none", "body_mass", "tissue_mass" or "body_surface"
    canonical_unit: str
    dimensionality: object  # pint.util.UnitsContainer

    @property
    def words(self) -> str:
        return "absolute" if self.normalisation == "none" else NORMALISERS[self.normalisation][2]


@lru_cache(maxsize=4096)
def parse_unit(text: str):
    """Parse a unit as reported, keeping any scale factor ("mL/min/(100 g)" is 0.01 mL/min/g).

    The text passes the grammar first, so pint only ever evaluates plain products of units.
    """
    text = text.strip()
    if not text:
        raise UnitError("the unit is empty; give the unit the source reports, e.g. 'g' or '%'")
    grammar(text)
    import pint

    reg = registry()
    try:
        parsed = reg.parse_expression(text)
    except Exception as exc:  # pint raises several unrelated exception types here
        raise UnitError(f"cannot read unit {text!r} ({exc}); write it in pint syntax, e.g. 'mL/min/kg'") from None
    if not isinstance(parsed, pint.Quantity):  # a bare number such as "1"
        parsed = reg.Quantity(float(parsed), "dimensionless")
    if not math.isfinite(float(parsed.magnitude)):
        raise UnitError(f"unit {text!r} scales values by {parsed.magnitude}; give a unit such as 'g' or '%'")
    return parsed


def dimension_text(dim) -> str:
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
            if not (0 < factor < float("inf")):  # "0" parses as a plain number
                raise UnitError(f"unit {unit!r} scales values by {factor}; give a unit such as 'g' or '%'")
            return form, factor
    accepted = " or ".join(f"{dimension_text(f.dimensionality)} ({f.words}, e.g. {f.canonical_unit})"
                           for f in forms(canonical_unit, per))
    raise UnitError(
        f"unit {unit!r} has dimension {dimension_text(reported.dimensionality)} "
        f"but this quantity needs {accepted}"
    )


def to_quantity(text_or_quantity, default_unit: str | None = None):
    """Read '12 kg', '26 lb' or a pint quantity into this registry's Quantity.

    Text passes the strict grammar (a number, an optional '± spread', a unit) before pint reads the
    unit; a result that is not finite in base units is refused.
    """
    import pint

    reg = registry()
    if isinstance(text_or_quantity, pint.Quantity):
        return reg.Quantity(text_or_quantity.magnitude, str(text_or_quantity.units))
    if isinstance(text_or_quantity, bool):
        raise UnitError(f"{text_or_quantity!r} is not a quantity; write e.g. '12 kg'")
    if isinstance(text_or_quantity, (int, float)):
        if default_unit is None:
            raise UnitError(f"{text_or_quantity!r} has no unit; write it with one, e.g. '12 kg'")
        if not math.isfinite(text_or_quantity):
            raise UnitError(f"{text_or_quantity!r} is not a finite number; write e.g. '12 kg'")
        return reg.Quantity(float(text_or_quantity), default_unit)
    parsed = parse_quantity_text(str(text_or_quantity))
    unit = parse_unit(parsed.unit)
    if unit.dimensionless:
        raise UnitError(f"{text_or_quantity!r} has no unit; write it with one, e.g. '12 kg'")
    q = parsed.number * unit
    if not math.isfinite(float(q.to_base_units().magnitude)):
        raise UnitError(f"{text_or_quantity!r} is too large to compute with; check the number")
    return q


TEMPERATURE_UNITS = ("degC", "degF", "K")  # units a temperature may be written in (offset units read alone)


def temperature_celsius(text) -> float:
    """Read a water or air temperature ('15 degC', '-1.5 degC', '59 degF', '288.15 K') in °C.

    A temperature may be below zero, so a leading sign is allowed here (amounts elsewhere have none);
    the unit stands alone, since pint cannot multiply an offset unit such as degC by a number.
    """
    raw = str(text).strip()
    sign = -1.0 if raw[:1] in ("-", "−") else 1.0
    parsed = parse_quantity_text(raw.lstrip("-−").strip())
    unit = parsed.unit.strip()
    if unit not in TEMPERATURE_UNITS:
        raise UnitError(f"{raw!r} is not a temperature; write e.g. '15 degC' (units: {', '.join(TEMPERATURE_UNITS)})")
    celsius = float(registry().Quantity(sign * parsed.number, unit).to("degC").magnitude)
    if celsius < -273.15:
        raise UnitError(f"{raw!r} is below absolute zero; check the number and its unit")
    return celsius
