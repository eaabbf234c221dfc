"""Cross-species allometry: the fit itself, and the bundled data against published exponents."""

from __future__ import annotations

import numpy as np
import pytest

from bodyplan.api.allometry import AllometryError, fit_power_law

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
