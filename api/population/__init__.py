"""Virtual populations: Monte Carlo individuals drawn from the stored between-animal variability, with
the mass and flow balances kept in every individual (``spec`` what is drawn, ``sample`` how, ``run``
chunks, processes, files and the sidecar)."""

from __future__ import annotations

from .run import FORMATS, Population, draw_population, grid
from .sample import GRID, beta_parameters, draw_block, lognormal_parameters, population_means, scipy_distribution
from .spec import DEFAULT_CV, PopulationError, PopulationSpec, Variable, population_spec

SPEC_OPTIONS = ("life_stage", "sex", "body_mass", "body_mass_cv", "body_mass_range", "layout", "fill",
                "without_sd", "default_cv", "balance", "stage_fallback", "animal_class", "verified_only", "temperature")


def population(store, species: str, n: int, seed: int, **options) -> Population:
    """``n`` individuals of ``species`` drawn with ``seed``. Options of the spec: life_stage, sex, body_mass,
    body_mass_cv, body_mass_range, layout, fill, without_sd ("fixed" or "default_cv"), default_cv,
    balance ("redraw" or "rescale"), stage_fallback, animal_class, verified_only, temperature; ``as_sets=True`` refuses a
    population whose individuals could not be parameter sets before drawing it; of the run: out, fmt, chunk_size, workers, mean_uncertainty, progress."""
    spec = population_spec(store, species, **{k: v for k, v in options.items() if k in SPEC_OPTIONS})
    if options.pop("as_sets", False):  # individuals will become parameter sets: refuse gaps before drawing
        from .individuals import refuse_gaps

        refuse_gaps(spec)
    return draw_population(spec, n, seed, **{k: v for k, v in options.items() if k not in SPEC_OPTIONS})


def percentile_interval(values, q: float = 0.99, *, confidence: float = 0.95, resamples: int = 1000, seed: int = 0):
    """The ``q`` quantile of ``values`` with a percentile-bootstrap confidence interval: (estimate, low, high)."""
    import numpy as np

    x = np.asarray(values, dtype=float)
    rng = np.random.default_rng(seed)
    boots = np.quantile(x[rng.integers(0, len(x), (resamples, len(x)))], q, axis=1) if len(x) * resamples <= 5e7 \
        else np.array([np.quantile(x[rng.integers(0, len(x), len(x))], q) for _ in range(resamples)])
    alpha = (1 - confidence) / 2
    return float(np.quantile(x, q)), float(np.quantile(boots, alpha)), float(np.quantile(boots, 1 - alpha))


__all__ = ["DEFAULT_CV", "FORMATS", "GRID", "Population", "PopulationError", "PopulationSpec", "Variable",
           "beta_parameters", "draw_block", "draw_population", "grid", "lognormal_parameters", "percentile_interval",
           "population", "population_means", "population_spec", "scipy_distribution"]
