"""Resolve one species' parameters from its curated rows, each as a per-body-weight estimate.

Every route from a stored row to a model number is spelled out here: a mass fraction over
a tissue density, an absolute organ mass over the subjects' body mass, a flow over the cardiac
output of the same body mass. Rows of one source for one parameter count as separate studies
only when they describe different subjects (sex, strain, age); a source that gives both a mass
and a fraction for the same organ contributes one of them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from .pooling import Estimate, pool

ROW_COLUMNS = ("source_id, row_id, compartment_id, quantity_id, normalisation, value_canonical, sd_canonical, "
               "n, subject_body_mass_kg, sex, strain, age, verified, file, line")
VOLUME_ROUTES = ["tissue_volume", "tissue_mass", "tissue_mass_fraction"]
FLOW_ROUTES = ["blood_flow_fraction", "blood_flow"]
FLUID_VOLUME = {"blood": "blood_volume", "plasma": "plasma_volume"}
SKIP_AS_PART = {"hepatic_artery", "portal_vein"}  # vessels carry the whole's flow, they are not extra tissue
PORTAL_ORGANS = {"gut", "spleen", "pancreas", "stomach", "small_intestine", "large_intestine"}
ABSOLUTE_ROUTES = {"tissue_volume", "tissue_mass", "blood_volume", "plasma_volume", "blood_flow", "cardiac_output"}
SAME_BODY_WEIGHT = 0.02  # relative difference under which rows describe the requested body weight


@dataclass
class Resolved:
    """A parameter per kg body weight (volumes) or as a fraction of cardiac output (flows)."""

    estimate: Estimate | None
    rows: pd.DataFrame  # the curated rows behind it
    notes: list[str] = field(default_factory=list)
    absolute_at: list[float] = field(default_factory=list)  # subject body masses of absolute rows
    reason: str = ""  # why it is a gap

    @property
    def ok(self) -> bool:
        return self.estimate is not None


class Resolver:
    """All rows of one species, stage and sex, and the rules turning them into estimates."""

    def __init__(self, store, species: str, life_stage: str = "adult", sex: str | None = None):
        self.store, self.species, self.life_stage, self.sex = store, species, life_stage, sex
        sql = (f"SELECT {ROW_COLUMNS} FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
               "AND value_canonical IS NOT NULL")
        params = [species, life_stage]
        if sex:
            sql += " AND sex IN (?, 'mixed', 'unknown')"
            params.append(sex)
        self.rows = store.frame(sql, params)

    def _rows(self, quantity: str, compartment: str, normalisations=None) -> pd.DataFrame:
        r = self.rows
        mask = (r["quantity_id"] == quantity) & (r["compartment_id"] == compartment)
        if normalisations is not None:
            mask &= r["normalisation"].isin(normalisations)
        return r[mask]

    # ---- body weight -------------------------------------------------------------------------
    @cached_property
    def body_weight(self) -> Resolved:
        rows = self._rows("body_mass", "whole_body")
        if len(rows):
            return Resolved(_pool_rows(rows, rows["value_canonical"]), rows)
        masses = self.rows["subject_body_mass_kg"].dropna()
        if len(masses):
            est = Estimate(float(masses.median()), None, None, float(masses.min()), float(masses.max()),
                           "median of the subjects' body masses on this species' rows", len(masses),
                           tuple(dict.fromkeys(self.rows.loc[masses.index, "source_id"])))
            return Resolved(est, self.rows.loc[masses.index])
        return Resolved(None, rows, reason=f"no body mass stored for {self.species} ({self.life_stage})")

    def _subject_mass(self, rows: pd.DataFrame) -> pd.Series:
        """Each row's subjects' body mass, else the species' typical body mass."""
        default = self.body_weight.estimate.value if self.body_weight.ok else np.nan
        return rows["subject_body_mass_kg"].fillna(default)

    # ---- densities ---------------------------------------------------------------------------
    def density(self, compartment: str) -> tuple[float, str, tuple[str, ...]]:
        """Tissue density in kg/L: this species, else all species, else an explicitly stated 1 kg/L."""
        rows = self._rows("tissue_density", compartment)
        if len(rows):
            est = _pool_rows(rows, rows["value_canonical"])
            return est.value, f"density {est.value:.3g} kg/L from {self.species}", est.sources
        any_species = self.store.frame(
            "SELECT source_id, value_canonical, sd_canonical, n FROM curated_values "
            "WHERE quantity_id = 'tissue_density' AND compartment_id = ? AND value_canonical IS NOT NULL",
            (compartment,))
        if len(any_species):
            est = pool(any_species["value_canonical"], any_species["sd_canonical"], any_species["n"],
                       any_species["source_id"])
            return est.value, f"density {est.value:.3g} kg/L from other species", est.sources
        return 1.0, "density 1 kg/L assumed: no density of this tissue in the store", ()

    # ---- volumes -----------------------------------------------------------------------------
    def volume_per_kg(self, compartment: str) -> Resolved:
        """Volume of one stored compartment per kg body weight (L/kg)."""
        if compartment in FLUID_VOLUME:
            rows = self._rows(FLUID_VOLUME[compartment], compartment)
            if len(rows):
                return self._per_kg(rows, rows["value_canonical"], notes=[])
        density, density_note, density_sources = self.density(compartment)
        candidates = []
        for quantity in VOLUME_ROUTES:
            rows = self._rows(quantity, compartment)
            if not len(rows):
                continue
            if quantity == "tissue_volume":
                per_kg = np.where(rows["normalisation"] == "body_mass", rows["value_canonical"],
                                  rows["value_canonical"] / self._subject_mass(rows))
                factor = per_kg / rows["value_canonical"]
            elif quantity == "tissue_mass":
                factor = 1.0 / self._subject_mass(rows) / density
            else:  # tissue_mass_fraction
                factor = pd.Series(1.0 / density, index=rows.index)
            candidates.append(rows.assign(_route=quantity, _per_kg=rows["value_canonical"] * factor,
                                          _sd=rows["sd_canonical"] * factor))
        if not candidates:
            return self._from_parts(compartment, self.volume_per_kg, "volume, mass or mass fraction")
        rows = _one_route_per_source(pd.concat(candidates), VOLUME_ROUTES).dropna(subset=["_per_kg"])
        if not len(rows):
            return Resolved(None, rows, reason=f"{compartment} masses lack the subjects' body mass")
        notes = [] if all(rows["_route"] == "tissue_volume") else [density_note]
        resolved = self._per_kg(rows, rows["_per_kg"], rows["_sd"], notes)
        resolved.estimate = _with_sources(resolved.estimate, density_sources)
        return resolved

    def _per_kg(self, rows, per_kg, sd=None, notes=()) -> Resolved:
        if sd is None:
            absolute = rows["normalisation"] == "none"
            mass = self._subject_mass(rows)
            per_kg = np.where(absolute, rows["value_canonical"] / mass, rows["value_canonical"])
            sd = np.where(absolute, rows["sd_canonical"] / mass, rows["sd_canonical"])
            rows = rows.assign(_route=rows["quantity_id"], _per_kg=per_kg, _sd=sd).dropna(subset=["_per_kg"])
            per_kg, sd = rows["_per_kg"], rows["_sd"]
        if not len(rows):
            return Resolved(None, rows, reason="rows lack the subjects' body mass")
        absolute = rows[(rows["normalisation"] == "none") & rows["_route"].isin(ABSOLUTE_ROUTES)]
        return Resolved(_pool_rows(rows, per_kg, sd), rows, list(notes),
                        list(self._subject_mass(absolute)) if len(absolute) == len(rows) else [])

    # ---- cardiac output ----------------------------------------------------------------------
    @cached_property
    def cardiac_output_rows(self) -> pd.DataFrame:
        rows = self._rows("cardiac_output", "whole_body", ["none", "body_mass"])
        mass = self._subject_mass(rows)
        per_kg = np.where(rows["normalisation"] == "none", rows["value_canonical"] / mass, rows["value_canonical"])
        sd = np.where(rows["normalisation"] == "none", rows["sd_canonical"] / mass, rows["sd_canonical"])
        return rows.assign(_route="cardiac_output", _per_kg=per_kg, _sd=sd, _mass=mass).dropna(subset=["_per_kg"])

    def cardiac_output(self, body_weight: float) -> Resolved:
        """Cardiac output (L/h) at a body weight: the species' own per-kg data, or its own allometry."""
        rows = self.cardiac_output_rows
        if not len(rows):
            return Resolved(None, rows, reason=f"no cardiac output stored for {self.species} ({self.life_stage})")
        absolute = rows[rows["normalisation"] == "none"]
        masses = absolute["_mass"].unique()
        if len(absolute) >= 3 and len(masses) >= 3 and masses.max() / masses.min() >= 2:
            from .allometry import fit_power_law

            fit = fit_power_law(absolute["_mass"].to_numpy(), absolute["value_canonical"].to_numpy(),
                                list(absolute["source_id"]))
            value, low, high = fit.predict(body_weight)
            est = Estimate(value, None, None, low, high,
                           f"within-species allometry over {len(absolute)} rows: "
                           f"{fit.a:.3g}·BW^{fit.b:.3f} (95 % prediction interval)", len(absolute),
                           tuple(dict.fromkeys(absolute["source_id"])))
            return Resolved(est, absolute)
        per_kg = _pool_rows(rows, rows["_per_kg"], rows["_sd"])
        at = list(rows["_mass"]) if (rows["normalisation"] == "none").all() else []
        return Resolved(per_kg.scaled(body_weight), rows, absolute_at=at)

    # ---- blood flows -------------------------------------------------------------------------
    def flow_fraction(self, compartment: str) -> Resolved:
        """Blood flow of one stored compartment as a fraction of cardiac output."""
        candidates = []
        rows = self._rows("blood_flow_fraction", compartment)
        if len(rows):
            candidates.append(rows.assign(_route="blood_flow_fraction", _per_kg=rows["value_canonical"],
                                          _sd=rows["sd_canonical"]))
        absolute = self._rows("blood_flow", compartment, ["none"])
        if len(absolute):
            mass = self._subject_mass(absolute)
            co = np.array([self._co_value(m) for m in mass])
            candidates.append(absolute.assign(_route="blood_flow", _per_kg=absolute["value_canonical"] / co,
                                              _sd=absolute["sd_canonical"] / co))
        if not candidates:
            return self._from_parts(compartment, self.flow_fraction, "blood flow")
        rows = _one_route_per_source(pd.concat(candidates), FLOW_ROUTES).dropna(subset=["_per_kg"])
        if not len(rows):
            return Resolved(None, rows, reason=f"{compartment} flows need a cardiac output to become fractions")
        return Resolved(_pool_rows(rows, rows["_per_kg"], rows["_sd"]), rows)

    @cached_property
    def _parts(self) -> dict[str, list[str]]:
        parts: dict[str, list[str]] = {}
        for row in self.store.query("SELECT id, part_of FROM compartments WHERE part_of IS NOT NULL ORDER BY id"):
            parts.setdefault(row["part_of"], []).append(row["id"])
        return parts

    def _from_parts(self, compartment: str, resolve, what: str) -> Resolved:
        """A whole without rows of its own is the sum of its parts, when every part has data."""
        gap = Resolved(None, self.rows.iloc[0:0],
                       reason=f"no {what} of {compartment} for {self.species} ({self.life_stage})")
        parts = [p for p in self._parts.get(compartment, []) if p not in SKIP_AS_PART]
        if not parts:
            return gap
        resolved = {p: resolve(p) for p in parts}
        missing = [p for p, r in resolved.items() if not r.ok]
        if missing:
            if len(missing) < len(parts):
                gap.reason += f" (its parts {', '.join(missing)} lack data too)"
            return gap
        ests = [r.estimate for r in resolved.values()]
        ses = [e.se for e in ests]
        est = Estimate(sum(e.value for e in ests), (sum(x * x for x in ses) ** 0.5) if None not in ses else None,
                       None, None, None, f"sum of parts {' + '.join(parts)}", sum(e.n_studies for e in ests),
                       tuple(dict.fromkeys(s for e in ests for s in e.sources)))
        rows = pd.concat([r.rows for r in resolved.values()])
        notes = sorted({n for r in resolved.values() for n in r.notes})
        at = [m for r in resolved.values() for m in r.absolute_at] \
            if all(r.absolute_at for r in resolved.values()) else []
        return Resolved(est, rows, notes, at)

    def _co_value(self, mass: float) -> float:
        if np.isnan(mass):
            return np.nan
        co = self.cardiac_output(float(mass))
        return co.estimate.value if co.ok else np.nan


def _one_route_per_source(rows: pd.DataFrame, preference: list[str]) -> pd.DataFrame:
    """Per source keep the most direct route only, so one source never counts twice."""
    rank = rows["_route"].map({r: i for i, r in enumerate(preference)})
    best = rank.groupby(rows["source_id"]).transform("min")
    return rows[rank == best]


def _pool_rows(rows: pd.DataFrame, values, sds=None) -> Estimate:
    sds = rows["sd_canonical"] if sds is None else sds
    return pool(np.asarray(values, dtype=float), np.asarray(sds, dtype=float),
                np.asarray(rows["n"], dtype=float), list(rows["source_id"]))


def _with_sources(est: Estimate | None, extra: tuple[str, ...]) -> Estimate | None:
    if est is None or not extra:
        return est
    from dataclasses import replace

    return replace(est, sources=tuple(dict.fromkeys(est.sources + tuple(extra))))
