"""Cross-species allometry: the fit itself, and the bundled data against published exponents."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from bodyplan.api.allometry import AllometryError, allometry, fit_power_law

# Points invented for tests: body masses (kg) and values with scatter around a power law.
MASS = np.array([0.025, 0.3, 2.5, 12.0, 70.0, 450.0, 600.0])
VALUE = np.array([0.9, 5.5, 31.0, 85.0, 390.0, 1500.0, 2600.0])
LABELS = ["m1", "m2", "m3", "m4", "m5", "m6", "m7"]


def test_fit_matches_statsmodels_ols():
    import statsmodels.api as sm

    fit = fit_power_law(MASS, VALUE, LABELS)
    x, y = np.log10(MASS), np.log10(VALUE)
    ols = sm.OLS(y, sm.add_constant(x)).fit()
    ci = ols.conf_int(alpha=0.05)
    assert fit.n == 7 and fit.labels == LABELS
    assert fit.b == pytest.approx(ols.params[1], rel=1e-12)
    assert fit.a == pytest.approx(10 ** ols.params[0], rel=1e-12)
    assert fit.b_ci == pytest.approx(tuple(ci[1]), rel=1e-10)
    assert fit.a_ci == pytest.approx(tuple(10 ** ci[0]), rel=1e-10)
    assert fit.r2 == pytest.approx(ols.rsquared, rel=1e-12)
    assert fit.residual_sd == pytest.approx(np.sqrt(ols.scale), rel=1e-12)

    # prediction interval for a new point, and the confidence band of the mean
    new = np.array([0.1, 12.0, 3000.0])
    frame = ols.get_prediction(sm.add_constant(np.log10(new), has_constant="add")).summary_frame(alpha=0.05)
    value, low, high = fit.predict(new)
    assert value == pytest.approx(10 ** frame["mean"].to_numpy(), rel=1e-10)
    assert low == pytest.approx(10 ** frame["obs_ci_lower"].to_numpy(), rel=1e-10)
    assert high == pytest.approx(10 ** frame["obs_ci_upper"].to_numpy(), rel=1e-10)
    _, mlow, mhigh = fit.confidence_band(new)
    assert mlow == pytest.approx(10 ** frame["mean_ci_lower"].to_numpy(), rel=1e-10)
    assert mhigh == pytest.approx(10 ** frame["mean_ci_upper"].to_numpy(), rel=1e-10)


def test_fit_matches_linregress_and_other_levels():
    from scipy import stats

    fit = fit_power_law(MASS, VALUE, LABELS, level=0.90)
    ref = stats.linregress(np.log10(MASS), np.log10(VALUE))
    t = stats.t.ppf(0.95, len(MASS) - 2)
    assert fit.b_ci == pytest.approx((ref.slope - t * ref.stderr, ref.slope + t * ref.stderr), rel=1e-12)
    one = fit.predict(12.0, level=0.99)
    assert all(isinstance(v, float) for v in one)
    assert one[1] < one[0] < one[2]
    # a wider level gives a wider interval
    assert fit.predict(12.0, level=0.5)[1] > one[1]


def test_outliers_are_points_outside_the_prediction_interval():
    mass = np.geomspace(0.02, 2000.0, 12)
    value = 3.0 * mass**0.75 * np.array([1.02, 0.97, 1.01, 0.99, 1.03, 0.98, 1.0, 1.01, 0.99, 1.02, 0.98, 1.0])
    value[5] *= 4  # one point far above the line
    labels = list("abcdefghijkl")
    fit = fit_power_law(mass, value, labels)
    assert fit.outliers() == ["f"]
    _, low, high = fit.predict(mass)
    inside = (value >= low) & (value <= high)
    assert [lab for lab, ok in zip(labels, inside) if not ok] == ["f"]


def test_fit_refuses_what_a_power_law_cannot_take():
    with pytest.raises(AllometryError, match="at least 3"):
        fit_power_law([1.0, 2.0], [1.0, 2.0], ["a", "b"])
    with pytest.raises(AllometryError, match="positive"):
        fit_power_law([1.0, 2.0, 3.0], [1.0, 0.0, 2.0], ["a", "b", "c"])
    with pytest.raises(AllometryError, match="same body mass"):
        fit_power_law([2.0, 2.0, 2.0], [1.0, 1.5, 2.0], ["a", "b", "c"])


# ---- from stored rows to one point per species (invented tree: tests/data/allometry_toy) ------------

TOY = Path(__file__).parent / "data" / "allometry_toy"


@pytest.fixture(scope="module")
def toy_store(store_from_tree):
    return store_from_tree(TOY)


def test_rows_become_absolute_values_one_point_per_species(toy_store):
    result = allometry(toy_store, "cardiac_output")
    pts = result.points.set_index("species")
    assert result.compartment == "whole_body" and result.unit == "L/h"
    assert list(pts.index) == ["dog", "human", "mouse", "rat"]  # cattle lacks a body mass; chicken is a bird
    # dog: two absolute rows (150 L/h at 12 kg, 2 L/min = 120 L/h at 10 kg) → their means
    assert pts.loc["dog", "value"] == pytest.approx(135.0) and pts.loc["dog", "body_mass_kg"] == pytest.approx(11.0)
    # rat: 25 L/h/kg × the row's 0.3 kg
    assert pts.loc["rat", "value"] == pytest.approx(7.5) and pts.loc["rat", "converted_rows"] == 1
    # mouse: 15 mL/min = 0.9 L/h, at the species' stored body mass (25 g)
    assert pts.loc["mouse", "value"] == pytest.approx(0.9) and pts.loc["mouse", "body_mass_kg"] == 0.025
    assert pts.loc["human", "value"] == pytest.approx(336.0)
    reasons = dict(zip(result.skipped["row_id"], result.skipped["reason"]))
    assert "no body mass stored for cattle" in reasons["cattle_co"]
    assert "body surface" in reasons["human_ci"]
    # the fit runs on exactly these points
    direct = fit_power_law(pts["body_mass_kg"].to_numpy(), pts["value"].to_numpy(), list(pts.index))
    assert result.fit.b == pytest.approx(direct.b) and result.fit.a_ci == pytest.approx(direct.a_ci)
    assert list(result.points["outside_interval"]) == [False] * 4


def test_fractions_of_body_mass_join_organ_masses(toy_store):
    pts = allometry(toy_store, "tissue_mass", "liver").points.set_index("species")
    assert pts.loc["mouse", "value"] == pytest.approx(0.05 * 0.025)  # 5 % of 25 g
    assert pts.loc["rat", "value"] == pytest.approx(0.010) and pts.loc["human", "value"] == pytest.approx(1.8)


def test_class_stage_and_refusals(toy_store):
    assert "chicken" in set(allometry(toy_store, "cardiac_output", taxon_class="all").points["species"])
    with pytest.raises(AllometryError, match="stored for 1 species"):
        allometry(toy_store, "cardiac_output", life_stage="juvenile")
    with pytest.raises(AllometryError, match="stored for 1 species"):
        allometry(toy_store, "cardiac_output", taxon_class="birds")
    with pytest.raises(AllometryError, match="predictor"):
        allometry(toy_store, "body_mass")
    with pytest.raises(AllometryError, match="unknown class"):
        allometry(toy_store, "cardiac_output", taxon_class="reptiles")
    from bodyplan.api import UnknownIdError

    with pytest.raises(UnknownIdError):
        allometry(toy_store, "heart_rate")


def test_cli_allometry_json_prediction_and_plot(toy_store, tmp_path):
    from click.testing import CliRunner

    from bodyplan.cli import cli

    png = tmp_path / "co.png"
    result = CliRunner().invoke(cli, ["allometry", "cardiac_output", "--format", "json", "--predict", "dog",
                                      "--body-weight", "12 kg", "--out", str(png), "--store", str(toy_store.path)])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output[result.output.index("{"):])
    fit = toy_store.allometry("cardiac_output").fit
    value, low, high = fit.predict(12.0)
    assert data["prediction"]["value"] == pytest.approx(value)
    assert (data["prediction"]["low"], data["prediction"]["high"]) == pytest.approx((low, high))
    assert data["fit"]["n"] == 4 and "research modelling" in data["caution"]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 20_000
    table = CliRunner().invoke(cli, ["allometry", "tissue_mass", "--compartment", "liver", "--predict", "mouse",
                                     "--store", str(toy_store.path)])
    assert table.exit_code == 0, table.output
    assert "0.025 kg" in table.output and "one of the fitted points" in table.output
    co = CliRunner().invoke(cli, ["allometry", "cardiac_output", "--store", str(toy_store.path)])
    assert co.exit_code == 0 and "Rows left out" in co.output
    assert "no body mass stored for cattle" in co.output and "per body surface" in co.output
    missing = CliRunner().invoke(cli, ["allometry", "cardiac_output", "--predict", "cattle",
                                       "--store", str(toy_store.path)])
    assert missing.exit_code != 0


def test_plot_names_every_species(toy_store):
    from bodyplan.report.allometry_plot import allometry_figure

    result = allometry(toy_store, "cardiac_output")
    fig = allometry_figure(result, result.predict(12.0), "dog")
    texts = {t.get_text() for t in fig.axes[0].texts}
    assert {"dog", "human", "mouse", "rat"} <= texts
    assert fig.axes[0].get_xscale() == "log" and fig.axes[0].get_yscale() == "log"


# ---- the bundled curated data against published exponents -------------------------------------------
# These tests depend on the bundled data (conftest's bundled_store). Each skips, saying why, only
# while fewer than MIN_SPECIES mammal species carry the quantity with a body mass.

MIN_SPECIES = 5


def _fit_or_skip(store, quantity, compartment=None):
    try:
        result = allometry(store, quantity, compartment, taxon_class="mammals")
    except AllometryError as exc:
        pytest.skip(f"bundled data: {exc}")
    if result.fit.n < MIN_SPECIES:
        left_out = sorted(set(result.skipped["species"]) - set(result.points["species"]))
        pytest.skip(f"bundled data: {quantity} of {result.compartment} has a body mass for only {result.fit.n} "
                    f"mammal species ({', '.join(result.points['species'])}); needs {MIN_SPECIES}. "
                    f"Rows left out for: {', '.join(left_out) or 'none'}")
    return result


# Cardiac output. Stahl 1967 (J Appl Physiol 22:453) fitted cardiac output itself: exponent 0.81
# (from memory); the test asks that 0.81 lies in the fit's 95 % CI. Lindstedt & Schaeffer 2002
# (Lab Anim 36:1) give "about 0.75" for volume rates in general (from memory), not an estimate for
# cardiac output alone; the test reads "about" as 0.75 ± 0.05 and asks that this range overlaps the CI.
# With 8 mammal species (1294 rows) b was 0.839 [0.762, 0.915]. With 12 (1993 rows; cat, horse and cattle
# added, anaesthetised mice and rats giving way to conscious ones) b = 0.844 [0.782, 0.906], R² 0.989:
# 0.81 inside the CI, and the CI just reaches 0.80. Counting the anaesthetised rows with the conscious
# ones had given 0.858 [0.801, 0.916], outside 0.75 ± 0.05.
def test_cardiac_output_exponent_agrees_with_stahl_1967(real_store):
    """Depends on the bundled data."""
    fit = _fit_or_skip(real_store, "cardiac_output").fit
    assert fit.b_ci[0] <= 0.81 <= fit.b_ci[1], (
        f"Stahl 1967 J Appl Physiol 22:453: 0.81 outside the 95 % CI {fit.b_ci} (b = {fit.b:.3f}, {fit.labels})")


def test_cardiac_output_exponent_near_lindstedt_schaeffer_2002(real_store):
    """Depends on the bundled data."""
    fit = _fit_or_skip(real_store, "cardiac_output").fit
    low, high = 0.75 - 0.05, 0.75 + 0.05
    assert fit.b_ci[0] <= high and low <= fit.b_ci[1], (
        f"Lindstedt & Schaeffer 2002 Lab Anim 36:1: about 0.75 does not meet the 95 % CI {fit.b_ci}")


# Organ mass against body mass (depends on the bundled data). Published exponents, all from memory:
# Lindstedt & Schaeffer 2002 (Lab Anim 36:1) list organ masses scaling close to M^1 (heart, lungs,
# blood volume), the liver, kidneys and brain below 1 (brain about 0.7, kidneys about 0.85);
# Boxenbaum's liver equation has an exponent of 0.85.
# What the data supported when last run (1294 rows, mammals, adults):
#   heart 7 species b = 1.00 [0.89, 1.11]; lung 5, 1.05 [0.92, 1.18]; spleen 5, 0.97 [0.88, 1.05];
#   blood volume 8, 1.00 [0.95, 1.06]: all near 1, as published.
#   liver 7 species b = 0.86 [0.81, 0.92] and kidney 5, 0.80 [0.67, 0.93]: clearly below 1.
#   brain 16 species b = 0.77 [0.63, 0.92], R² 0.91: below 1, and 0.7 inside the CI. (Earlier,
#   with 6 species, the CI still reached past 1: the human brain is large for its body.)
@pytest.mark.parametrize("quantity, compartment", [("tissue_mass", "heart"), ("tissue_mass", "lung"),
                                                   ("tissue_mass", "spleen"), ("blood_volume", "blood")])
def test_organ_masses_scale_near_one(real_store, quantity, compartment):
    fit = _fit_or_skip(real_store, quantity, compartment).fit
    assert fit.b_ci[0] <= 1.0 <= fit.b_ci[1], (compartment, fit.b, fit.b_ci, fit.labels)
    assert 0.8 < fit.b < 1.2


@pytest.mark.parametrize("compartment, published", [("liver", 0.85), ("kidney", 0.85)])
def test_liver_and_kidney_mass_exponents_below_one(real_store, compartment, published):
    """Boxenbaum's liver exponent and Lindstedt & Schaeffer's kidney exponent (0.85 both, from memory)
    lie in the CI, and the fitted exponent is below 1 (with five species the CI may still reach 1)."""
    fit = _fit_or_skip(real_store, "tissue_mass", compartment).fit
    assert fit.b_ci[0] <= published <= fit.b_ci[1], (fit.b, fit.b_ci, fit.labels)
    assert fit.b < 0.95 and fit.b_ci[1] < 1.05, (fit.b, fit.b_ci)


def test_brain_mass_exponent_below_one(real_store):
    """Brain about M^0.7 (Lindstedt & Schaeffer 2002, from memory): 0.7 lies in the CI and the
    whole CI lies below 1."""
    fit = _fit_or_skip(real_store, "tissue_mass", "brain").fit
    assert fit.b_ci[0] <= 0.7 <= fit.b_ci[1], (fit.b, fit.b_ci, fit.labels)
    assert fit.b_ci[1] < 1.0, (fit.b, fit.b_ci, fit.labels)


def test_pieces_and_carcass_shares_follow_the_sets_rules(real_store):
    """Carcass bone of goats (luo2000: head and feet removed, a share of the carcass) is a piece of the
    skeleton: the fit leaves it out and says so, as parameter sets do, instead of multiplying a share
    of the carcass by live body mass."""
    from bodyplan.api.allometry import absolute_rows

    kept, skipped = absolute_rows(real_store, "tissue_mass", "bone", "juvenile", "mammals")
    goat = skipped[skipped["source"] == "luo2000"]
    assert len(goat) >= 2 and all(goat["reason"].str.startswith("part segment: not the whole bone"))
    assert "luo2000" not in set(kept["source"])
