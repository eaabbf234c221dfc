"""The log–log picture of a cross-species fit: labelled species, the line, its confidence and prediction bands."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from . import figure_png
from ..api.allometry import AllometryResult


def allometry_figure(result: AllometryResult, prediction: dict | None = None, species: str | None = None):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fit, points = result.fit, result.points
    masses = list(points["body_mass_kg"]) + ([prediction["body_mass_kg"]] if prediction else [])
    lo, hi = np.log10(min(masses)), np.log10(max(masses))
    pad = 0.08 * (hi - lo or 1.0)
    grid = np.logspace(lo - pad, hi + pad, 200)
    line, ci_low, ci_high = fit.confidence_band(grid, fit.level)
    _, pi_low, pi_high = fit.predict(grid, fit.level)
    pct = f"{fit.level * 100:g} %"

    fig, ax = plt.subplots(figsize=(7.5, 5.8), dpi=150)
    ax.fill_between(grid, pi_low, pi_high, color="0.88", label=f"{pct} prediction interval (new species)")
    ax.fill_between(grid, ci_low, ci_high, color="0.68", label=f"{pct} confidence band of the line")
    ax.plot(grid, line, color="black", linewidth=1.4,
            label=f"fit: {fit.a:.3g} · $M^{{{fit.b:.3f}}}$   (R² {fit.r2:.3f}, n {fit.n} species)")
    outside = points["outside_interval"].to_numpy(bool)
    ax.scatter(points.loc[~outside, "body_mass_kg"], points.loc[~outside, "value"], s=30, marker="o",
               color="#1f4e9c", edgecolor="black", linewidth=0.5, zorder=3, label="species (mean of its rows)")
    if outside.any():
        ax.scatter(points.loc[outside, "body_mass_kg"], points.loc[outside, "value"], s=55, marker="^",
                   color="#e69f00", edgecolor="black", linewidth=0.6, zorder=3,
                   label="outside the prediction interval")
    for i, row in enumerate(points.itertuples(index=False)):
        ax.annotate(row.species.replace("_", " "), (row.body_mass_kg, row.value),
                    xytext=(-6, 7) if i % 2 else (6, -11), ha="right" if i % 2 else "left",
                    textcoords="offset points", fontsize=8, fontweight="bold" if outside[i] else "normal",
                    zorder=5, bbox=dict(boxstyle="round,pad=0.15", facecolor="white", edgecolor="none", alpha=0.8))
    if prediction:
        m, v = prediction["body_mass_kg"], prediction["value"]
        ax.errorbar([m], [v], yerr=[[v - prediction["low"]], [prediction["high"] - v]], fmt="*", markersize=12,
                    color="#cc3311", ecolor="#cc3311", capsize=4, zorder=4,
                    label=f"predicted{' for ' + species.replace('_', ' ') if species else ''}: "
                          f"{v:.3g} {result.unit} ({prediction['low']:.3g}–{prediction['high']:.3g})")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("body mass (kg)")
    what = result.quantity.replace("_", " ")
    where = "" if result.compartment == "whole_body" else f" of {result.compartment.replace('_', ' ')}"
    ax.set_ylabel(f"{what}{where} ({result.unit})")
    group = "all classes" if result.taxon_class == "all" else result.taxon_class
    ax.set_title(f"{what}{where}: {group}, {result.life_stage}\n"
                 f"b = {fit.b:.3f} [{fit.b_ci[0]:.3f}, {fit.b_ci[1]:.3f}],  "
                 f"a = {fit.a:.3g} [{fit.a_ci[0]:.3g}, {fit.a_ci[1]:.3g}]  ({pct} CI)", fontsize=10)
    ax.grid(True, which="major", color="0.85", linewidth=0.6)
    ax.legend(fontsize=7.5, loc="upper left", frameon=True)
    fig.tight_layout()
    return fig


def write_allometry_png(result: AllometryResult, path: str | Path | None = None, prediction: dict | None = None,
                        species: str | None = None) -> bytes:
    return figure_png(allometry_figure(result, prediction, species), path)
