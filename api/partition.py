"""Tissue:plasma partition coefficients (Kp) for a species, from the store's tissue composition.

Composition is read row by row for the requested species and life stage, each number
keeping the curated rows (source:row id) behind it. A tissue whose composition is
incomplete is a gap unless borrowing is asked for; a borrowed tissue names its donor
species on every Kp. The equations are in ``kp_methods.py``; compound inputs in
``compound.py``.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import BodyplanError
from . import kp_methods as km
from ..schema.model import COMPOSITION as ROLES, REST_KP_LIKE, has_own_flow
from .compound import Compound, Compounds, compounds_from
from .layouts import REST

PLASMA, RBC = "plasma", "red_blood_cells"
NOT_TISSUES = {PLASMA, RBC, "blood", "arterial_blood", "whole_body"}
METHODS = {
    "poulin_theil": "Poulin & Theil 2002",
    "berezhkovskiy": "Poulin & Theil 2002 with the Berezhkovskiy 2004 correction",
    "rodgers_rowland": "Rodgers & Rowland (2005 for moderate-to-strong bases, 2006 otherwise)",
}
RR2005 = "Rodgers, Leahy & Rowland 2005"
RR2006 = "Rodgers & Rowland 2006"
DEFAULT_DONOR = "rat"  # the best-described species for composition


class PartitionError(BodyplanError, ValueError):
    """A Kp request that cannot be answered as asked (unknown method, unknown donor species)."""


@dataclass
class Item:
    """One composition number with the curated rows behind it."""

    value: float
    species: str
    rows: tuple[str, ...]      # source:row_id of each curated row used
    sources: tuple[str, ...]
    how: str                   # "1 row", "2 rows agree", "mean of 2 differing rows", "sum of …"
    verified: bool = True      # every row behind it was read in its source


def _combine(rows: list[dict], species: str) -> Item:
    values = np.array([r["value_canonical"] for r in rows], dtype=float)
    ids = tuple(f"{r['source_id']}:{r['row_id']}" for r in rows)
    sources = tuple(dict.fromkeys(r["source_id"] for r in rows))
    if len(rows) == 1:
        how = "1 row"
    elif np.allclose(values, values[0], rtol=1e-9, atol=0):
        how = f"{len(rows)} rows agree"  # the same number printed in several sources
    else:
        how = f"mean of {len(rows)} differing rows"
    return Item(float(values.mean()), species, ids, sources, how, all(bool(r["verified"]) for r in rows))


def species_composition(store, species: str, life_stage: str = "adult") -> dict[tuple[str, str], Item]:
    """(compartment, role) → Item for one species and life stage, from the rows that count by the
    parameter sets' own rules (a segment is not the whole tissue, the same animals count once, rows
    read in their source beat recalled ones).

    Total water, when not stored, is the sum of extracellular and intracellular water (parts
    are added).
    """
    from .rows import CountedRows

    counted = CountedRows(store, species, life_stage)
    by_quantity = {q: r for r, q in ROLES.items()}
    out: dict[tuple[str, str], Item] = {}
    for (quantity, comp), rows in sorted(counted.groups.items(), key=lambda kv: (kv[0][1], kv[0][0])):
        if quantity in by_quantity and rows:
            out[(comp, by_quantity[quantity])] = _combine(counted.read_first(rows), species)
    for comp in {c for c, _ in out}:
        ew, iw = out.get((comp, "extracellular_water")), out.get((comp, "intracellular_water"))
        if (comp, "water") not in out and ew and iw:
            out[(comp, "water")] = Item(ew.value + iw.value, species, ew.rows + iw.rows,
                                        tuple(dict.fromkeys(ew.sources + iw.sources)),
                                        "sum of extracellular and intracellular water", ew.verified and iw.verified)
    return out


def listed_tissues(own: dict, donors: list[tuple[str, dict]]) -> list[str]:
    """The tissues a Kp table lists: those of the whole-body layout (what a model needs, gaps included),
    and any other the species or its donors describe."""
    from .layouts import load_layout

    needed = {part for parts in load_layout("whole_body").compartments.values() for part in parts}
    found = {c for c, _ in own} | {c for _, comp in donors for c, _ in comp}
    return sorted((needed | found) - NOT_TISSUES)


def composition_coverage(store, species=None, life_stage: str = "adult") -> pd.DataFrame:
    """Per species and tissue: which composition quantities the store holds, and which methods can run.

    One row per (species, compartment) with a composition row; a column per quantity giving
    the number of curated rows (0 if none), ``sources``, and ``poulin_theil`` /
    ``rodgers_rowland_tissue`` flags saying whether that tissue's own composition suffices
    (plasma and erythrocyte rows appear as their own compartments).
    """
    rows = store.values(species=species, life_stage=life_stage, quantity=list(ROLES.values()))
    rows = rows[rows["value_canonical"].notna()]
    columns = ["species", "life_stage", "compartment", *ROLES.values(), "sources", "poulin_theil",
               "rodgers_rowland_tissue"]
    if rows.empty:
        return pd.DataFrame(columns=columns)
    counts = rows.pivot_table(index=["species", "life_stage", "compartment"], columns="quantity",
                              values="row_id", aggfunc="count", fill_value=0)
    counts = counts.reindex(columns=list(ROLES.values()), fill_value=0).astype(int)
    sources = rows.groupby(["species", "life_stage", "compartment"])["source"].agg(
        lambda s: ", ".join(dict.fromkeys(s)))
    out = counts.join(sources.rename("sources")).reset_index()
    has = lambda role: out[ROLES[role]] > 0  # noqa: E731
    water = has("water") | (has("extracellular_water") & has("intracellular_water"))
    lipids = has("neutral_lipid") & has("neutral_phospholipid")
    out["poulin_theil"] = water & lipids
    out["rodgers_rowland_tissue"] = has("extracellular_water") & has("intracellular_water") & lipids & (
        has("acidic_phospholipid") | has("albumin_ratio") | has("lipoprotein_ratio"))
    out.columns.name = None
    return out[columns]


def composition_readiness(store, species: list[str], life_stage: str = "adult") -> pd.DataFrame:
    """Per species: how many of the whole-body layout's tissues hold, from the species' own rows, every
    composition input of each method (as ``_needs`` lists them), whether plasma and erythrocytes do, the
    share of those inputs read in their source, and what to curate first."""
    tissues = listed_tissues({}, [])
    cases = {"poulin_theil": _needs("poulin_theil", set()),
             "rodgers_rowland_neutral": _needs("rodgers_rowland", {"albumin", "lipoprotein"}),
             "rodgers_rowland_base": _needs("rodgers_rowland", {"base2005"})}
    records = []
    for sp in species:
        own = species_composition(store, sp, life_stage)
        missing = lambda comp, roles: [r for r in roles if (comp, r) not in own]  # noqa: E731
        row = {"species": sp, "life_stage": life_stage, "tissues": len(tissues)}
        wanted: dict[str, int] = {}
        for case, needs in cases.items():
            complete = [t for t in tissues if not missing(t, needs["tissue"])]
            fluids = all(not missing(comp, needs.get(kind, [])) for kind, comp in (("plasma", PLASMA), ("rbc", RBC)))
            row[case] = len(complete) if fluids else 0
            for t in tissues:
                for role in missing(t, needs["tissue"]):
                    wanted[f"{t} {role}"] = wanted.get(f"{t} {role}", 0) + 1
            for kind, comp in (("plasma", PLASMA), ("rbc", RBC)):
                for role in missing(comp, needs.get(kind, [])):
                    wanted[f"{comp} {role}"] = wanted.get(f"{comp} {role}", 0) + 1
        items = [i for (c, _), i in own.items() if c in tissues or c in (PLASMA, RBC)]
        row["inputs"] = len(items)
        row["verified_share"] = round(sum(i.verified for i in items) / len(items), 3) if items else None
        row["to_curate"] = ", ".join(k for k, _ in sorted(wanted.items(), key=lambda kv: (-kv[1], kv[0]))[:4])
        records.append(row)
    return pd.DataFrame(records, columns=["species", "life_stage", "tissues", *cases, "inputs", "verified_share",
                                          "to_curate"])


# ---- what each compound needs ---------------------------------------------------------------------

def _classes(c: Compounds) -> np.ndarray:
    """Per compound: 'base2005', 'albumin' or 'lipoprotein' (Rodgers & Rowland's three binding cases)."""
    strong = km.strong_base(c.base_high)
    acid = ~np.isnan(c.acid_low)
    return np.where(strong, "base2005", np.where(acid, "albumin", "lipoprotein"))


def _needs(method: str, classes: set[str]) -> dict[str, list[str]]:
    """compartment kind ('tissue', 'plasma', 'rbc') → composition roles the batch needs."""
    if method in ("poulin_theil", "berezhkovskiy"):
        both = ["water", "neutral_lipid", "neutral_phospholipid"]
        return {"tissue": both, "plasma": list(both)}
    tissue = ["extracellular_water", "intracellular_water", "neutral_lipid", "neutral_phospholipid"]
    tissue += [{"base2005": "acidic_phospholipid", "albumin": "albumin_ratio",
                "lipoprotein": "lipoprotein_ratio"}[k] for k in sorted(classes)]
    out = {"tissue": tissue}
    if classes - {"base2005"}:
        out["plasma"] = ["neutral_lipid", "neutral_phospholipid"]
    if "base2005" in classes:
        out["rbc"] = ["intracellular_water", "neutral_lipid", "neutral_phospholipid", "acidic_phospholipid"]
    return out


def _class_roles(klass: str, method: str) -> dict[str, list[str]]:
    return _needs(method, {klass})


# ---- borrowing ------------------------------------------------------------------------------------

def _donors(store, species: str, borrow_from: str | None) -> list[str]:
    """Species to borrow from, in order; 'closest' means the same taxon class, rat first."""
    if borrow_from is None:
        return []
    if borrow_from != "closest":
        store.require("species", borrow_from, "species to borrow from")
        if borrow_from == species:
            raise PartitionError(f"cannot borrow composition of {species} from itself; name another species")
        return [borrow_from]
    taxa = {r["id"]: r["taxon_class"] for r in store.query("SELECT id, taxon_class FROM species")}
    holders = [r[0] for r in store.query(
        f"SELECT DISTINCT species_id FROM curated_values WHERE quantity_id IN ({', '.join('?' for _ in ROLES)})",
        tuple(ROLES.values())) if r[0] != species]
    same = lambda s: taxa.get(s) == taxa.get(species)  # noqa: E731
    return sorted(holders, key=lambda s: (not same(s), s != DEFAULT_DONOR, s))


@dataclass
class Part:
    """The composition used for one compartment: from the species itself, a donor, or missing."""

    items: dict[str, Item]
    donor: str = ""             # species borrowed from, "" if own
    missing: list[str] = field(default_factory=list)  # roles missing (a gap)


def _pick(own: dict, donors: list[tuple[str, dict]], comp: str, roles: list[str]) -> Part:
    have = {r: own[(comp, r)] for r in roles if (comp, r) in own}
    if len(have) == len(roles):
        return Part(have)
    for donor, theirs in donors:
        got = {r: theirs[(comp, r)] for r in roles if (comp, r) in theirs}
        if len(got) == len(roles):
            return Part(got, donor=donor)
    return Part(have, missing=[r for r in roles if r not in have])


# ---- the result -----------------------------------------------------------------------------------

def _clean(x):
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, (np.floating,)):
        return _clean(float(x))
    if isinstance(x, np.bool_):
        return bool(x)
    return x


