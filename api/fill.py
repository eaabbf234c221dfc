"""Allometric gap filling, only on request: a cross-species power law at the requested body weight.

For a gap, every other species of the same stage whose own data resolve the same parameter
(without filling) contributes one point: its typical body weight and its value there. The fit
is log10(value) on log10(body mass); the filled value carries its 95 % prediction interval.
"""

from __future__ import annotations

from .parameters import Cell

MIN_SPECIES = 3


def _peer_sets(store, species: str, stage: str, layout) -> dict:
    cache = store.__dict__.setdefault("_peer_sets", {})
    key = (stage, layout.name, repr(sorted(layout.compartments.items())))
    if key not in cache:
        from .parameters import parameter_set

        peers = {}
        for other in store.ids("species"):
            peers[other] = parameter_set(store, other, life_stage=stage, layout=layout, fill="none")
        cache[key] = peers
    return {k: v for k, v in cache[key].items() if k != species}


def _taxon(store, species: str) -> str:
    return store.query("SELECT taxon_class FROM species WHERE id = ?", (species,))[0][0]


def allometric_cell(store, species: str, stage: str, layout, pick, body_mass: float, unit: str) -> Cell | None:
    """Fill one gap; ``pick(parameter_set) -> Cell`` selects the parameter. None if too few species."""
    from .allometry import fit_power_law

    peers = _peer_sets(store, species, stage, layout)
    own_class = _taxon(store, species)
    points = []
    for other, ps in peers.items():
        cell = pick(ps)
        if cell is None or cell.origin in ("gap", "not_applicable") or ps.body_mass.origin == "gap":
            continue
        if cell.value is None or cell.value <= 0:
            continue
        points.append((other, ps.body_mass.value, cell.value, _taxon(store, other), cell.sources))
    same = [p for p in points if p[3] == own_class]
    chosen, scope = (same, f"{own_class}s") if len(same) >= MIN_SPECIES else (points, "all classes")
    if len(chosen) < MIN_SPECIES:
        return None
    fit = fit_power_law([p[1] for p in chosen], [p[2] for p in chosen], [p[0] for p in chosen])
    value, low, high = fit.predict(body_mass)
    sources = tuple(dict.fromkeys(s for p in chosen for s in p[4]))
    method = (f"allometric across {fit.n} species ({scope}): {fit.a:.4g}·BW^{fit.b:.3f}, R² {fit.r2:.2f}, "
              f"exponent 95 % CI {fit.b_ci[0]:.2f}–{fit.b_ci[1]:.2f}; interval is the 95 % prediction interval; "
              f"species: {', '.join(fit.labels)}")
    return Cell(value, unit, "allometric", None, None, low, high, sources, method)


def fill_cardiac_output(store, ps_species: str, stage: str, layout, body_mass: float) -> Cell | None:
    return allometric_cell(store, ps_species, stage, layout, lambda ps: ps.cardiac_output, body_mass, "L/h")


def fill_allometric(store, ps) -> None:
    """Replace each gap of GFR and of a layout compartment's volume or flow by its allometric prediction;
    a fill rests on the same slots as the gap it replaces."""
    if ps.body_mass.origin == "gap":
        return
    bw = ps.body_mass.value
    targets = [(ps.physiology, "gfr", lambda other: other.physiology.get("gfr"))]
    for comp in ps.layout.compartments:
        targets.append((ps.volumes, comp, lambda other, c=comp: other.volumes.get(c)))
        targets.append((ps.flows, comp, lambda other, c=comp: other.flows.get(c)))
    for cells, key, pick in targets:
        gap = cells.get(key)
        if gap is None or gap.origin != "gap":
            continue
        cell = allometric_cell(store, ps.species, ps.life_stage, ps.layout, pick, bw, gap.unit)
        if cell is not None:
            cells[key] = cell.resting_on(*gap.depends_on)
