"""Drawn individuals as parameter sets: each individual's numbers in the set the population's means came
from, so an individual exports (JSON, CSV, SBML) and simulates like any parameter set."""

from __future__ import annotations

from copy import deepcopy
from dataclasses import replace

from ...schema.model import is_pulmonary, slot_id
from ..layouts import REST
from ..checks import close_balances
from .spec import PopulationError


def refuse_gaps(spec) -> None:
    """Individuals of a population that keeps gaps in rest_of_body cannot be parameter sets: say so."""
    if spec.in_rest or spec.missing:
        gaps = ", ".join(g["column"] for g in [*spec.in_rest, *spec.missing])
        raise PopulationError(f"{spec.species}: the population keeps gaps ({gaps}); an individual's parameter set "
                              "needs every volume and flow: draw it with a layout of the compartments the data cover "
                              "(--layout FILE), or fill them (--fill allometric, --stage-fallback)")


def _frame(pop):
    if pop.frame is not None:
        return pop.frame
    import pandas as pd

    return pd.read_parquet(pop.path) if pop.path.suffix == ".parquet" else pd.read_csv(pop.path)


def individual_sets(pop, individuals) -> list:
    """The parameter sets of the ``individuals`` (their numbers in the ``individual`` column) of ``pop``.
    Every drawn number has origin ``drawn`` and names the individual; rest_of_body closes both balances
    as in any set. A population with gaps kept in rest_of_body has no set per individual: its
    compartments lack a volume or a flow."""
    spec = pop.spec
    refuse_gaps(spec)
    frame = _frame(pop).set_index("individual")
    wanted = list(individuals)
    unknown = [i for i in wanted if i not in frame.index]
    if unknown:
        raise PopulationError(f"no individual {unknown[0]!r} in the population (0–{pop.n - 1})")
    return [_one(spec, frame.loc[i], i, pop.seed) for i in wanted]


def _one(spec, row, number: int, seed: int):
    ps = deepcopy(spec.parameter_set)
    tag = f"individual {number} of a population of {spec.species} drawn with seed {seed}"

    def drawn(cell, column):
        value = float(row[column])
        mass = None if cell.mass is None or not cell.value else value * cell.mass / cell.value  # same density
        return replace(cell, value=value, origin="drawn", sd=None, se=None, low=None, high=None, mass=mass,
                       method=f"{tag}; the population's mean: {cell.method}")

    ps.body_mass = drawn(ps.body_mass, "body_mass")
    ps.cardiac_output = drawn(ps.cardiac_output, "cardiac_output")
    for name in ps.physiology:
        ps.physiology[name] = drawn(ps.physiology[name], name)
    for comp, parts in ps.layout.compartments.items():
        ps.volumes[comp] = drawn(ps.volumes[comp], slot_id(comp, "volume"))
        flow = ps.flows[comp]
        if is_pulmonary(parts):
            ps.flows[comp] = replace(ps.cardiac_output, method=f"pulmonary flow equals cardiac output: {tag}")
        elif flow.origin != "not_applicable":
            ps.flows[comp] = drawn(flow, slot_id(comp, "blood_flow"))
    ps.volumes.pop(REST, None)
    ps.flows.pop(REST, None)
    ps.checks = [{"check": "drawn_individual", "status": "pass", "detail": tag}]
    close_balances(ps)  # the same rule as the population's own rest_of_body
    return ps