@dataclass
class KpResult:
    species: str
    life_stage: str
    method: str
    compounds: list[Compound]
    table: pd.DataFrame           # one row per compound × tissue
    composition: pd.DataFrame     # the composition numbers used, with their rows
    notes: list[str] = field(default_factory=list)

    @property
    def gaps(self) -> pd.DataFrame:
        return self.table[self.table["status"] == "gap"]

    def kp(self, compound: str, tissue: str) -> float:
        row = self.table[(self.table["compound"] == compound) & (self.table["tissue"] == tissue)]
        if row.empty:
            raise KeyError(f"no Kp for {compound!r} in {tissue!r}")
        return float(row["kp"].iloc[0])

    def to_dict(self) -> dict:
        from bodyplan import CAUTION

        records = [{k: _clean(v) for k, v in r.items()} for r in self.table.to_dict(orient="records")]
        comp = [{k: _clean(v) for k, v in r.items()} for r in self.composition.to_dict(orient="records")]
        return {"species": self.species, "life_stage": self.life_stage, "method": METHODS[self.method],
                "ph": {"plasma": km.PH_PLASMA, "interstitial": km.PH_INTERSTITIAL,
                       "intracellular": km.PH_INTRACELLULAR, "erythrocyte": km.PH_ERYTHROCYTE},
                "compounds": [c.as_dict() for c in self.compounds], "kp": records, "composition": comp,
                "notes": self.notes, "caution": CAUTION}

    def to_json(self, indent: int = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent, ensure_ascii=False, allow_nan=False)

    def to_csv(self, path=None) -> str | None:
        flat = self.table.drop(columns=["composition"])
        return flat.to_csv(path, index=False, lineterminator="\n")


