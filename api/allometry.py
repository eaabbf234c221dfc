"""Cross-species allometry: log10(value) = log10(a) + b·log10(body mass), one point per species.

The fit is ordinary least squares on the log–log points (scipy.stats.linregress); intervals use
Student's t with n − 2 degrees of freedom. The prediction interval is for a new species at a
given body mass, back-transformed to the original scale (so it is asymmetric there).
"""

from __future__ import annotations

from ..errors import BodyplanError

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..schema.model import BODY_MASS_SHARES

if TYPE_CHECKING:  # pandas loads lazily, inside the functions that need it
    import pandas as pd


class AllometryError(BodyplanError, ValueError):
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


# ---- from the store to one point per species ------------------------------------------------------

CLASSES = {"mammals": "mammal", "birds": "bird", "fish": "fish", "all": None}


@dataclass
class AllometryResult:
    quantity: str
    compartment: str
    life_stage: str
    taxon_class: str
    unit: str  # canonical unit of the absolute values
    points: "pd.DataFrame"  # one row per species in the fit
    skipped: "pd.DataFrame"  # curated rows left out, with the reason
    fit: AllometricFit

    def predict(self, body_mass_kg: float, level: float = 0.95) -> dict:
        value, low, high = self.fit.predict(body_mass_kg, level)
        return {"body_mass_kg": body_mass_kg, "value": value, "low": low, "high": high, "unit": self.unit,
                "level": level}

    def to_dict(self) -> dict:
        import json

        return {"quantity": self.quantity, "compartment": self.compartment, "life_stage": self.life_stage,
                "class": self.taxon_class, "unit": self.unit,
                "model": f"value in {self.unit} = a · (body mass in kg)^b", "fit": self.fit.to_dict(),
                "points": json.loads(self.points.to_json(orient="records")),
                "skipped": json.loads(self.skipped.to_json(orient="records"))}


def species_body_mass(store, species: str, life_stage: str) -> tuple[float | None, str]:
    """A species' typical body mass (kg) at a stage: mean of its body_mass values, else the median
    of the subjects' body masses on its rows; None when the store has neither."""
    rows = store.query("SELECT value_canonical FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
                       "AND quantity_id = 'body_mass' AND value_canonical IS NOT NULL", (species, life_stage))
    if rows:
        return float(np.mean([r[0] for r in rows])), f"mean of {len(rows)} body_mass value(s)"
    rows = store.query("SELECT subject_body_mass_kg FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
                       "AND subject_body_mass_kg IS NOT NULL", (species, life_stage))
    if rows:
        return float(np.median([r[0] for r in rows])), f"median subject body mass of {len(rows)} row(s)"
    return None, "no body mass stored"


def _default_compartment(store, quantity: str) -> str:
    found = [r[0] for r in store.query("SELECT DISTINCT compartment_id FROM curated_values WHERE quantity_id IN "
                                       "(?, ?) ORDER BY 1", (quantity, BODY_MASS_SHARES.get(quantity, quantity)))]
    if len(found) == 1:
        return found[0]
    if "whole_body" in found:
        return "whole_body"
    raise AllometryError(f"{quantity} is stored for several compartments ({', '.join(found)}); "
                         "name one with --compartment")


