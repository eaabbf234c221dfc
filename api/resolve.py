"""Resolve one species' parameters from its curated rows, each as a per-body-weight estimate.

Every route from a stored row to a model number is spelled out here: a mass fraction over
a tissue density, an absolute organ mass over the subjects' body mass, a flow over the cardiac
output at the same body mass. A source that gives both a mass and a fraction of one organ
contributes only its most direct route, so no source counts twice.

Rows are plain dicts grouped once by (quantity, compartment): a parameter set touches a few
dozen tiny groups, where per-call pandas overhead would dominate.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field, replace
from functools import cached_property

from ..schema.model import (FLUID_VOLUME, MAX_INTERVAL_RATIO, MIRROR_PAIRS, PARAMETERS, REFERENCE_HEIGHT_CM, VESSEL_ORGAN, is_side,
                            routes, summable_parts)
from .pooling import Estimate, pool
from .rows import SAME_SUBJECTS, CountedRows

PER_TISSUE = "blood_flow per kg tissue"  # the route of a flow given per mass of its tissue
WITHIN_SPECIES_POINTS, WITHIN_SPECIES_SPAN = 3, 2.0  # subjects' masses needed to scale within a species


def _usable(fitted: Estimate) -> bool:
    """A within-species fit whose prediction interval is narrow enough to scale on."""
    return fitted.high / fitted.low <= MAX_INTERVAL_RATIO


def _unused_fit(fitted: Estimate) -> str:
    return (f"a within-species power law was not used: its 95 % prediction interval {fitted.low:.3g}–"
            f"{fitted.high:.3g} spans more than ×{MAX_INTERVAL_RATIO:g}; the rows are pooled per kg body mass")
SAME_BODY_WEIGHT = 0.02  # relative difference under which rows describe the requested body weight
NAN = float("nan")


@dataclass
class Resolved:
    """A parameter per kg body weight (volumes) or as a fraction of cardiac output (flows)."""

    estimate: Estimate | None
    rows: list[dict] = field(default_factory=list)  # the curated rows behind it, each with its route
    notes: list[str] = field(default_factory=list)
    absolute_at: list[float] = field(default_factory=list)  # subjects' body masses when every row is absolute
    reason: str = ""  # why it is a gap
    verified_share: float | None = None  # share of the estimate's weight resting on rows read in their source

    @property
    def ok(self) -> bool:
        return self.estimate is not None


def _float_or_nan(x) -> float:
    return NAN if x is None else float(x)


def _pool(rows: list[dict]) -> Estimate:
    """Pool rows that carry ``_value`` and ``_sd`` in the target form."""
    return pool([r["_value"] for r in rows], [_float_or_nan(r["_sd"]) for r in rows], [_float_or_nan(r["n"]) for r in rows],
                [r["source_id"] for r in rows])


def _verified_share(rows: list[dict], estimate: Estimate) -> float:
    """The pooling weight of the rows marked verified (read in their source text)."""
    weights = estimate.details.get("weights") or [1.0] * len(rows)
    # over the weights' own sum, so that every row read gives exactly 1 (not 1 − rounding)
    return float(sum(w for w, r in zip(weights, rows) if r["verified"]) / sum(weights))


SPECIES_OUTPUT = "flows over the species' cardiac output at the subjects' body mass"
OWN_OUTPUT = "flows over their own source's cardiac output (the same subjects)"


def _one_route_per_source(rows: list[dict], preference: list[str]) -> list[dict]:
    """Each source's rows of one route: a route that needs nothing but the source's own numbers before one
    that borrows the species' typical body mass or cardiac output (``_borrows``), then by ``preference``."""
    rank = lambda r: (bool(r.get("_borrows")), preference.index(r["_route"]))  # noqa: E731
    best: dict[str, tuple] = {}
    for r in rows:
        best[r["source_id"]] = min(best.get(r["source_id"], (True, 99)), rank(r))
    return [r for r in rows if rank(r) == best[r["source_id"]]]


def _gap(reason: str) -> Resolved:
    return Resolved(None, reason=reason)