def _composition_frame(parts: dict[str, Part]) -> pd.DataFrame:
    rows = []
    for comp, part in parts.items():
        for role, item in part.items.items():
            rows.append({"compartment": comp, "role": role, "quantity": ROLES[role], "value": item.value,
                         "species": item.species, "borrowed_from": part.donor, "how": item.how,
                         "verified": item.verified,
                         "sources": ", ".join(item.sources), "rows": ", ".join(item.rows)})
    return pd.DataFrame(rows, columns=["compartment", "role", "quantity", "value", "species", "borrowed_from",
                                       "how", "verified", "sources", "rows"])


def _array(parts: list[Part], role: str) -> np.ndarray:
    return np.array([p.items[role].value if role in p.items else np.nan for p in parts])


def _hematocrit(store, species, life_stage, donors) -> tuple[float, str, tuple[str, ...], str]:
    """(value, species it is from, sources, reason if missing)."""
    from .resolve import Resolver

    for who in [species] + donors:
        resolved = Resolver(store, who, life_stage, None).fraction("hematocrit", "blood")
        if resolved.ok:
            return resolved.estimate.value, who, tuple(resolved.estimate.sources), ""
    return math.nan, "", (), f"no hematocrit stored for {species} ({life_stage})"


def partition_coefficients(store, species: str, compounds, *, method: str = "rodgers_rowland",
                           life_stage: str = "adult", borrow_from: str | bool | None = None,
                           tissues: list[str] | None = None) -> KpResult:
    """Kp of every tissue of ``species`` for each compound, with composition provenance.

    ``compounds``: a .toml/.csv path, a Compound, a dict of compound fields, or a list of
    those. ``method``: "rodgers_rowland" (2005 equation for moderate-to-strong bases, 2006
    otherwise), "poulin_theil" or "berezhkovskiy" (Poulin & Theil with the Berezhkovskiy
    correction). ``borrow_from``: None (a tissue with incomplete composition is a gap), a
    species id, True (rat), or "closest" (same taxon class, rat first); every borrowed Kp names
    its donor.
    """
    if borrow_from is True:
        borrow_from = DEFAULT_DONOR
    elif borrow_from is False:
        borrow_from = None
    if method not in METHODS:
        raise PartitionError(f"unknown method {method!r}; use one of {', '.join(METHODS)}")
    store.require("species", species, "species")
    store.require("life_stages", life_stage, "life stage")
    records = compounds_from(compounds)
    c = Compounds.of(records)
    classes = _classes(c)
    needs = _needs(method, set(classes))
    own = species_composition(store, species, life_stage)
    donor_ids = _donors(store, species, borrow_from)
    donors = [(d, species_composition(store, d, life_stage)) for d in donor_ids]
    tissue_ids = tissues or listed_tissues(own, donors)
    tparts = [_pick(own, donors, t, needs["tissue"]) for t in tissue_ids]
    plasma = _pick(own, donors, PLASMA, needs["plasma"]) if "plasma" in needs else Part({})
    rbc = _pick(own, donors, RBC, needs["rbc"]) if "rbc" in needs else Part({})
    notes: list[str] = []

    T = {role: _array(tparts, role)[None, :] for role in ROLES}
    P = {role: np.array([plasma.items[role].value if role in plasma.items else np.nan]) for role in ROLES}
    adipose = np.array([t == "adipose" for t in tissue_ids])[None, :]
    col = lambda a: a[:, None]  # noqa: E731
    logp, logp_oil, fu, bp = col(c.log_p), col(c.log_p_oil), col(c.fu_plasma), col(c.blood_plasma_ratio)
    pk = [col(c.acid_low), col(c.acid_high), col(c.base_high), col(c.base_low)]
    y = km.ionisation(km.PH_PLASMA, *pk)
    hct, hct_from, hct_sources = math.nan, "", ()
    if method in ("poulin_theil", "berezhkovskiy"):
        kp = km.poulin_theil(logp, logp_oil, y, fu, T, P, adipose, berezhkovskiy=method == "berezhkovskiy")
        labels = np.full(len(c), METHODS[method], dtype=object)
    else:
        x = km.ionisation(km.PH_INTRACELLULAR, *pk)
        kp = np.full((len(c), len(tissue_ids)), np.nan)
        strong = classes == "base2005"
        if strong.any():
            hct, hct_from, hct_sources, why = _hematocrit(store, species, life_stage, donor_ids)
            if why:
                notes.append(why)
            if hct_from and hct_from != species:
                notes.append(f"hematocrit borrowed from {hct_from}")
            R = {role: np.array([rbc.items[role].value if role in rbc.items else np.nan]) for role in ROLES}
            x_bc = km.ionisation(km.PH_ERYTHROCYTE, *pk)
            cat_bc = km.cationic(km.PH_ERYTHROCYTE, pk[2], pk[3])
            ka = km.acidic_phospholipid_affinity(logp, fu, bp, hct, y, x_bc, cat_bc, R)
            base = km.rodgers_2005(logp, logp_oil, fu, ka, y, x, km.cationic(km.PH_INTRACELLULAR, pk[2], pk[3]),
                                   T, adipose)
            kp = np.where(col(strong), base, kp)
            negative = strong & (ka[:, 0] < 0)
            for i in np.flatnonzero(negative):
                notes.append(f"{c.names[i]}: blood:plasma ratio {c.blood_plasma_ratio[i]:g} is below what "
                             "partitioning alone gives; acidic phospholipid binding taken as 0")
        if (~strong).any():
            ratio = np.where(col(classes == "albumin"), T["albumin_ratio"], T["lipoprotein_ratio"])
            other = km.rodgers_2006(logp, logp_oil, fu, y, x, T, P, ratio, adipose)
            kp = np.where(col(~strong), other, kp)
        labels = np.where(strong, RR2005 + " (moderate-to-strong base)", RR2006 + " (" + np.where(
            classes == "albumin", "acid or zwitterion; albumin", "neutral or weak base; lipoprotein") + ")")
    held = set(composition_coverage(store, life_stage=life_stage)["compartment"])
    for kind, comp in (("plasma", PLASMA), ("rbc", RBC)):
        if kind in needs and comp not in held:
            notes.append(f"no species in the store has {comp} composition ({life_stage}) "
                         f"({', '.join(needs[kind])}); borrowing cannot fill it: curate a source")
    table = _table(species, c, classes, tissue_ids, tparts, plasma, rbc, kp, labels, method, hct, hct_from, hct_sources)
    parts = {t: p for t, p in zip(tissue_ids, tparts)}
    if needs.get("plasma"):
        parts[PLASMA] = plasma
    if needs.get("rbc"):
        parts[RBC] = rbc
    return KpResult(species, life_stage, method, records, table, _composition_frame(parts), notes)


