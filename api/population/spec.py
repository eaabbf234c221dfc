"""What a virtual population is drawn from: one variable per column, each with its mean (from the
parameter set), its between-animal spread (from the curated rows) and the sources and animals behind both.

Variability rules, declared once here:
- between-animal SD comes from rows that give an SD; an SE became an SD at ingest only through the number
  of animals it was computed from (SD = SE·√n); rows are pooled as a coefficient of variation weighted by
  their degrees of freedom (n − 1), so rows at different body masses or routes combine;
- between-study heterogeneity (tau² of the DerSimonian–Laird pool) and the standard error of the pooled
  mean are uncertainty of the mean: reported apart, and drawn only on request, once per population;
- a parameter without any SD is held fixed, or on request takes ``DEFAULT_CV`` (common practice, no
  source); either is marked on its column.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ...errors import BodyplanError
from ...schema.model import LIVER, PORTAL_ORGANS, VESSELS_OF_LIVER, has_own_flow, is_portal, is_pulmonary, slot_id
from ..layouts import REST
from ..checks import REST_DENSITY
from ..parameters import parameter_set
from ..resolve import Resolver

# 30 % between-animal CV for a volume, flow or rate without any stored SD: common practice, no source.
DEFAULT_CV = 0.3
DEFAULT_CV_RULE = "default CV for a parameter without any stored SD (common practice, no source)"
DEFAULT_CV_PARAMETERS = frozenset({"volume", "blood_flow", "cardiac_output", "gfr"})  # never body mass, hematocrit
WITHOUT_SD = ("fixed", "default_cv")
BALANCE_RULES = ("redraw", "rescale")


class PopulationError(BodyplanError, ValueError):
    """A population request that cannot be drawn as asked."""


@dataclass
class Variable:
    """One drawn quantity, in the form it is drawn in (``form``): the column is this times body mass
    (volumes, GFR), times cardiac output (flows), times (body mass / reference)^exponent (cardiac output),
    or the value itself (body mass, hematocrit)."""

    column: str  # slot id of the output column
    parameter: str
    compartment: str
    unit: str  # of the column
    form: str
    mean: float
    sd: float | None
    distribution: str  # lognormal, beta, uniform, fixed
    sd_from: str  # where the spread comes from, in words
    marked: str = ""  # "default_cv", "fixed" or "given" (by the user) when no stored SD stands behind the spread
    low: float | None = None  # uniform bounds
    high: float | None = None
    sources: tuple[str, ...] = ()  # of the mean
    sd_sources: tuple[str, ...] = ()  # of the spread
    n_animals: int | None = None  # animals behind the spread
    sd_rows: int = 0
    mean_origin: str = ""  # pooled, scaled, allometric, given, measured
    mean_method: str = ""
    mean_se: float | None = None  # standard error of the pooled mean, in the drawn form
    tau2: float | None = None  # between-study variance, in the drawn form
    density: float | None = None  # kg/L, volumes only
    exponent: float = 1.0  # cardiac output's scaling with body mass

    @property
    def cv(self) -> float | None:
        return None if self.sd is None or self.mean == 0 else self.sd / self.mean


@dataclass
class PopulationSpec:
    species: str
    life_stage: str
    sex: str | None
    layout: str
    fill: str
    body_mass: Variable
    variables: list[Variable]  # cardiac output, GFR, hematocrit, then volumes, then flows
    compartments: list[str]  # model compartments in order (rest_of_body last)
    pulmonary: list[str]  # compartments whose flow is the cardiac output
    in_rest: list[dict] = field(default_factory=list)  # gaps whose share stays in rest_of_body
    missing: list[dict] = field(default_factory=list)  # whole-body gaps: columns not in the output
    filled: list[str] = field(default_factory=list)  # columns whose mean is an allometric fill
    without_sd: str = "fixed"
    balance: str = "redraw"
    parameter_set: object = field(default=None, repr=False, compare=False)  # the set the means come from

    @property
    def volumes(self) -> list[Variable]:
        return [v for v in self.variables if v.parameter == "volume"]

    @property
    def flows(self) -> list[Variable]:
        return [v for v in self.variables if v.parameter == "blood_flow"]

    def columns(self) -> list[tuple[str, str]]:
        """(column, unit) of every output column after ``individual``, in order."""
        out = [("body_mass", "kg"), ("cardiac_output", "L/h")]
        out += [(v.column, v.unit) for v in self.variables if v.parameter in ("gfr", "hematocrit")]
        flows = {v.compartment for v in self.flows} | set(self.pulmonary)
        volumes = {v.compartment for v in self.volumes}
        for comp in self.compartments:
            if comp in volumes or comp == REST:
                out.append((slot_id(comp, "volume"), "L"))
            if comp in flows or comp == REST:
                out.append((slot_id(comp, "blood_flow"), "L/h"))
        return out


_NONE = (None, 0, None, (), None, None)  # no spread: (cv, rows, animals, sources, relative se, relative tau)


# ---- between-animal spread from curated rows --------------------------------------------------------
def _row_cvs(resolved) -> tuple[float | None, int, int | None, tuple[str, ...]]:
    """Pooled between-animal CV of the rows behind a resolved estimate: (cv, rows, animals, sources)."""
    if resolved is None or not resolved.ok:
        return None, 0, None, ()
    num = den = 0.0
    used, animals = [], 0
    for r in resolved.rows:
        sd, value = r.get("_sd"), r.get("_value")
        if sd is None or value is None or not math.isfinite(sd) or not value > 0:
            continue
        weight = (r["n"] - 1) if r["n"] and r["n"] >= 2 else 1.0  # an SD without n weighs one degree of freedom
        num += weight * (sd / value) ** 2
        den += weight
        used.append(r)
        animals += r["n"] or 0
    if not used:
        return None, 0, None, ()
    return math.sqrt(num / den), len(used), animals or None, tuple(dict.fromkeys(r["source_id"] for r in used))


def _mean_uncertainty(resolved) -> tuple[float | None, float | None]:
    """Relative standard error of the pooled mean and relative tau (between-study SD), or None."""
    if resolved is None or not resolved.ok or not resolved.estimate.value:
        return None, None
    est = resolved.estimate
    rel = lambda x: None if x is None else x / abs(est.value)  # noqa: E731
    return rel(est.se), None if est.tau2 is None else math.sqrt(est.tau2) / abs(est.value)


def _lumped(parts: list[tuple[float, object]]) -> tuple[float | None, int, int | None, tuple, float | None, float | None]:
    """Spread of a sum of independent parts, each (its mean, its Resolved): CV of the sum and of its mean."""
    total = sum(m for m, _ in parts)
    pieces = [(m, _row_cvs(r), _mean_uncertainty(r)) for m, r in parts]
    if not total > 0 or any(p[1][0] is None for p in pieces):
        return _NONE
    cv = math.sqrt(sum((m * c[0]) ** 2 for m, c, _ in pieces)) / total
    animals = [c[2] for _, c, _ in pieces]
    se = [u[0] for _, _, u in pieces]
    tau = [u[1] for _, _, u in pieces]
    rel = lambda xs: None if None in xs else math.sqrt(sum((m * x) ** 2 for (m, _), x in zip(parts, xs))) / total  # noqa: E731
    # the parts are often weighed in the same animals: the sum rests on at least the fewest of them
    return (cv, sum(c[1] for _, c, _ in pieces), None if None in animals else min(animals),
            tuple(dict.fromkeys(s for _, c, _ in pieces for s in c[3])), rel(se), rel(tau))


# ---- building the spec --------------------------------------------------------------------------------
def _variable(column, parameter, compartment, unit, form, mean, cell, spread, without_sd, default_cv,
              distribution) -> Variable:
    cv, rows, animals, sd_sources, rel_se, rel_tau = spread
    var = Variable(column, parameter, compartment, unit, form, mean, None, "fixed", "", sources=cell.sources,
                   mean_origin=cell.origin, mean_method=cell.method,
                   mean_se=None if rel_se is None else rel_se * mean,
                   tau2=None if rel_tau is None else (rel_tau * mean) ** 2)
    if cell.origin == "allometric":
        cv = None  # a fit's prediction interval spans species, not animals
    if cv is not None and cv > 0:
        var.sd, var.distribution, var.sd_rows, var.n_animals, var.sd_sources = cv * mean, distribution, rows, animals, sd_sources
        var.sd_from = (f"pooled between-animal CV {cv:.3g} of {rows} row(s) with an SD"
                       + (f" ({animals} animals)" if animals else "") + ", weighted by n − 1")
    elif without_sd == "default_cv" and parameter in DEFAULT_CV_PARAMETERS:
        var.sd, var.distribution, var.marked = default_cv * mean, distribution, "default_cv"
        var.sd_from = f"{DEFAULT_CV_RULE}: CV {default_cv:g}"
    else:
        var.marked = "fixed"
        var.sd_from = ("fixed: an allometric fill has no between-animal SD" if cell.origin == "allometric" else
                       "fixed: no between-animal SD stored")
    return var


def _mass(given) -> float:
    """A body mass given by the user: a number of kg or a text with a unit ("250 g")."""
    from ...units import to_quantity

    try:
        kg = float(given) if isinstance(given, (int, float)) else float(to_quantity(given, "kg").to("kg").magnitude)
    except Exception as exc:  # pint's own errors included
        raise PopulationError(f"body mass {given!r} is not a mass: {exc}") from None
    if not (kg > 0 and math.isfinite(kg)):
        raise PopulationError(f"body mass must be positive, got {given!r}")
    return kg


def _body_mass_variable(ps, resolver, centre, cv, mass_range, without_sd) -> Variable:
    cell = ps.body_mass
    if mass_range is not None:
        low, high = (_mass(x) for x in mass_range)
        if not 0 < low < high:
            raise PopulationError(f"body mass range must be two positive masses, low < high; got {mass_range!r}")
        return Variable("body_mass", "body_mass", "whole_body", "kg", "kg", (low + high) / 2,
                        (high - low) / math.sqrt(12), "uniform", "uniform over the range given by the user",
                        marked="given", low=low, high=high, mean_origin="given", mean_method="given by the user")
    if cv is not None:
        if not cv >= 0:
            raise PopulationError(f"body mass CV must be ≥ 0, got {cv!r}")
        return Variable("body_mass", "body_mass", "whole_body", "kg", "kg", centre, cv * centre,
                        "lognormal" if cv > 0 else "fixed", f"CV {cv:g} given by the user",
                        marked="given", sources=cell.sources, mean_origin=cell.origin, mean_method=cell.method)
    spread = (*_row_cvs(resolver.body_mass), *_mean_uncertainty(resolver.body_mass)) \
        if cell.origin != "given" else _NONE
    return _variable("body_mass", "body_mass", "whole_body", "kg", "kg", centre, cell, spread, without_sd, 0,
                     "lognormal")


def _co_exponent(resolver, bm: float) -> tuple[float, str]:
    """How cardiac output follows body mass: the species' own power law where the store gives one."""
    resolved = resolver.cardiac_output(bm)
    if resolved.ok and resolved.estimate.method.startswith("within-species allometry"):
        from ..allometry import fit_power_law

        rows = resolved.rows
        fit = fit_power_law([r["_mass"] for r in rows], [r["value_canonical"] for r in rows],
                            [r["source_id"] for r in rows])
        return fit.b, f"the species' own power law (exponent {fit.b:.3f}, {len(rows)} rows)"
    return 1.0, "per kg body mass"


