"""Kp speed: every tissue of one species for 10,000 compounds in one call, against a numpy baseline.

Reports (1) the vectorised equations alone (Rodgers & Rowland, Poulin & Theil) on the stored
composition, (2) the whole ``Store.partition_coefficients`` call (composition from the store,
provenance per Kp, the result table), and the ratio of each to a baseline measured in the
same run: numpy evaluating the same number of elementwise expressions on arrays of the same
shape (compounds × tissues). Target: the whole call ≤ 1 s.

    python bench/partition.py [--store PATH] [--species rat] [--compounds 10000] [--runs 5]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

EXPRESSIONS = 60  # about the number of elementwise array expressions the equations evaluate


def timed(fn, runs: int) -> float:
    fn()  # warm
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", help="store to use (default: build the bundled files into a temp dir)")
    parser.add_argument("--species", default="rat")
    parser.add_argument("--borrow-from", default="human", help="donor for missing plasma composition")
    parser.add_argument("--compounds", type=int, default=10_000)
    parser.add_argument("--runs", type=int, default=5)
    args = parser.parse_args()

    import bodyplan
    from bodyplan.api import kp_methods as km
    from bodyplan.api.compound import Compound, Compounds
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.api.partition import listed_tissues, species_composition
    from bodyplan.ingest import build

    store_path = Path(args.store) if args.store else Path(tempfile.mkdtemp()) / "store.sqlite"
    if not args.store:
        build(bundled_data_dir(), store_path)
    store = bodyplan.open_store(store_path)

    rng = np.random.default_rng(0)
    n = args.compounds
    kinds = rng.integers(0, 3, n)  # neutral, acid, weak base: the store holds no erythrocyte composition
    compounds = [Compound(f"c{i}", float(rng.uniform(-2, 6)), float(rng.uniform(0.01, 1)),
                          float(rng.uniform(0.6, 2)),
                          pka_acid=(float(rng.uniform(2, 6)),) if k == 1 else (),
                          pka_base=(float(rng.uniform(2, 6.5)),) if k == 2 else ())
                 for i, k in enumerate(kinds)]
    c = Compounds.of(compounds)
    tissues = listed_tissues(species_composition(store, "rat"), [])
    m = len(tissues)

    # (1) the equations alone, on composition arrays shaped like the store's
    col = lambda a: a[:, None]  # noqa: E731
    rand = lambda: rng.uniform(0.001, 0.5, (1, m))  # noqa: E731
    T = {k: rand() for k in ("water", "extracellular_water", "intracellular_water", "neutral_lipid",
                             "neutral_phospholipid", "albumin_ratio", "lipoprotein_ratio", "acidic_phospholipid")}
    P = {k: np.array([0.003]) for k in ("water", "neutral_lipid", "neutral_phospholipid")}
    adipose = np.array([[t == "adipose" for t in tissues]])
    pk = [col(c.acid_low), col(c.acid_high), col(c.base_high), col(c.base_low)]

    def equations():
        y = km.ionisation(km.PH_PLASMA, *pk)
        x = km.ionisation(km.PH_INTRACELLULAR, *pk)
        km.rodgers_2006(col(c.log_p), col(c.log_p_oil), col(c.fu_plasma), y, x, T, P, T["albumin_ratio"], adipose)
        km.poulin_theil(col(c.log_p), col(c.log_p_oil), y, col(c.fu_plasma), T, P, adipose)

    a = rng.uniform(0.1, 1, (n, m))
    b = rng.uniform(0.1, 1, (n, m))

    def baseline():
        out = a
        for _ in range(EXPRESSIONS):
            out = out * b + a
        return out

    def whole_call():
        return store.partition_coefficients(args.species, compounds, borrow_from=args.borrow_from)

    base = timed(baseline, args.runs)
    eq = timed(equations, args.runs)
    whole = timed(whole_call, max(1, args.runs // 2))
    result = whole_call()
    print(f"{n:,} compounds × {m} tissues of {args.species} ({len(result.table):,} Kp, "
          f"{int((result.table['status'] != 'gap').sum()):,} computed or borrowed)")
    print(f"baseline: numpy, {EXPRESSIONS} elementwise expressions on {n:,}×{m} arrays: {base * 1e3:.1f} ms")
    print(f"equations (Rodgers & Rowland 2006 + Poulin & Theil): {eq * 1e3:.1f} ms = {eq / base:.2f}× baseline")
    print(f"Store.partition_coefficients, with provenance per Kp: {whole * 1e3:.0f} ms = {whole / base:.1f}× baseline "
          f"(target ≤ 1 s: {'met' if whole <= 1.0 else 'NOT met'})")


if __name__ == "__main__":
    main()