class Resolver(CountedRows):
    """The rules turning the rows that count into per-body-mass estimates."""

    def __init__(self, store, species: str, life_stage: str = "adult", sex: str | None = None,
                 verified_only: bool = False, animal_class: str | None = None, all_methods: bool = False,
                 temperature: float | None = None):
        super().__init__(store, species, life_stage, sex, verified_only, animal_class, all_methods, temperature)
        self._co_cache: dict[float, Resolved] = {}

    # ---- body weight -------------------------------------------------------------------------
    @cached_property
    def body_mass(self) -> Resolved:
        rows = [dict(r, _value=r["value_canonical"], _sd=r["sd_canonical"], _route="body_mass")
                for r in self.read_first(self.rows("body_mass", "whole_body"))]
        if rows:  # body mass rows are themselves the subjects' body mass
            estimate = _pool(rows)
            return Resolved(estimate, rows, verified_share=_verified_share(rows, estimate))
        with_mass = [r for r in self.all_rows if r["subject_body_mass_kg"] is not None]
        if with_mass:
            masses = sorted(r["subject_body_mass_kg"] for r in with_mass)
            mid = len(masses) // 2
            median = masses[mid] if len(masses) % 2 else (masses[mid - 1] + masses[mid]) / 2
            est = Estimate(median, None, None, masses[0], masses[-1],
                           "median of the subjects' body masses on this species' rows", len(masses),
                           tuple(dict.fromkeys(r["source_id"] for r in with_mass)))
            return Resolved(est, with_mass, verified_share=sum(bool(r["verified"]) for r in with_mass) / len(with_mass))
        return _gap(f"no body mass stored for {self.species} ({self.life_stage})")

    def subject_mass(self, row: dict) -> float:
        """The row's subjects' body mass, else the species' typical body mass."""
        if row["subject_body_mass_kg"] is not None:
            return row["subject_body_mass_kg"]
        return self.body_mass.estimate.value if self.body_mass.ok else NAN

    # ---- densities ---------------------------------------------------------------------------
    @cached_property
    def _densities_all_species(self) -> dict[str, list[dict]]:
        out: dict[str, list[dict]] = defaultdict(list)
        for r in self.store.query("SELECT compartment_id, source_id, value_canonical, sd_canonical, n "
                                  "FROM curated_values WHERE quantity_id = 'tissue_density' "
                                  "AND value_canonical IS NOT NULL ORDER BY source_id, line"):
            out[r["compartment_id"]].append(dict(r, _value=r["value_canonical"], _sd=r["sd_canonical"]))
        return out

    def density(self, compartment: str) -> tuple[float, str, tuple[str, ...]]:
        """Tissue density in kg/L: this species, else all species, else an explicitly stated 1 kg/L."""
        own = [dict(r, _value=r["value_canonical"], _sd=r["sd_canonical"])
               for r in self.rows("tissue_density", compartment)]
        if own:
            est = _pool(own)
            return est.value, f"density {est.value:.3g} kg/L from {self.species}", est.sources
        others = self._densities_all_species.get(compartment)
        if others:
            est = _pool(others)
            return est.value, f"density {est.value:.3g} kg/L from other species", est.sources
        whole = self._whole_of.get(compartment)
        if whole:  # a part (one kidney, the stomach) without a density of its own has its whole's
            value, how, sources = self.density(whole)
            return value, f"{how} (of {whole})", sources
        return 1.0, "density 1 kg/L assumed: no density of this tissue in the store", ()

    @cached_property
    def _whole_of(self) -> dict[str, str]:
        return {part: whole for whole, parts in self._parts.items() for part in parts}

    # ---- the vocabulary: which quantity is a share of what --------------------------------------
    @cached_property
    def _vocab(self) -> dict[str, dict]:
        return {r["id"]: dict(r) for r in self.store.query("SELECT id, kind, fraction_of, canonical_unit "
                                                           "FROM quantities")}

    @cached_property
    def _share_of(self) -> dict[str, str | None]:
        """quantity → what it is a fraction of (vocab ``fraction_of`` for kind ``fraction``), else None."""
        return {q: (v["fraction_of"] if v["kind"] == "fraction" else None) for q, v in self._vocab.items()}

    def _is_volume(self, quantity: str) -> bool:
        """A volume needs no density to become one (vocab canonical unit in litres)."""
        return self._vocab.get(quantity, {}).get("canonical_unit") == "L"

    def _is_absolute(self, row: dict) -> bool:
        return row["normalisation"] == "none" and self._share_of.get(row["quantity_id"]) is None

    # ---- volumes -----------------------------------------------------------------------------
    def volume_per_kg(self, compartment: str) -> Resolved:
        """Volume of one stored compartment per kg body mass (L/kg), through its most direct route:
        a volume, a fluid volume, a mass over the tissue density, or a share of body mass over it."""
        preference = list(routes("volume", compartment))
        density, density_note, density_sources = (1.0, "", ()) if compartment in FLUID_VOLUME else \
            self.density(compartment)
        candidates = []
        for quantity in preference:
            by_volume = self._is_volume(quantity)
            for r in self.rows(quantity, compartment):
                borrows = False
                if self._share_of.get(quantity) == "body_mass":
                    per = 1.0
                else:
                    per = 1.0 if r["normalisation"] == "body_mass" else 1.0 / self.subject_mass(r)
                    borrows = r["normalisation"] != "body_mass" and r["subject_body_mass_kg"] is None
                candidates.append(dict(self._routed(r, quantity, per if by_volume else per / density),
                                       _borrows=borrows, _typical_mass=borrows))
        if not candidates or not any(r["verified"] for r in candidates):
            summed = self._from_parts(compartment, self.volume_per_kg, "volume, mass or mass fraction")
            if not candidates or self._read_parts_win(summed, candidates):
                return summed
        rows = [r for r in _one_route_per_source(self.read_first(candidates), preference)
                if not math.isnan(r["_value"])]
        if not rows:
            return _gap(f"{compartment} masses lack the subjects' body mass")
        by_mass = [r for r in rows if not self._is_volume(r["_route"])]
        notes = [density_note] if by_mass else []
        resolved = self._over_body_mass(rows, notes) or self._resolved(rows, notes)
        if density_sources and notes:
            resolved.estimate = replace(resolved.estimate, sources=tuple(
                dict.fromkeys(resolved.estimate.sources + tuple(density_sources))))
        return resolved

    def _routed(self, row: dict, route: str, factor: float) -> dict:
        factor *= self.body_ratio(row)  # a share of empty body mass × the source's empty/live ratio
        return dict(row, _route=route, _value=row["value_canonical"] * factor,
                    _sd=None if row["sd_canonical"] is None else row["sd_canonical"] * factor)

    def _per_body_mass(self, rows: list[dict], route: str) -> list[dict]:
        """Rows as per kg body mass: absolute over the subjects' mass, per m² through their body surface."""
        out = []
        for r in rows:
            if r["normalisation"] == "body_surface":
                per, how = self._surface_per_kg(r)
                if per is None:
                    continue
                routed = dict(self._routed(r, route, per), _over=how)
            else:
                per = 1.0 if r["normalisation"] == "body_mass" else 1.0 / self.subject_mass(r)
                routed = dict(self._routed(r, route, per), _typical_mass=r["normalisation"] == "none"
                              and r["subject_body_mass_kg"] is None)
            if not math.isnan(routed["_value"]):
                out.append(routed)
        return out

    @cached_property
    def _surface_formulas(self) -> list[dict]:
        return [dict(r) for r in self.store.query("SELECT species, formula, k, preferred, source FROM body_surface")]

    def _surface_per_kg(self, row: dict) -> tuple[float | None, str]:
        """m² of body surface per kg of the row's subjects (vocab/body_surface.csv, the species' preferred
        formula; a formula that needs a height takes the species' reference height)."""
        from ..units.body_surface import AREA_M2, NEEDS_HEIGHT

        mass = self.subject_mass(row)
        mine = [f for f in self._surface_formulas if f["species"] == self.species]
        if math.isnan(mass) or not mine:
            return None, ""
        formula = next((f for f in mine if f["preferred"] == "yes"), mine[0])
        height = REFERENCE_HEIGHT_CM.get(self.species) if formula["formula"] in NEEDS_HEIGHT else None
        if formula["formula"] in NEEDS_HEIGHT and height is None or (formula["formula"] == "meeh" and not formula["k"]):
            return None, ""
        area = AREA_M2[formula["formula"]](mass, height, formula["k"])
        at = f" at the reference height {height:g} cm" if height else ""
        return area / mass, f"per m² over the subjects' body surface ({formula['source']}{at})"

    def _resolved(self, rows: list[dict], notes: list[str]) -> Resolved:
        typical = [r["row_id"] for r in rows if r.get("_typical_mass")]
        if typical and self.body_mass.ok:  # say it: the number moves when other groups' body masses are added
            notes = [*notes, f"{', '.join(typical)}: the source prints no body mass for these animals; taken at the "
                             f"species' typical {self.body_mass.estimate.value:.3g} kg (pooled over its rows)"]
        for r in rows:
            if r.get("_repeats"):
                notes = [*notes, f"{r['row_id']}, {', '.join(i for i, _ in r['_repeats'])}: the same animals measured again "
                                 "alike, averaged into one estimate (n counted once)"]
        absolute = [r for r in rows if self._is_absolute(r)]
        at = [self.subject_mass(r) for r in absolute] if len(absolute) == len(rows) else []
        estimate = _pool(rows)
        return Resolved(estimate, rows, notes, at, verified_share=_verified_share(rows, estimate))

    # ---- one parameter, as the declaration names it -----------------------------------------------
    def resolve(self, parameter: str, compartment: str | None = None) -> Resolved:
        """One parameter of one stored compartment, pooled in the form ``PARAMETERS[parameter].resolved_as``
        (whole-body parameters take their fixed compartment; cardiac output is given at 1 kg)."""
        declared = PARAMETERS[parameter]
        if declared.computed:
            return _gap(f"{parameter} is computed from {declared.computed}, not resolved from rows")
        compartment = declared.compartment or compartment
        if parameter == "body_mass":
            return self.body_mass
        if parameter == "cardiac_output":
            return self.cardiac_output(1.0)
        if parameter == "volume":
            return self.volume_per_kg(compartment)
        if parameter == "blood_flow":
            return self.flow_fraction(compartment)
        if self._share_of.get(declared.routes[0]) is not None:
            return self.fraction(declared.routes[0], compartment)
        return self.per_body_mass(declared.routes[0], compartment)

    # ---- whole-body rates and blood fractions ------------------------------------------------
    def per_body_mass(self, quantity: str, compartment: str) -> Resolved:
        """A rate such as GFR per kg body weight, from absolute (over the subjects' mass) or per-kg rows."""
        stored = [r for r in self.rows(quantity, compartment) if r["normalisation"] in ("none", "body_mass",
                                                                                          "body_surface")]
        rows = self._per_body_mass(self.read_first(stored), quantity)
        absolute = [r for r in stored if r["normalisation"] == "none"]
        if not rows and absolute:  # absolute numbers whose animals' mass is neither stored nor typical
            return _gap(f"{len(absolute)} absolute {quantity} row(s) of {self.species} ({self.life_stage}) "
                        "lack their animals' body mass, and no body mass is stored for this stage to "
                        "stand in; curate the animals' body mass")
        if not rows:
            return _gap(f"no {quantity} per body mass or absolute stored for {self.species} ({self.life_stage})")
        return self._resolved(rows, sorted({r["_over"] for r in rows if "_over" in r}))

    def fraction(self, quantity: str, compartment: str) -> Resolved:
        """A dimensionless fraction such as hematocrit, pooled across sources."""
        rows = [self._routed(r, quantity, 1.0) for r in self.read_first(self.rows(quantity, compartment))]
        if not rows:
            return _gap(f"no {quantity} stored for {self.species} ({self.life_stage})")
        return self._resolved(rows, [])

    # ---- cardiac output ----------------------------------------------------------------------
    @cached_property
    def cardiac_output_rows(self) -> list[dict]:
        rows = [r for r in self.rows("cardiac_output", "whole_body")
                if r["normalisation"] in ("none", "body_mass", "body_surface")]
        return [dict(r, _mass=self.subject_mass(r)) for r in self._per_body_mass(self.read_first(rows),
                                                                                 "cardiac_output")]

    def cardiac_output(self, body_mass: float) -> Resolved:
        """Cardiac output (L/h) at a body weight: the species' own per-kg data, or its own allometry."""
        if body_mass in self._co_cache:
            return self._co_cache[body_mass]
        rows = self.cardiac_output_rows
        if not rows:
            result = _gap(f"no cardiac output stored for {self.species} ({self.life_stage})")
        else:
            absolute = [r for r in rows if r["normalisation"] == "none"]
            masses = sorted({r["_mass"] for r in absolute})
            fitted = self._within_species_fit(absolute, body_mass) \
                if len(absolute) >= 3 and len(masses) >= 3 and masses[-1] / masses[0] >= 2 else None
            if fitted is not None and _usable(fitted.estimate):
                result = fitted
            else:
                resolved = self._resolved(rows, [] if fitted is None else [_unused_fit(fitted.estimate)])
                resolved.estimate = resolved.estimate.scaled(body_mass)
                result = resolved
        self._co_cache[body_mass] = result
        return result

    def _over_body_mass(self, rows: list[dict], notes: list[str]) -> Resolved | None:
        """Per-kg values of subjects spanning a range of body masses (a 25 kg grower and a 110 kg finisher
        pig): the species' own power law of per-kg value on body mass, at the set's body mass."""
        if self.target_mass is None:
            return None
        masses = [r["subject_body_mass_kg"] for r in rows]
        if None in masses or len(set(masses)) < WITHIN_SPECIES_POINTS or max(masses) / min(masses) < WITHIN_SPECIES_SPAN:
            return None
        from .allometry import fit_power_law

        fit = fit_power_law(masses, [r["_value"] for r in rows], [r["source_id"] for r in rows])
        value, low, high = fit.predict(self.target_mass)
        est = Estimate(value, None, None, low, high,
                       f"within-species allometry of the per-kg value over {len(rows)} rows of "
                       f"{min(masses):.3g}–{max(masses):.3g} kg subjects: {fit.a:.3g}·BW^{fit.b:.3f} "
                       "(95 % prediction interval)", len(rows), tuple(dict.fromkeys(r["source_id"] for r in rows)))
        if not _usable(est):  # too few or too scattered rows to scale on: their per-kg values are pooled
            notes.append(_unused_fit(est))
            return None
        return Resolved(est, rows, notes, verified_share=sum(bool(r["verified"]) for r in rows) / len(rows))

    def _within_species_fit(self, absolute: list[dict], body_mass: float) -> Resolved:
        from .allometry import fit_power_law

        fit = fit_power_law([r["_mass"] for r in absolute], [r["value_canonical"] for r in absolute],
                            [r["source_id"] for r in absolute])
        value, low, high = fit.predict(body_mass)
        est = Estimate(value, None, None, low, high,
                       f"within-species allometry over {len(absolute)} rows: {fit.a:.3g}·BW^{fit.b:.3f} "
                       "(95 % prediction interval)", len(absolute),
                       tuple(dict.fromkeys(r["source_id"] for r in absolute)))
        return Resolved(est, absolute, verified_share=sum(bool(r["verified"]) for r in absolute) / len(absolute))

    # ---- blood flows -------------------------------------------------------------------------
    def flow_fraction(self, compartment: str) -> Resolved:
        """Blood flow of one stored compartment as a fraction of cardiac output. An absolute flow, or one per
        kg body mass, is divided by the cardiac output of the same source and subjects when the source
        gives one, else by the species' cardiac output at the subjects' body mass; a flow per kg of tissue
        is first multiplied by the species' mass of that tissue (each said on the row)."""
        preference = [*routes("blood_flow"), PER_TISSUE]
        candidates = []
        for quantity in routes("blood_flow"):
            for r in self.rows(quantity, compartment):
                if self._share_of.get(quantity) == "cardiac_output":
                    candidates.append(self._routed(r, quantity, 1.0))
                elif r["normalisation"] in ("none", "body_mass"):  # absolute, or per kg body mass
                    co, how = self._cardiac_output_for(r)
                    if co is not None:
                        candidates.append(dict(self._routed(r, quantity, 1.0 / co), _over=how,
                                               _borrows=how == SPECIES_OUTPUT, _typical_mass=how == SPECIES_OUTPUT
                                               and r["subject_body_mass_kg"] is None))
                elif r["normalisation"] == "tissue_mass":
                    factor, how = self._per_tissue_factor(r, compartment)
                    if factor is not None:
                        candidates.append(dict(self._routed(r, PER_TISSUE, factor), _over=how))
        if not candidates:
            if any(r["normalisation"] in ("none", "body_mass") for q in preference if self._share_of.get(q) is None
                   for r in self.rows(q, compartment)):
                return _gap(f"{compartment} flows are absolute and {self.species} has no cardiac output "
                            "to turn them into fractions")
            return self._from_parts(compartment, self.flow_fraction, "blood flow")
        if not any(r["verified"] for r in candidates):
            summed = self._from_parts(compartment, self.flow_fraction, "blood flow")
            if self._read_parts_win(summed, candidates):
                return summed
        rows = _one_route_per_source(self.read_first(candidates), preference)
        notes = sorted({r["_over"] for r in rows if "_over" in r})
        return self._resolved(rows, notes)

    def _per_tissue_factor(self, row: dict, compartment: str) -> tuple[float | None, str]:
        """What turns a flow per kg of tissue into a share of cardiac output: the species' tissue mass per
        kg body mass (a vessel's tissue is its organ) over its cardiac output per kg at the subjects' mass."""
        organ = VESSEL_ORGAN.get(compartment, compartment)
        tissue = self.volume_per_kg(organ)
        mass = self.subject_mass(row)
        if not tissue.ok or math.isnan(mass):
            return None, ""
        co = self.cardiac_output(mass)
        if not co.ok:
            return None, ""
        kg_tissue = tissue.estimate.value * self.density(organ)[0]  # per kg body mass
        return kg_tissue * mass / co.estimate.value, (
            f"flows per kg of tissue × the species' {organ} mass over its cardiac output at the subjects' body mass")

    def _cardiac_output_for(self, row: dict) -> tuple[float | None, str]:
        """The cardiac output a flow row is a share of, in the row's own form (L/h, or L/h per kg body
        mass): that of the same source and subjects when the source gives one, else the species' at the
        subjects' body mass."""
        per_kg, mass = row["normalisation"] == "body_mass", row["subject_body_mass_kg"]
        own = []
        for r in self.rows("cardiac_output", "whole_body"):
            if not all(r[k] == row[k] for k in SAME_SUBJECTS) or r["normalisation"] not in ("none", "body_mass"):
                continue
            if r["normalisation"] == row["normalisation"]:
                own.append(r["value_canonical"])
            elif mass is not None:  # the other form, through the subjects' own body mass
                own.append(r["value_canonical"] / mass if per_kg else r["value_canonical"] * mass)
        if own:
            return sum(own) / len(own), OWN_OUTPUT
        mass = self.subject_mass(row)
        if math.isnan(mass):
            return None, ""
        co = self.cardiac_output(mass)
        if not co.ok:
            return None, ""
        return (co.estimate.value / mass if per_kg else co.estimate.value), SPECIES_OUTPUT

    # ---- wholes from parts -------------------------------------------------------------------
    @cached_property
    def _parts(self) -> dict[str, list[str]]:
        parts: dict[str, list[str]] = defaultdict(list)
        for row in self.store.query("SELECT id, part_of FROM compartments WHERE part_of IS NOT NULL ORDER BY id"):
            parts[row["part_of"]].append(row["id"])
        return parts

    def _read_parts_win(self, summed: Resolved, recalled: list[dict]) -> bool:
        """Read rows beat recalled ones across a whole and its parts too: a whole whose rows are all recalled
        gives way to the sum of its parts when every part rests on rows read in their source."""
        if not (summed.ok and summed.verified_share == 1.0):
            return False
        for r in recalled:
            self.left_out[(r["source_id"], r["row_id"])] = ("recalled, not read: the sum of its parts, read in "
                                                            "their sources, is used")
        return True

    @staticmethod
    def _doubled_side(compartment: str, side: Resolved) -> Resolved:
        """One side of a mirror pair, doubled: the pair when the other side has no data."""
        est = side.estimate.scaled(2.0)
        note = f"{compartment}: one side doubled, the other side has no data (the two sides taken as alike)"
        return Resolved(replace(est, method=f"one side × 2 ({est.method})"), side.rows, sorted({*side.notes, note}),
                        side.absolute_at, verified_share=side.verified_share)

    def _from_parts(self, compartment: str, resolve, what: str) -> Resolved:
        """A whole without rows of its own is the sum of its parts, when every part has data."""
        gap = _gap(f"no {what} of {compartment} for {self.species} ({self.life_stage})")
        parts = summable_parts(compartment, self._parts, self.plan)
        if not parts:
            return gap
        resolved = {p: resolve(p) for p in parts}
        missing = [p for p, r in resolved.items() if not r.ok]
        if missing and compartment in MIRROR_PAIRS and all(is_side(p) for p in parts) and len(missing) < len(parts):
            return self._doubled_side(compartment, next(r for r in resolved.values() if r.ok))
        if missing:
            if len(missing) < len(parts):
                gap.reason += f" (its parts {', '.join(missing)} lack data too)"
            return gap
        ests = [r.estimate for r in resolved.values()]
        ses = [e.se for e in ests]
        est = Estimate(sum(e.value for e in ests), math.sqrt(sum(x * x for x in ses)) if None not in ses else None,
                       None, None, None, f"sum of parts {' + '.join(parts)}", sum(e.n_studies for e in ests),
                       tuple(dict.fromkeys(s for e in ests for s in e.sources)))
        rows = [row for r in resolved.values() for row in r.rows]
        notes = sorted({n for r in resolved.values() for n in r.notes})
        at = [m for r in resolved.values() for m in r.absolute_at] \
            if all(r.absolute_at for r in resolved.values()) else []
        weights = [r.estimate.value for r in resolved.values()]  # a part weighs what it adds to the whole
        share = sum(w * r.verified_share for w, r in zip(weights, resolved.values())) / sum(weights) \
            if sum(weights) > 0 else 0.0
        return Resolved(est, rows, notes, at, verified_share=share)