def population_spec(store, species: str, *, life_stage: str = "adult", sex: str | None = None, body_mass=None,
                    body_mass_cv: float | None = None, body_mass_range=None, layout=None,
                    fill: str = "none", without_sd: str = "fixed", default_cv: float = DEFAULT_CV,
                    balance: str = "redraw", stage_fallback: bool = False, animal_class: str | None = None,
                    verified_only: bool = False, temperature=None) -> PopulationSpec:
    """The variables a population of ``species`` is drawn from; see the module notes for the rules.
    ``stage_fallback``, ``animal_class``, ``verified_only`` and ``temperature`` choose the parameter set as they do for
    :func:`parameter_set`; a number taken from another stage draws its spread from that stage's rows."""
    if without_sd not in WITHOUT_SD:
        raise PopulationError(f"without_sd must be one of {', '.join(WITHOUT_SD)}, not {without_sd!r}")
    if balance not in BALANCE_RULES:
        raise PopulationError(f"balance must be one of {', '.join(BALANCE_RULES)}, not {balance!r}")
    if not 0 < default_cv < 1:
        raise PopulationError(f"default CV must lie between 0 and 1, got {default_cv!r}")
    if body_mass_range is not None and (body_mass is not None or body_mass_cv is not None):
        raise PopulationError("give a body mass range, or a body mass (and CV), not both")
    centre = None
    if body_mass_range is not None:
        centre = sum(_mass(x) for x in body_mass_range) / 2
    elif body_mass is not None:
        centre = _mass(body_mass)
    ps = parameter_set(store, species, life_stage=life_stage, sex=sex, body_mass=centre, layout=layout, fill=fill,
                       stage_fallback=stage_fallback, animal_class=animal_class, verified_only=verified_only,
                       temperature=temperature)
    if ps.body_mass.origin == "gap":
        raise PopulationError(f"{species} ({life_stage}) has no stored body mass; give one (body_mass=, --body-mass), "
                              "or take another stage's typical one (stage_fallback=True, --stage-fallback)")
    if ps.cardiac_output.origin == "gap":
        raise PopulationError(f"{species} ({life_stage}) has no cardiac output"
                              + (", and too few species of this life stage have one to fill it across species"
                                 if fill == "allometric" else "; try fill='allometric' (--fill allometric)")
                              + ": flows cannot be drawn without it")
    bm = ps.body_mass.value
    resolvers: dict[str, Resolver] = {}

    def rows_of(cell) -> Resolver:  # the rows behind a number: of its own stage, or the stage it fell back to
        stage = cell.stage or life_stage
        if stage not in resolvers:
            resolvers[stage] = Resolver(store, species, stage, sex, verified_only=verified_only,
                                        animal_class=animal_class, temperature=ps.temperature)
            resolvers[stage].target_mass = bm
        return resolvers[stage]

    body = _body_mass_variable(ps, rows_of(ps.body_mass), bm, body_mass_cv, body_mass_range, without_sd)
    variables = []
    co = ps.cardiac_output
    exponent, how = _co_exponent(rows_of(co), bm)
    co_res = rows_of(co).cardiac_output(bm)
    cov = _variable("cardiac_output", "cardiac_output", "whole_body", "L/h",
                    f"L/h at {bm:.6g} kg, times (body mass / {bm:.6g} kg)^{exponent:.3g}: {how}", co.value, co,
                    (*_row_cvs(co_res), *_mean_uncertainty(co_res)), without_sd, default_cv, "lognormal")
    cov.exponent = exponent
    variables.append(cov)
    missing = []
    for name in ("gfr", "hematocrit"):
        cell = ps.physiology[name]
        if cell.origin == "gap":
            missing.append({"column": name, "reason": cell.reason})
            continue
        res = rows_of(cell).resolve(name)
        fraction = name == "hematocrit"
        form = "fraction of blood volume" if fraction else "L/h per kg body mass"
        mean = cell.value if fraction else cell.value / bm
        variables.append(_variable(name, name, "whole_body", cell.unit, form, mean, cell,
                                   (*_row_cvs(res), *_mean_uncertainty(res)) if res.ok else _NONE,
                                   without_sd, default_cv, "beta" if fraction else "lognormal"))
    comps = ps.layout.compartments
    in_rest, filled = [], []
    for comp, parts in comps.items():
        cell = ps.volumes[comp]
        if cell.origin == "gap":
            in_rest.append({"column": slot_id(comp, "volume"), "reason": cell.reason})
            continue
        resolved = [rows_of(cell).volume_per_kg(p) for p in parts]
        spread = _lumped([(r.estimate.value, r) for r in resolved]) if all(r.ok for r in resolved) else _NONE
        var = _variable(slot_id(comp, "volume"), "volume", comp, "L", "L per kg body mass", cell.value / bm, cell,
                        spread, without_sd, default_cv, "beta")
        var.density = (cell.mass / cell.value) if cell.mass and cell.value else REST_DENSITY
        if var.density * var.mean >= 1:
            raise PopulationError(f"{comp}: mean mass {var.density * var.mean:.3g} of body mass is not a share of it")
        variables.append(var)
        if cell.origin == "allometric":
            filled.append(var.column)
    pulmonary = []
    co_value = co.value
    liver = next((m for m, parts in comps.items() if LIVER in parts), None)
    portal_models = [m for m, parts in comps.items() if is_portal(parts)]
    for comp, parts in comps.items():
        if not has_own_flow(parts):
            continue
        if is_pulmonary(parts):
            pulmonary.append(comp)
            continue
        cell = ps.flows[comp]
        if cell.origin == "gap":
            in_rest.append({"column": slot_id(comp, "blood_flow"), "reason": cell.reason})
            continue
        if cell.origin == "not_applicable":
            continue  # counted within the liver's total hepatic flow
        spread = _NONE
        if cell.origin != "allometric":
            if cell.method.startswith("hepatic artery: "):
                pieces = [VESSELS_OF_LIVER[0]]
            elif " = " in cell.method or " − " in cell.method:
                pieces = []  # computed from other flows of the set: no spread of its own
            else:  # as the parameter set sums them: portal organs inside the liver's total flow are not added
                pieces = [p for p in parts if not is_pulmonary([p])
                          and not (not portal_models and p in PORTAL_ORGANS and liver not in (None, comp))]
            resolved = [rows_of(cell).flow_fraction(p) for p in pieces]
            if pieces and all(r.ok for r in resolved):
                spread = _lumped([(r.estimate.value, r) for r in resolved])
        var = _variable(slot_id(comp, "blood_flow"), "blood_flow", comp, "L/h", "fraction of cardiac output",
                        cell.value / co_value, cell, spread, without_sd, default_cv, "beta")
        variables.append(var)
        if cell.origin == "allometric":
            filled.append(var.column)
    if co.origin == "allometric":
        filled.insert(0, "cardiac_output")
    if ps.physiology.get("gfr") is not None and ps.physiology["gfr"].origin == "allometric":
        filled.append("gfr")
    for var in variables:
        _check_distribution(var)
    _check_distribution(body)
    _check_room([v for v in variables if v.parameter == "volume"], [v for v in variables if v.parameter == "blood_flow"])
    return PopulationSpec(species, life_stage, sex, ps.layout.name, fill, body, variables, [*comps, REST], pulmonary,
                          in_rest, missing, filled, without_sd, balance, ps)


