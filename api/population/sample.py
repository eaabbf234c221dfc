"""Drawing individuals: distributions with the specified arithmetic mean and SD, body mass first, and
both balances kept in every individual.

Random numbers come from a fixed grid of blocks of ``GRID`` individuals; block i draws from
``SeedSequence(seed).spawn(2)[1].spawn(i + 1)[i]`` (spawn key (1, i)), and a population-level draw (the
means, when their uncertainty is sampled) from spawn key (0,). Any chunking of the blocks gives the same
numbers.

Balance rules (``spec.balance``): per kg of body mass the named compartments' masses (volume × density)
must leave rest_of_body ≥ 0, and the named systemic flows as fractions of cardiac output must sum to ≤ 1.
Both conditions are free of body mass and cardiac output, so only the volume (or flow) shares of an
individual that breaks one are touched: ``redraw`` draws them again until it holds (a truncation of
their joint distribution), ``rescale`` shrinks them in proportion until the rest is exactly zero.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .spec import PopulationError, PopulationSpec, Variable

GRID = 8192  # individuals per random-number block and per Parquet row group
MAX_REDRAWS = 1000  # rounds of redrawing before a set is declared too tight to balance


# ---- distributions ------------------------------------------------------------------------------------
def lognormal_parameters(mean: float, sd: float) -> tuple[float, float]:
    """μ and σ of the log so the arithmetic mean and SD are ``mean`` and ``sd``."""
    sigma2 = math.log1p((sd / mean) ** 2)
    return math.log(mean) - sigma2 / 2, math.sqrt(sigma2)


def beta_parameters(mean: float, sd: float) -> tuple[float, float]:
    """α and β of a beta distribution with this mean and SD (needs SD² < mean·(1 − mean))."""
    k = mean * (1 - mean) / sd**2 - 1
    return mean * k, (1 - mean) * k


def scipy_distribution(var: Variable):
    """The frozen scipy.stats distribution a variable is drawn from (for checks and percentiles)."""
    from scipy import stats

    if var.distribution == "lognormal":
        mu, sigma = lognormal_parameters(var.mean, var.sd)
        return stats.lognorm(s=sigma, scale=math.exp(mu))
    if var.distribution == "beta":
        share = var.density or 1.0
        return stats.beta(*beta_parameters(var.mean * share, var.sd * share), scale=1 / share)
    if var.distribution == "uniform":
        return stats.uniform(loc=var.low, scale=var.high - var.low)
    raise ValueError(f"{var.column} is held fixed")


def draw(var: Variable, rng: np.random.Generator, size: int, mean: float | None = None) -> np.ndarray:
    """``size`` values of one variable (``mean`` overrides the variable's mean, keeping its CV)."""
    m = var.mean if mean is None else mean
    sd = None if var.sd is None else var.sd * m / var.mean
    if var.distribution == "fixed" or not sd:
        return np.full(size, m)
    if var.distribution == "lognormal":
        mu, sigma = lognormal_parameters(m, sd)
        return np.exp(mu + sigma * rng.standard_normal(size))
    if var.distribution == "beta":  # a volume's share is its mass share of body mass: volume × density
        share = var.density or 1.0
        return rng.beta(*beta_parameters(m * share, sd * share), size) / share
    if var.distribution == "uniform":
        return rng.uniform(var.low, var.high, size)
    raise ValueError(f"unknown distribution {var.distribution!r}")


def block_rng(seed: int, block: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(1, block)))


def population_means(spec: PopulationSpec, seed: int, mean_uncertainty: bool) -> dict[str, float]:
    """The means this population is drawn around: the pooled means, or on request one draw of each mean
    from its predictive distribution for a new group of animals (SD² = tau² + SE², DerSimonian–Laird)."""
    means = {v.column: v.mean for v in [spec.body_mass, *spec.variables]}
    if not mean_uncertainty:
        return means
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0,)))
    for v in [spec.body_mass, *spec.variables]:
        spread = math.sqrt((v.tau2 or 0.0) + (v.mean_se or 0.0) ** 2)
        if spread > 0 and v.distribution != "uniform":
            kind = "beta" if v.distribution == "beta" else "lognormal"
            level = Variable(v.column, v.parameter, v.compartment, v.unit, v.form, v.mean, spread, kind, "")
            means[v.column] = float(draw(level, rng, 1)[0])
    return means