def absolute_rows(store, quantity: str, compartment: str, life_stage: str = "adult",
                  taxon_class: str = "mammals") -> tuple["pd.DataFrame", "pd.DataFrame"]:
    """Every curated row of the quantity that counts (the parameter sets' own rules: parts that are not
    the whole, methods not accepted, the same animals twice and shares of empty body or carcass without
    their source's ratio are left out, with why) turned into its absolute canonical form."""
    import pandas as pd

    from .rows import CountedRows

    if taxon_class not in CLASSES:
        raise AllometryError(f"unknown class {taxon_class!r}; use one of {', '.join(CLASSES)}")
    wanted = [quantity] + ([BODY_MASS_SHARES[quantity]] if quantity in BODY_MASS_SHARES else [])
    sql = "SELECT DISTINCT v.species_id, s.taxon_class FROM curated_values v JOIN species s ON s.id = v.species_id " \
          f"WHERE v.quantity_id IN ({', '.join('?' for _ in wanted)}) AND v.compartment_id = ? AND v.life_stage_id = ?"
    params = [*wanted, compartment, life_stage]
    if CLASSES[taxon_class]:
        sql += " AND s.taxon_class = ?"
        params.append(CLASSES[taxon_class])
    columns = ["species", "quantity", "normalisation", "value_canonical", "subject_body_mass_kg", "source", "row_id",
               "verified", "taxon_class", "part", "denominator"]
    kept, skipped = [], []
    for species, taxon in store.query(sql + " ORDER BY 1", params):
        counted = CountedRows(store, species, life_stage, all_methods=False)
        typical, typical_note = species_body_mass(store, species, life_stage)

        def described(r):
            return {"species": species, "quantity": r["quantity_id"], "normalisation": r["normalisation"],
                    "value_canonical": r["value_canonical"], "subject_body_mass_kg": r["subject_body_mass_kg"],
                    "source": r["source_id"], "row_id": r["row_id"], "verified": r["verified"], "taxon_class": taxon,
                    "part": r["part_id"], "denominator": r["denominator"]}

        for r in counted.all_rows:
            why = counted.left_out.get((r["source_id"], r["row_id"]))
            if why and r["quantity_id"] in wanted and r["compartment_id"] == compartment:
                skipped.append({**described(r), "reason": why})
        for r in (r for q in wanted for r in counted.rows(q, compartment)):
            if r["subject_body_mass_kg"] is not None:
                mass, mass_from = float(r["subject_body_mass_kg"]), "subjects' body mass on the row"
            elif typical is not None:
                mass, mass_from = typical, f"species' typical body mass ({typical_note})"
            else:
                skipped.append({**described(r), "reason": f"no body mass stored for {species} ({life_stage})"})
                continue
            if r["normalisation"] in ("body_surface", "tissue_mass"):
                skipped.append({**described(r), "reason": f"per {r['normalisation'].replace('_', ' ')}: needs a "
                                f"{'body surface area' if r['normalisation'] == 'body_surface' else 'tissue mass'} "
                                "of the same subjects to become absolute"})
                continue
            relative = r["quantity_id"] != quantity or r["normalisation"] == "body_mass"
            ratio = counted.body_ratio(r)  # a share of empty body or carcass through the source's own ratio
            value = r["value_canonical"] * ratio * mass if relative else r["value_canonical"]
            kept.append({**described(r), "absolute": value, "body_mass_kg": mass, "body_mass_from": mass_from,
                         "converted": (f"× {mass:.4g} kg body mass" + (f" × {ratio:.4g} ({r['denominator']} to live)"
                                                                      if ratio != 1.0 else "")) if relative else ""})
    return (pd.DataFrame(kept, columns=columns + ["absolute", "body_mass_kg", "body_mass_from", "converted"]),
            pd.DataFrame(skipped, columns=columns + ["reason"]))


def species_points(rows: "pd.DataFrame") -> "pd.DataFrame":
    """One point per species: the mean absolute value and the mean body mass of its rows."""
    import pandas as pd

    if not len(rows):
        return pd.DataFrame(columns=["species", "body_mass_kg", "value", "n_rows", "sources", "converted_rows"])
    grouped = rows.groupby("species", sort=True)
    return pd.DataFrame({
        "body_mass_kg": grouped["body_mass_kg"].mean(),
        "value": grouped["absolute"].mean(),
        "n_rows": grouped.size(),
        "sources": grouped["source"].agg(lambda s: "; ".join(dict.fromkeys(s))),
        "converted_rows": grouped["converted"].agg(lambda s: int((s != "").sum())),
    }).reset_index()


def allometry(store, quantity: str, compartment: str | None = None, life_stage: str = "adult",
              taxon_class: str = "mammals", level: float = 0.95) -> AllometryResult:
    """Fit value = a · body_mass^b across the species that have the quantity (one point per species)."""
    store.require("quantities", quantity, "quantity")
    store.require("life_stages", life_stage, "life stage")
    if quantity == "body_mass":
        raise AllometryError("body_mass is the predictor; choose another quantity")
    if compartment is None:
        compartment = _default_compartment(store, quantity)
    store.require("compartments", compartment, "compartment")
    rows, skipped = absolute_rows(store, quantity, compartment, life_stage, taxon_class)
    points = species_points(rows)
    if len(points) < 3:
        have = ", ".join(points["species"]) or "none"
        raise AllometryError(f"{quantity} of {compartment} ({life_stage}, {taxon_class}) with a body mass is "
                             f"stored for {len(points)} species ({have}); a fit needs at least 3")
    fit = fit_power_law(points["body_mass_kg"].to_numpy(), points["value"].to_numpy(), list(points["species"]),
                        level=level)
    _, low, high = fit.predict(fit.body_mass_kg, level)
    points["predicted"] = fit.predict(fit.body_mass_kg, level)[0]
    points["low"], points["high"] = low, high
    points["outside_interval"] = (points["value"] < low) | (points["value"] > high)
    unit = store.query("SELECT canonical_unit FROM quantities WHERE id = ?", (quantity,))[0][0]
    return AllometryResult(quantity, compartment, life_stage, taxon_class, unit, points, skipped, fit)