def _check_room(volumes: list[Variable], flows: list[Variable]) -> None:
    """The mean individual must fit its own body mass and cardiac output, or no draw can be balanced."""
    mass = sum(v.mean * v.density for v in volumes)
    if mass >= 1:
        raise PopulationError(f"the named compartments' mean masses are {mass:.3g} of body mass: no room for "
                              "rest_of_body; check the parameter set (bodyplan params) before drawing from it")
    share = sum(v.mean for v in flows)
    if share > 1:
        raise PopulationError(f"the named systemic flows' means are {share:.3g} of cardiac output: above the whole; "
                              "check the parameter set (bodyplan params) before drawing from it")


def _check_distribution(var: Variable) -> None:
    k = var.density or 1.0  # a volume is a share of body mass through its density
    if var.distribution == "beta" and not (0 < var.mean * k < 1 and (var.sd * k) ** 2 < var.mean * k * (1 - var.mean * k)):
        raise PopulationError(f"{var.column}: a share with mean {var.mean * k:.4g} cannot have SD {var.sd * k:.4g} "
                              "(a beta distribution needs SD² < mean·(1 − mean))")
    if var.distribution in ("lognormal", "fixed") and not var.mean > 0:
        raise PopulationError(f"{var.column}: mean {var.mean!r} is not positive")