def _cell_meta(species, klass, tissue, tpart, plasma, rbc, method, hct, hct_from, hct_sources) -> dict:
    """What one (binding class, tissue) pair used and lacked; shared by every compound of that class."""
    needs = _class_roles(klass, method)
    used = {"tissue": tpart, "plasma": plasma, "rbc": rbc}
    names = {"tissue": tissue, "plasma": PLASMA, "rbc": RBC}
    missing = [f"{names[kind]} {r}" for kind, roles in needs.items() for r in roles if r not in used[kind].items]
    donors = {used[kind].donor for kind in needs if used[kind].donor}
    sources = list(dict.fromkeys(s for kind, roles in needs.items() for r in roles
                                 if r in used[kind].items for s in used[kind].items[r].sources))
    reason = ""
    if missing:
        reason = ("no composition stored: " + ", ".join(missing) +
                  ("" if donors else "; ask to borrow from another species (--borrow-from rat)"))
    composition = {f"{kind}.{r}": round(used[kind].items[r].value, 6)
                   for kind, roles in needs.items() for r in roles if r in used[kind].items}
    if "rbc" in needs:
        if math.isnan(hct):
            reason = reason or f"no hematocrit stored for {species}"
        else:
            composition["hematocrit"] = round(hct, 4)
        sources += [s for s in hct_sources if s not in sources]
        if hct_from and hct_from != species:
            donors.add(hct_from)
    verified = all(used[kind].items[r].verified for kind, roles in needs.items() for r in roles
                   if r in used[kind].items)
    return {"reason": reason, "missing": "; ".join(missing), "borrowed_from": ", ".join(sorted(donors)),
            "composition_verified": verified,
            "sources": ", ".join(sources), "composition": composition}


