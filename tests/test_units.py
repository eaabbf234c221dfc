"""The unit registry and the per-quantity dimension rules.

Conversion factors are checked against published definitions, named beside each check:
- NIST SP 811 = Thompson A, Taylor BN (2008) Guide for the Use of the International System of Units (SI),
  NIST Special Publication 811, Appendix B.8 (factors in alphabetical order, exact where marked).
- SI Brochure = BIPM (2019) The International System of Units, 9th edition, Table 8 (non-SI units accepted
  for use with the SI: minute, hour, day, litre) and section 5.4.7 (percent, %, = 0.01).
"""

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.units import UnitError, conversion, forms, parse_unit, to_quantity, ureg

# (reported unit, canonical unit, factor, source)
PUBLISHED = [
    ("lb", "kg", 0.45359237, "NIST SP 811 B.8: pound (avoirdupois) = 0.45359237 kg, exact"),
    ("oz", "g", 28.349523125, "NIST SP 811 B.8: ounce (avoirdupois) = 2.834952 E-02 kg (28.349523125 g exact)"),
    ("inch", "cm", 2.54, "NIST SP 811 B.8: inch = 2.54 E-02 m, exact"),
    ("gallon", "L", 3.785411784, "NIST SP 811 B.8: gallon (U.S.) = 3.785412 E-03 m^3 (3.785411784 L exact)"),
    ("mL/min", "L/h", 0.06, "SI Brochure Table 8: 1 mL = 1e-3 L, 1 h = 60 min, so 1 mL/min = 0.06 L/h"),
    ("L/min", "L/h", 60.0, "SI Brochure Table 8: 1 h = 60 min"),
    ("d", "h", 24.0, "SI Brochure Table 8: 1 d = 24 h = 86 400 s"),
    ("%", "1", 0.01, "SI Brochure 5.4.7: % = 0.01"),
    ("mL/kg", "L/kg", 1e-3, "SI Brochure Table 8: 1 L = 1 dm^3 = 1e3 mL"),
    ("g/mL", "kg/L", 1.0, "SI Brochure Table 8: 1 L = 1e3 mL, and 1 kg = 1e3 g"),
    ("mg/g", "1", 1e-3, "SI prefixes, SI Brochure Table 7: milli = 1e-3"),
]


@pytest.mark.parametrize("unit, canonical, factor, source", PUBLISHED, ids=[p[0] for p in PUBLISHED])
def test_published_factor(unit, canonical, factor, source):
    form, got = conversion(unit, canonical)
    assert form.normalisation == "none"
    assert got == pytest.approx(factor, rel=1e-12), source


@pytest.mark.parametrize("text, kg", [
    ("26 lb", 26 * 0.45359237),   # NIST SP 811 B.8, exact pound
    ("250 g", 0.25),
    ("12 kg", 12.0),
])
def test_body_weight_text(text, kg):
    assert to_quantity(text).to("kg").magnitude == pytest.approx(kg, rel=1e-12)


# Dimension rules per quantity, as the vocabulary declares them: (canonical unit, per) of
# blood_flow, blood_flow_fraction and cardiac_output in data_curated/vocab/quantities.csv.
BLOOD_FLOW = ("L/h", "tissue_mass")
FLOW_FRACTION = ("1", "")
CARDIAC_OUTPUT = ("L/h", "body_mass body_surface")


@pytest.mark.parametrize("quantity, unit, normalisation, canonical, factor", [
    # flow as volume per time
    (BLOOD_FLOW, "mL/min", "none", "L/h", 0.06),
    # flow per tissue mass: 1 mL/min/(100 g) = 10 mL/min/kg = 0.6 L/h/kg (SI Brochure Table 8)
    (BLOOD_FLOW, "mL/min/(100 g)", "tissue_mass", "L/h/kg", 0.6),
    (BLOOD_FLOW, "mL/min/g", "tissue_mass", "L/h/kg", 60.0),
    # flow as a fraction of cardiac output
    (FLOW_FRACTION, "%", "none", "1", 0.01),
    (FLOW_FRACTION, "1", "none", "1", 1.0),
    (FLOW_FRACTION, "L/L", "none", "1", 1.0),
    # cardiac output: absolute, per kg body mass, per m² body surface
    (CARDIAC_OUTPUT, "L/min", "none", "L/h", 60.0),
    (CARDIAC_OUTPUT, "mL/min/kg", "body_mass", "L/h/kg", 0.06),
    (CARDIAC_OUTPUT, "L/min/m^2", "body_surface", "L/h/m^2", 60.0),
    (CARDIAC_OUTPUT, "mL/min/(1.73 m^2)", "body_surface", "L/h/m^2", 0.06 / 1.73),
    # a laying rate: eggs are counts (units/definitions.txt), so egg/d is per day
    (("1/d", ""), "egg/d", "none", "1/d", 1.0),
])
def test_accepted_forms(quantity, unit, normalisation, canonical, factor):
    form, got = conversion(unit, *quantity)
    assert (form.normalisation, form.canonical_unit) == (normalisation, canonical)
    assert got == pytest.approx(factor, rel=1e-12)


