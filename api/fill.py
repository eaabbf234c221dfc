"""Allometric gap filling, only on request: a cross-species power law at the requested body weight.

For a gap, every other species of the same stage whose own data resolve the same parameter
(without filling) contributes one point: its typical body weight and its value there. The fit
is log10(value) on log10(body mass); the filled value carries its 95 % prediction interval.
"""

from __future__ import annotations

from ..schema.model import MAX_INTERVAL_RATIO, STAGE_FALLBACK
from .cell import Cell

MIN_SPECIES = 3  # a fit with intervals needs three species of the animal's own class
PLAUSIBLE_MARGIN = 2.0  # a fill beyond the peers' own range (per kg body mass, or per kg tissue) by this factor


def _peer_sets(store, species: str, stage: str, layout) -> dict:
    cache = store.__dict__.setdefault("_peer_sets", {})
    key = (stage, layout.name, repr(sorted(layout.compartments.items())))
    if key not in cache:
        from .layouts import LayoutError
        from .parameters import parameter_set

        peers = {}
        for other in store.ids("species"):
            try:
                peers[other] = parameter_set(store, other, life_stage=stage, layout=layout, fill="none")
            except LayoutError:  # a body the layout does not fit (a fish's, for lungs) is no peer
                continue
        cache[key] = peers
    return {k: v for k, v in cache[key].items() if k != species}


def _taxon(store, species: str) -> str:
    return store.query("SELECT taxon_class FROM species WHERE id = ?", (species,))[0][0]


def allometric_cell(store, species: str, stage: str, layout, pick, body_mass: float, unit: str,
                    per=None, own: float | None = None, what: str = "") -> tuple[Cell | None, str]:
    """Fill one gap from species of the same class; ``pick(parameter_set) -> Cell`` selects the parameter.
    ``per(parameter_set)`` is what a value is judged per (a set's body mass, or its volume of the
    compartment for a flow) and ``own`` the same for the set being filled: a fill whose relative value
    lies outside the fitted species' range widened ×PLAUSIBLE_MARGIN is refused. Returns the cell, or
    None and why no fill is given."""
    from .allometry import fit_power_law

    own_class = _taxon(store, species)
    best = []  # the peer stage with most species, for the reason when none has enough
    for peer_stage in (stage, *STAGE_FALLBACK.get(stage, ())):  # peers of the same stage first
        points = []
        for other, ps in _peer_sets(store, species, peer_stage, layout).items():
            cell = pick(ps)
            if cell is None or cell.origin in ("gap", "not_applicable") or ps.body_mass.origin == "gap":
                continue
            if cell.value is None or cell.value <= 0 or _taxon(store, other) != own_class:
                continue
            points.append((other, ps.body_mass.value, cell.value, cell.sources, cell.verified_share,
                           cell.value / per(ps) if per and per(ps) else None))
        if len(points) >= MIN_SPECIES:
            break
        best = max(best, points, key=len)
    if len(points) < MIN_SPECIES:
        points = best
        return None, (f"allometric fill refused: {len(points)} {own_class} species have it "
                      f"({', '.join(p[0] for p in points) or 'none'}); a fit needs {MIN_SPECIES} of the same class")
    fit = fit_power_law([p[1] for p in points], [p[2] for p in points], [p[0] for p in points])
    value, low, high = fit.predict(body_mass)
    if high / low > MAX_INTERVAL_RATIO:
        return None, (f"allometric fill refused: its 95 % prediction interval {low:.3g}–{high:.3g} spans more than "
                      f"×{MAX_INTERVAL_RATIO:g} ({fit.n} {own_class} species)")
    relative = [p[5] for p in points if p[5] is not None]
    if own and relative:
        lo, hi = min(relative) / PLAUSIBLE_MARGIN, max(relative) * PLAUSIBLE_MARGIN
        if not lo <= value / own <= hi:
            return None, (f"allometric fill refused: {value / own:.3g} {what} lies outside {lo:.3g}–{hi:.3g}, "
                          f"the range of the fitted species widened ×{PLAUSIBLE_MARGIN:g}")
    sources = tuple(dict.fromkeys(s for p in points for s in p[3]))
    shares = [p[4] for p in points if p[4] is not None]
    method = (f"allometric across {fit.n} {own_class} species"
              f"{'' if peer_stage == stage else f' at their {peer_stage} stage'}: {fit.a:.4g}·BW^{fit.b:.3f}, "
              f"R² {fit.r2:.2f}, exponent 95 % CI {fit.b_ci[0]:.2f}–{fit.b_ci[1]:.2f}; interval is the 95 % "
              f"prediction interval; species: {', '.join(fit.labels)}")
    return Cell(value, unit, "allometric", None, None, low, high, sources, method,
                verified_share=sum(shares) / len(shares) if shares else None), ""


def _body_mass_of(ps) -> float:
    return ps.body_mass.value


def fill_cardiac_output(store, ps_species: str, stage: str, layout, body_mass: float) -> Cell | None:
    return allometric_cell(store, ps_species, stage, layout, lambda ps: ps.cardiac_output, body_mass, "L/h",
                           per=_body_mass_of, own=body_mass, what="per kg body mass")[0]


def fill_allometric(store, ps) -> None:
    """Replace each gap of GFR and of a layout compartment's volume or flow by its allometric prediction
    when it is of use; a fill rests on the same slots as the gap it replaces, and a refused fill leaves
    the gap with the reason."""
    from dataclasses import replace

    if ps.body_mass.origin == "gap":
        return
    bw = ps.body_mass.value

    def volume_of(other, comp):  # a flow is judged per L of its compartment (perfusion)
        return other.volumes[comp].value if other.volumes[comp].origin != "gap" else None

    targets = [(ps.physiology, "gfr", lambda other: other.physiology.get("gfr"), _body_mass_of, bw,
                "per kg body mass")]
    for comp in ps.layout.compartments:
        targets.append((ps.volumes, comp, lambda other, c=comp: other.volumes.get(c), _body_mass_of, bw,
                        "per kg body mass"))
        targets.append((ps.flows, comp, lambda other, c=comp: other.flows.get(c),
                        lambda other, c=comp: volume_of(other, c), lambda c=comp: volume_of(ps, c),
                        "per L of tissue"))  # its own volume as filled just before
    for cells, key, pick, per, own, what in targets:
        gap = cells.get(key)
        if gap is None or gap.origin != "gap":
            continue
        cell, why = allometric_cell(store, ps.species, ps.life_stage, ps.layout, pick, bw, gap.unit,
                                    per=per, own=own() if callable(own) else own, what=what)
        cells[key] = cell.resting_on(*gap.depends_on) if cell is not None else \
            replace(gap, reason=f"{gap.reason}; {why}")