def _table(species, c, classes, tissue_ids, tparts, plasma, rbc, kp, labels, method, hct, hct_from, hct_sources):
    """One row per compound × tissue, built by indexing a small (class × tissue) table of provenance."""
    kinds = sorted(set(classes))
    meta = [[_cell_meta(species, k, t, p, plasma, rbc, method, hct, hct_from, hct_sources)
             for t, p in zip(tissue_ids, tparts)] for k in kinds]
    k_index = np.searchsorted(np.array(kinds), classes)
    n, m = kp.shape

    def gather(key):
        grid = np.empty((len(kinds), m), dtype=object)
        for a, row in enumerate(meta):
            for b, cell in enumerate(row):
                grid[a, b] = cell[key]
        return grid[k_index].ravel()

    reason = gather("reason")
    donors = gather("borrowed_from")
    value = kp.ravel()
    no_reason = reason == ""
    bad = no_reason & ~np.isfinite(value)
    reason = np.where(bad, "not computable from these inputs", reason)
    ok = no_reason & ~bad
    value = np.where(ok, value, np.nan)
    status = np.where(~ok, "gap", np.where(donors != "", "borrowed", "computed"))
    return pd.DataFrame({
        "compound": np.repeat(np.array(c.names, dtype=object), m),
        "tissue": np.tile(np.array(tissue_ids, dtype=object), n),
        "kp": value,
        "kp_blood": value / np.repeat(c.blood_plasma_ratio, m),
        "status": status, "borrowed_from": donors,
        "method": np.repeat(labels.astype(object), m),
        "composition_verified": gather("composition_verified").astype(bool),
        "sources": gather("sources"), "reason": reason, "missing": gather("missing"),
        "composition": gather("composition"),
    })


