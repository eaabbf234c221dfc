"""Cross-species allometry: log10(value) = log10(a) + b·log10(body mass), one point per species.

The fit is ordinary least squares on the log–log points (scipy.stats.linregress); intervals use
Student's t with n − 2 degrees of freedom. The prediction interval is for a new species at a
given body mass, back-transformed to the original scale (so it is asymmetric there).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np


class AllometryError(ValueError):
    """Too few species, or values a power law cannot take (zero, negative, missing)."""


@dataclass(frozen=True)
class AllometricFit:
    a: float  # coefficient on the original scale: value = a · body_mass_kg ** b
    b: float  # exponent
    a_ci: tuple[float, float]  # 95 % confidence interval of a
    b_ci: tuple[float, float]  # 95 % confidence interval of b
    r2: float
    n: int
    residual_sd: float  # residual sd of log10(value)
    labels: list[str]
    body_mass_kg: np.ndarray = field(repr=False)
    values: np.ndarray = field(repr=False)
    level: float = 0.95

    # log10 summaries the intervals need
    @property
    def _x(self) -> np.ndarray:
        return np.log10(self.body_mass_kg)

    @property
    def _y(self) -> np.ndarray:
        return np.log10(self.values)

    def _t(self, level: float) -> float:
        from scipy import stats

        return float(stats.t.ppf(0.5 + level / 2, self.n - 2))

    def _log_band(self, body_mass_kg, level: float, new_observation: bool):
        x0 = np.log10(np.asarray(body_mass_kg, dtype=float))
        x = self._x
        sxx = float(np.sum((x - x.mean()) ** 2))
        centre = math.log10(self.a) + self.b * x0
        extra = 1.0 if new_observation else 0.0
        se = self.residual_sd * np.sqrt(extra + 1.0 / self.n + (x0 - x.mean()) ** 2 / sxx)
        half = self._t(level) * se
        return centre, centre - half, centre + half

    def predict(self, body_mass_kg, level: float = 0.95):
        """Predicted value with its prediction interval (a new species), on the original scale."""
        return _scale(self._log_band(body_mass_kg, level, new_observation=True), body_mass_kg)

    def confidence_band(self, body_mass_kg, level: float = 0.95):
        """The fitted line with the confidence interval of the mean, on the original scale."""
        return _scale(self._log_band(body_mass_kg, level, new_observation=False), body_mass_kg)

    def outliers(self, level: float = 0.95) -> list[str]:
        """Species whose point lies outside the prediction interval at its own body mass."""
        _, low, high = self.predict(self.body_mass_kg, level)
        outside = (self.values < low) | (self.values > high)
        return [label for label, out in zip(self.labels, outside) if out]

    def residuals(self) -> np.ndarray:
        """log10(observed / fitted) per species."""
        return self._y - (math.log10(self.a) + self.b * self._x)

    def to_dict(self, level: float = 0.95) -> dict:
        return {"a": self.a, "b": self.b, "a_ci": list(self.a_ci), "b_ci": list(self.b_ci), "r2": self.r2,
                "n": self.n, "residual_sd_log10": self.residual_sd, "level": self.level,
                "outliers": self.outliers(level)}


def _scale(log_band, like):
    """Back to the original scale; plain floats for a scalar body mass, arrays otherwise."""
    out = tuple(10.0**np.asarray(part) for part in log_band)
    return tuple(float(part) for part in out) if np.ndim(like) == 0 else out


def fit_power_law(body_mass_kg, values, labels: list[str] | None = None, level: float = 0.95) -> AllometricFit:
    """OLS of log10(values) on log10(body_mass_kg); one point per species, at least three."""
    from scipy import stats

    x_raw = np.asarray(body_mass_kg, dtype=float)
    y_raw = np.asarray(values, dtype=float)
    if x_raw.shape != y_raw.shape or x_raw.ndim != 1:
        raise AllometryError("body masses and values must be two 1-D arrays of the same length")
    labels = [str(i) for i in range(len(x_raw))] if labels is None else [str(s) for s in labels]
    if len(labels) != len(x_raw):
        raise AllometryError("one label per point is needed")
    bad = ~(np.isfinite(x_raw) & np.isfinite(y_raw) & (x_raw > 0) & (y_raw > 0))
    if bad.any():
        names = ", ".join(label for label, b in zip(labels, bad) if b)
        raise AllometryError(f"a power law needs positive, finite body masses and values; not so for: {names}")
    n = len(x_raw)
    if n < 3:
        raise AllometryError(f"a power-law fit with intervals needs at least 3 species; got {n}")
    x, y = np.log10(x_raw), np.log10(y_raw)
    if np.ptp(x) == 0:
        raise AllometryError("all species have the same body mass; the exponent cannot be estimated")
    fit = stats.linregress(x, y)
    t = float(stats.t.ppf(0.5 + level / 2, n - 2))
    resid = y - (fit.intercept + fit.slope * x)
    residual_sd = float(np.sqrt(np.sum(resid**2) / (n - 2)))
    a_log_ci = (fit.intercept - t * fit.intercept_stderr, fit.intercept + t * fit.intercept_stderr)
    return AllometricFit(
        a=float(10.0**fit.intercept), b=float(fit.slope),
        a_ci=(float(10.0 ** a_log_ci[0]), float(10.0 ** a_log_ci[1])),
        b_ci=(float(fit.slope - t * fit.stderr), float(fit.slope + t * fit.stderr)),
        r2=float(fit.rvalue**2), n=n, residual_sd=residual_sd, labels=labels,
        body_mass_kg=x_raw, values=y_raw, level=level)