@pytest.mark.parametrize("quantity, unit, reported, needed", [
    (BLOOD_FLOW, "kg", "[mass]", "[length] ** 3 / [time]"),           # a flow given in kg
    (BLOOD_FLOW, "mL/min/m^2", "[length] / [time]", "[length] ** 3 / [time] / [mass]"),  # tissue flow per body surface
    (FLOW_FRACTION, "mL/min", "[length] ** 3 / [time]", "dimensionless"),
    (CARDIAC_OUTPUT, "kg", "[mass]", "[length] ** 3 / [time]"),
])
def test_wrong_dimension_names_both(quantity, unit, reported, needed):
    with pytest.raises(UnitError) as caught:
        conversion(unit, *quantity)
    message = str(caught.value)
    assert f"unit {unit!r} has dimension {reported} but this quantity needs" in message
    assert needed in message


@pytest.mark.parametrize("unit", ["mL/mni", "", "1/0", "kg)"])
def test_unreadable_unit(unit):
    with pytest.raises(UnitError):
        conversion(unit, "L/h")


def test_zero_is_no_scale():
    with pytest.raises(UnitError, match="scales values by"):
        conversion("0", "1")


@pytest.mark.parametrize("unit", ["nan", "inf", "1e999"])
def test_non_finite_words_are_not_units(unit):
    with pytest.raises(UnitError, match="is not defined in the unit registry|is not a finite number"):
        conversion(unit, "1")


def test_unit_error_is_a_value_error():
    assert issubclass(UnitError, ValueError)


def test_number_without_unit():
    with pytest.raises(UnitError, match="has no unit"):
        to_quantity(12)
    assert to_quantity(12, "kg").magnitude == 12


def test_two_normalisers_of_one_dimension_are_refused():
    with pytest.raises(UnitError, match="two forms of one dimension"):
        forms("L/h", "body_mass tissue_mass")


def test_one_registry_refuses_redefinition():
    assert parse_unit("kg")._REGISTRY is ureg
    with pytest.raises(pint.RedefinitionError):
        ureg.define("egg = 1")


# Round trip: a value reported in any accepted unit, taken to canonical and back with pint, is unchanged.
UNITS = {
    BLOOD_FLOW: ["mL/min", "L/min", "L/h", "mL/min/(100 g)", "mL/min/g", "mL/h/kg"],
    CARDIAC_OUTPUT: ["L/min", "mL/min", "mL/min/kg", "L/h/kg", "L/min/m^2", "mL/min/(1.73 m^2)"],
    FLOW_FRACTION: ["%", "1", "L/L"],
    ("kg", ""): ["g", "mg", "kg", "lb", "oz"],
    ("L", "body_mass"): ["mL", "L", "mL/kg", "L/kg", "dL/kg"],
}
CASES = [(q, u) for q, units in UNITS.items() for u in units]


@settings(max_examples=200, deadline=None)
@given(case=st.sampled_from(CASES),
       value=st.floats(min_value=1e-9, max_value=1e9, allow_nan=False, allow_infinity=False))
def test_round_trip_reported_canonical_reported(case, value):
    (canonical, per), unit = case
    form, factor = conversion(unit, canonical, per)
    stored = value * factor
    expected = ureg.Quantity(value, parse_unit(unit).units).to(form.canonical_unit).magnitude \
        * parse_unit(unit).magnitude / parse_unit(form.canonical_unit).magnitude
    assert math.isclose(stored, expected, rel_tol=1e-12)
    back = ureg.Quantity(stored, form.canonical_unit).to(parse_unit(unit).units).magnitude \
        / parse_unit(unit).magnitude
    assert math.isclose(back, value, rel_tol=1e-12)


@given(st.floats(min_value=-50, max_value=60, allow_nan=False).map(lambda c: round(c, 3)))
def test_temperature_in_any_unit_reads_as_celsius(celsius):
    """°F = °C × 9/5 + 32 and K = °C + 273.15 (common practice, no source): one temperature three ways."""
    from bodyplan.units import temperature_celsius

    assert temperature_celsius(f"{celsius} degC") == pytest.approx(celsius, abs=1e-9)
    assert temperature_celsius(f"{celsius * 9 / 5 + 32!r} degF") == pytest.approx(celsius, abs=1e-9)
    assert temperature_celsius(f"{celsius + 273.15!r} K") == pytest.approx(celsius, abs=1e-9)