# ---- model compartments of a parameter set --------------------------------------------------------

def model_partition_coefficients(kp: KpResult, parameter_set, store) -> pd.DataFrame:
    """Kp per MODEL compartment of ``parameter_set``: volume-weighted over its stored parts.

    Returns one row per (compound, model compartment): ``kp`` (tissue:plasma), ``kp_blood``
    (tissue:blood = Kp / blood:plasma ratio), ``status`` (computed, borrowed, partial, gap,
    reference for blood itself, or assumed for rest_of_body),
    ``parts`` and ``parts_without_kp``, ``weights`` (each part's share of the volume used),
    ``sources`` and ``reason``. A compartment made of one stored part takes that part's Kp; a
    lumped one weights its parts by their stored volume per kg body weight; parts without a Kp
    are left out and the row is marked ``partial`` with their names, never silently.
    """
    from .parameters import resolve_parameter

    if parameter_set.species != kp.species:
        raise PartitionError(f"Kp are for {kp.species} but the parameter set is for {parameter_set.species}")
    by = {(r.compound, r.tissue): r for r in kp.table.itertuples(index=False)}
    volume_cache: dict[str, float] = {}

    def volume(part: str) -> float:
        if part not in volume_cache:
            res = resolve_parameter(store, parameter_set.species, part, "volume",
                                    life_stage=parameter_set.life_stage, sex=parameter_set.sex)
            volume_cache[part] = res.estimate.value if res.ok else math.nan
        return volume_cache[part]

    bp = {c.name: c.blood_plasma_ratio for c in kp.compounds}
    rows = []
    for compound in bp:
        for model, parts in parameter_set.layout.compartments.items():
            have = [p for p in parts if (compound, p) in by and by[(compound, p)].status != "gap"]
            lacking = [p for p in parts if p not in have]
            row = {"compound": compound, "compartment": model, "kp": math.nan, "kp_blood": math.nan,
                   "status": "gap", "parts": list(parts), "parts_without_kp": lacking, "weights": {},
                   "borrowed_from": "", "sources": "", "reason": ""}
            if not has_own_flow(parts):  # blood itself: the reference of every tissue:blood Kp
                row.update(kp=float(bp[compound]), kp_blood=1.0, status="reference", parts_without_kp=[],
                           reason="blood is the reference: tissue:blood 1, tissue:plasma the blood:plasma ratio")
                rows.append(row)
                continue
            if not have:
                row["reason"] = "no part has a Kp: " + ", ".join(parts)
                rows.append(row)
                continue
            vols = np.array([volume(p) for p in have]) if len(have) > 1 else np.array([1.0])
            if np.isnan(vols).any():
                row["reason"] = "no stored volume to weight by: " + ", ".join(
                    p for p, v in zip(have, vols) if np.isnan(v))
                rows.append(row)
                continue
            weights = vols / vols.sum()
            value = float(sum(w * by[(compound, p)].kp for w, p in zip(weights, have)))
            donors = sorted({d for p in have for d in by[(compound, p)].borrowed_from.split(", ") if d})
            row.update(kp=value, kp_blood=value / bp[compound], weights=dict(zip(have, weights.round(6).tolist())),
                       borrowed_from=", ".join(donors),
                       sources=", ".join(dict.fromkeys(s for p in have for s in by[(compound, p)].sources.split(", ")
                                                       if s)),
                       status="partial" if lacking else ("borrowed" if donors else "computed"),
                       reason=("no Kp for " + ", ".join(lacking)) if lacking else "")
            rows.append(row)
        rows.append(_rest_row(compound, rows, parameter_set.layout.compartments))
    return pd.DataFrame(rows)


def _rest_row(compound: str, rows: list[dict], compartments: dict) -> dict:
    """rest_of_body's Kp: that of the compartment holding REST_KP_LIKE, marked assumed; a gap without it."""
    like = next((r for r in rows if r["compound"] == compound and REST_KP_LIKE in compartments.get(r["compartment"], ())),
                None)
    row = {"compound": compound, "compartment": REST, "kp": math.nan, "kp_blood": math.nan, "status": "gap",
           "parts": [], "parts_without_kp": [], "weights": {}, "borrowed_from": "", "sources": "",
           "reason": f"rest_of_body has no composition of its own and the set has no {REST_KP_LIKE} Kp to assume"}
    if like is not None and not math.isnan(like["kp"]):
        row.update(kp=like["kp"], kp_blood=like["kp_blood"], status="assumed", borrowed_from=like["borrowed_from"],
                   sources=like["sources"], reason=f"rest_of_body has no composition of its own: the Kp of "
                   f"{like['compartment']} is assumed (common practice, no source)")
    return row
