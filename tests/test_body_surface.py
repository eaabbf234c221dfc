"""Body surface area formulas against their published worked values (and the curated formula table)."""

from __future__ import annotations

import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bodyplan.api.locate import bundled_data_dir
from bodyplan.units.body_surface import BodySurfaceError, body_surface_area, du_bois, meeh, mosteller


def m2(q) -> float:
    return float(q.to("m^2").magnitude)


def test_du_bois_adult():
    # Du Bois & Du Bois (1916) formula; a 70 kg, 170 cm adult has 1.81 m², the value of the usual BSA
    # nomograms and tables (from memory)
    assert m2(du_bois("70 kg", "170 cm")) == pytest.approx(1.81, abs=0.005)


def test_mosteller_adult_and_agreement_with_du_bois():
    # Mosteller (1987): √(170·70/3600) = 1.82 m² for the same adult (from memory), within 1 % of Du Bois, as
    # Mosteller reported for adults
    assert m2(mosteller("70 kg", "170 cm")) == pytest.approx(1.82, abs=0.005)
    assert m2(mosteller("70 kg", "170 cm")) == pytest.approx(m2(du_bois("70 kg", "170 cm")), rel=0.01)


@pytest.mark.parametrize("kg, k, expected", [
    (10, 10.1, 0.469),  # dog: veterinary BSA conversion tables list 0.469 m² for 10 kg (from memory)
    (20, 10.1, 0.744),  # dog, 20 kg: 0.744 m² in the same tables (from memory)
    (3, 10.0, 0.208),   # cat, 3 kg: 0.208 m² in the same tables (from memory)
])
def test_meeh_against_veterinary_tables(kg, k, expected):
    assert m2(meeh(f"{kg} kg", k)) == pytest.approx(expected, abs=0.001)


def test_the_curated_table_picks_the_preferred_formula():
    table = pd.read_csv(bundled_data_dir() / "vocab" / "body_surface.csv", dtype=str, keep_default_na=False)
    assert m2(body_surface_area(table, "dog", "10 kg")) == pytest.approx(0.469, abs=0.001)
    assert m2(body_surface_area(table, "human", "70 kg", "170 cm")) == pytest.approx(1.81, abs=0.005)
    assert m2(body_surface_area(table, "human", "70 kg", "170 cm", formula="mosteller")) == pytest.approx(1.82, abs=0.005)
    with pytest.raises(BodySurfaceError, match="needs the height"):
        body_surface_area(table, "human", "70 kg")
    with pytest.raises(BodySurfaceError, match="no body surface formula for 'ferret'"):
        body_surface_area(table, "ferret", "1 kg")
    with pytest.raises(BodySurfaceError, match="positive"):
        meeh("-1 kg", 10.1)


@settings(max_examples=100, deadline=None)
@given(kg=st.floats(min_value=0.01, max_value=5000), factor=st.floats(min_value=1.01, max_value=100))
def test_meeh_scales_with_two_thirds_power(kg, factor):
    # surface ∝ mass^(2/3): the geometric similarity behind Meeh's formula
    ratio = m2(meeh(f"{kg * factor} kg", 10.1)) / m2(meeh(f"{kg} kg", 10.1))
    assert ratio == pytest.approx(factor ** (2 / 3), rel=1e-9)
