"""An independent flow-limited whole-body model in numpy/scipy, built from a parameter set's JSON alone.

Used by tests/test_simulation.py to check the SBML export against a second implementation that shares no
code with bodyplan's SBML writer nor with the SBML reader of the tests. The drug has Kp = 1 in every
tissue (or the set's own Kp of a named compound), and fraction unbound 1; the liver clears it with a well-stirred intrinsic
clearance; a constant infusion goes into the blood pool. The model is linear, dA/dt = M A + b, so its
time course is exact through a matrix exponential and its steady state is one linear solve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import expm


@dataclass
class FlowModel:
    names: list[str]  # compartments, blood pool first
    volumes: np.ndarray
    matrix: np.ndarray  # dA/dt = matrix @ A + inflow, A the amounts in the compartments
    inflow: np.ndarray
    clearance_row: np.ndarray  # elimination rate = clearance_row @ A
    liver_blood_flow: float  # hepatic artery + portal inflow
    venous_return: float  # systemic outflow into the blood pool
    cardiac_output: float

    def steady_state(self) -> np.ndarray:
        return np.linalg.solve(self.matrix, -self.inflow)

    def amounts(self, times) -> tuple[np.ndarray, np.ndarray]:
        """Amounts in each compartment and the amount eliminated at each time, exactly: the linear
        system augmented with the eliminated amount and a constant 1 that carries the infusion."""
        n = len(self.names)
        big = np.zeros((n + 2, n + 2))
        big[:n, :n] = self.matrix
        big[:n, n + 1] = self.inflow
        big[n, :n] = self.clearance_row
        start = np.zeros(n + 2)
        start[n + 1] = 1.0
        out = np.array([expm(big * t) @ start for t in times])
        return out[:, :n], out[:, n]

    def slowest_rate(self) -> float:
        return float(np.min(np.abs(np.linalg.eigvals(self.matrix).real)))


def build(data: dict, intrinsic_clearance: float, infusion_rate: float, compound: str | None = None) -> FlowModel:
    """The model of a parameter set's ``to_dict()`` / JSON, in that set's units (amount per time unit).
    With ``compound``, each tissue's tissue:blood Kp is read from the JSON's partition coefficients
    (a tissue's venous blood leaves at its concentration / Kp); without, Kp = 1."""
    rows = {c["compartment"]: c for c in data["compartments"]}
    wiring = {e["compartment"]: e for e in data["circulation"]}
    pools = {s for e in wiring.values() for s in e["receives_from"] if s not in wiring}
    assert len(pools) == 1, f"one blood pool expected, found {pools}"
    pool = pools.pop()
    liver = next(c for c in wiring if "liver" in rows[c]["stored_compartments"])
    names = [pool, *wiring]
    at = {name: i for i, name in enumerate(names)}
    volumes = np.array([rows[c]["volume"]["value"] for c in names], dtype=float)
    flows = {c: rows[c]["blood_flow"]["value"] for c in wiring}
    for c, entry in wiring.items():  # each drain is one inflow of the compartment it drains to
        upstream = {s for s, e in wiring.items() if e["drains_to"] == c}
        assert upstream == set(entry["receives_from"]) - {pool}, f"{c}: receives_from disagrees with drains_to"

    def outflow(c: str) -> float:
        return flows[c] + sum(outflow(s) for s in wiring[c]["receives_from"] if s != pool)

    kp = {c: 1.0 for c in names}
    if compound is not None:
        kp.update({r["compartment"]: r["kp_blood"] for r in data["partition_coefficients"] if r["compound"] == compound})
    n = len(names)
    matrix = np.zeros((n, n))
    for c, entry in wiring.items():
        if pool in entry["receives_from"]:  # arterial inflow at the pool's concentration
            matrix[at[c], at[pool]] += flows[c] / volumes[at[pool]]
            matrix[at[pool], at[pool]] -= flows[c] / volumes[at[pool]]
        out, to = outflow(c), at[entry["drains_to"]]
        matrix[to, at[c]] += out / (volumes[at[c]] * kp[c])
        matrix[at[c], at[c]] -= out / (volumes[at[c]] * kp[c])
    clearance_row = np.zeros(n)
    clearance_row[at[liver]] = intrinsic_clearance / (volumes[at[liver]] * kp[liver])  # fu = 1
    matrix[at[liver], at[liver]] -= clearance_row[at[liver]]
    inflow = np.zeros(n)
    inflow[at[pool]] = infusion_rate
    systemic = [c for c, e in wiring.items() if e["drains_to"] == pool and e["flow"] != "cardiac_output"]
    return FlowModel(names, volumes, matrix, inflow, clearance_row, outflow(liver),
                     sum(outflow(c) for c in systemic), data["cardiac_output"]["value"])
