"""Combining several studies of one parameter, visibly and reproducibly.

With a standard error for every study: a DerSimonian–Laird random-effects mean.
Otherwise: the plain mean of the study values, with their range, said as such.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Estimate:
    value: float
    se: float | None  # standard error of the combined value
    sd: float | None  # between-subject sd where one study gives it; None when pooled
    low: float | None  # range of study values (fallback) or None
    high: float | None
    method: str  # "single study", "DerSimonian–Laird random effects", "mean of study values"
    n_studies: int
    sources: tuple[str, ...] = ()
    tau2: float | None = None
    i2: float | None = None
    details: dict = field(default_factory=dict)

    def scaled(self, factor: float) -> "Estimate":
        """The same estimate multiplied by a positive factor (a body weight, a cardiac output)."""
        mul = lambda x: None if x is None else x * factor  # noqa: E731
        return Estimate(self.value * factor, mul(self.se), mul(self.sd), mul(self.low), mul(self.high),
                        self.method, self.n_studies, self.sources,
                        None if self.tau2 is None else self.tau2 * factor**2, self.i2, self.details)


def dersimonian_laird(y: np.ndarray, se: np.ndarray) -> tuple[float, float, float, float]:
    """Random-effects mean, its standard error, tau² and I² (DerSimonian & Laird 1986)."""
    w = 1.0 / se**2
    fixed = np.sum(w * y) / np.sum(w)
    q = float(np.sum(w * (y - fixed) ** 2))
    df = len(y) - 1
    c = np.sum(w) - np.sum(w**2) / np.sum(w)
    tau2 = max(0.0, (q - df) / c) if c > 0 else 0.0
    w_star = 1.0 / (se**2 + tau2)
    mean = float(np.sum(w_star * y) / np.sum(w_star))
    i2 = max(0.0, (q - df) / q) if q > 0 else 0.0
    return mean, float(np.sqrt(1.0 / np.sum(w_star))), float(tau2), float(i2)


def pool(values, sds=None, ns=None, sources=()) -> Estimate:
    """Combine study values (one per study) with their sds and subject counts where known."""
    y = np.asarray(values, dtype=float)
    if len(y) == 0:
        raise ValueError("nothing to pool")
    sd = np.full(len(y), np.nan) if sds is None else np.asarray(sds, dtype=float)
    n = np.full(len(y), np.nan) if ns is None else np.asarray(ns, dtype=float)
    se = sd / np.sqrt(n)
    srcs = tuple(dict.fromkeys(sources))
    if len(y) == 1:
        s = None if np.isnan(se[0]) else float(se[0])
        return Estimate(float(y[0]), s, None if np.isnan(sd[0]) else float(sd[0]), None, None,
                        "single study", 1, srcs, details={"weights": [1.0]})
    if np.all(np.isfinite(se) & (se > 0)):
        mean, se_mean, tau2, i2 = dersimonian_laird(y, se)
        weights = 1.0 / (se**2 + tau2)
        return Estimate(mean, se_mean, None, float(y.min()), float(y.max()),
                        "DerSimonian–Laird random effects", len(y), srcs, tau2, i2,
                        {"weights": (weights / weights.sum()).tolist()})
    return Estimate(float(y.mean()), None, None, float(y.min()), float(y.max()),
                    "mean of study values (not every study gives sd and n)", len(y), srcs,
                    details={"weights": [1.0 / len(y)] * len(y)})