# ---- one block ----------------------------------------------------------------------------------------
@dataclass
class BlockStats:
    """Sums for the moments of each drawn variable before (``first``) and after the balance (``kept``),
    centred on the variable's mean; how many individuals the balance touched."""

    n: int
    first: np.ndarray  # (variables, 2): Σ(x − m), Σ(x − m)²
    kept: np.ndarray
    touched_volumes: int
    touched_flows: int
    rounds: int


def _balance(shares: np.ndarray, weights: np.ndarray, redraw, rule: str, what: str) -> tuple[int, int]:
    """Keep Σ shares·weights ≤ 1 in every row of ``shares`` (individuals × variables), in place."""
    bad = np.flatnonzero(shares @ weights > 1.0)
    touched, rounds = len(bad), 0
    if rule == "rescale":
        if len(bad):
            shares[bad] /= (shares[bad] @ weights)[:, None]
        return touched, 0
    while len(bad):
        rounds += 1
        if rounds > MAX_REDRAWS:
            raise PopulationError(f"after {MAX_REDRAWS} redraws {len(bad)} individual(s) still have {what}; the "
                                  "means leave too little room: use balance='rescale' or a smaller CV")
        shares[bad] = redraw(len(bad))
        bad = bad[shares[bad] @ weights > 1.0]
    return touched, rounds


def draw_block(spec: PopulationSpec, means: dict[str, float], seed: int, block: int, size: int
               ) -> tuple[np.ndarray, BlockStats]:
    """One block of individuals as a (size × columns) float matrix in ``spec.columns()`` order."""
    rng = block_rng(seed, block)
    variables = spec.variables
    bm = draw(spec.body_mass, rng, size, means["body_mass"])
    drawn = {v.column: draw(v, rng, size, means[v.column]) for v in variables}
    first = _moments(spec, means, bm, drawn)
    vols, flows = spec.volumes, spec.flows
    touched_v = touched_f = rounds = 0
    if vols:
        shares = np.column_stack([drawn[v.column] for v in vols])
        density = np.array([v.density for v in vols])
        tv, rv = _balance(shares, density, lambda k: np.column_stack([draw(v, rng, k, means[v.column]) for v in vols]),
                          spec.balance, "more named mass than body mass")
        touched_v, rounds = tv, rv
        for i, v in enumerate(vols):
            drawn[v.column] = shares[:, i]
    if flows:
        shares = np.column_stack([drawn[v.column] for v in flows])
        tf, rf = _balance(shares, np.ones(len(flows)),
                          lambda k: np.column_stack([draw(v, rng, k, means[v.column]) for v in flows]),
                          spec.balance, "named flows above cardiac output")
        touched_f, rounds = tf, max(rounds, rf)
        for i, v in enumerate(flows):
            drawn[v.column] = shares[:, i]
    kept = _moments(spec, means, bm, drawn)
    return _assemble(spec, means, bm, drawn, size), BlockStats(size, first, kept, touched_v, touched_f, rounds)


def _moments(spec, means, bm, drawn) -> np.ndarray:
    rows = [bm - means["body_mass"]] + [drawn[v.column] - means[v.column] for v in spec.variables]
    return np.array([[float(np.sum(d)), float(np.sum(d * d))] for d in rows])


def _assemble(spec: PopulationSpec, means, bm, drawn, size) -> np.ndarray:
    from ..layouts import REST
    from ..checks import REST_DENSITY

    co_var = next(v for v in spec.variables if v.column == "cardiac_output")
    ratio = bm / spec.body_mass.mean  # cardiac output is drawn at the reference body mass
    co = drawn["cardiac_output"] * (ratio if co_var.exponent == 1 else ratio**co_var.exponent)
    columns = {"body_mass": bm, "cardiac_output": co}
    for v in spec.variables:
        if v.parameter == "gfr":
            columns[v.column] = drawn[v.column] * bm
        elif v.parameter == "hematocrit":
            columns[v.column] = drawn[v.column]
    named_mass = np.zeros(size)
    for v in spec.volumes:
        columns[v.column] = drawn[v.column] * bm
        named_mass += columns[v.column] * v.density
    named_flow = np.zeros(size)
    for v in spec.flows:
        columns[v.column] = drawn[v.column] * co
        named_flow += drawn[v.column]
    for comp in spec.pulmonary:
        columns[f"{comp}.blood_flow"] = co
    columns[f"{REST}.volume"] = np.maximum(bm - named_mass, 0.0) / REST_DENSITY  # ≥ 0 up to rounding
    columns[f"{REST}.blood_flow"] = np.maximum(1.0 - named_flow, 0.0) * co
    out = np.empty((size, len(spec.columns())))
    for i, (name, _) in enumerate(spec.columns()):
        out[:, i] = columns[name]
    return out
