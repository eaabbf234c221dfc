"""Population speed and memory: 1,000,000 individuals of a 14-compartment human set, against numpy alone.

Runs ``Store.population`` (default CV where no SD is stored, so every volume and flow is drawn; both
balances kept) in a fresh process for each output format and reports its wall time and peak resident
memory (the main process, the largest worker, and main + workers × largest worker as an upper bound
of the whole run), beside the time numpy alone needs in the same run to draw the same number of
lognormal values (individuals × drawn variables) in one process, and the ratio.
Targets: ≤ 20 s and ≤ 2 GB on a 2-core machine.

    python bench/population.py [--store PATH] [--n 1000000] [--workers 2] [--formats parquet csv]
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

# whole_body plus thyroid: 13 named compartments and rest_of_body
LAYOUT = """name = "bench14"
description = "whole_body and thyroid: 13 named compartments and rest_of_body"
[compartments]
lung = ["lung"]
heart = ["heart"]
brain = ["brain"]
liver = ["liver"]
gut = ["gut"]
spleen = ["spleen"]
kidney = ["kidney"]
thyroid = ["thyroid"]
muscle = ["muscle"]
adipose = ["adipose"]
skin = ["skin"]
bone = ["bone"]
blood = ["blood"]
"""

CHILD = """
import json, resource, sys, time
import bodyplan
store, layout, n, workers, out = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), sys.argv[5]
s = bodyplan.open_store(store)
start = time.perf_counter()
pop = s.population("human", n, 1, layout=layout, without_sd="default_cv", out=out, workers=workers)
elapsed = time.perf_counter() - start
kb = lambda who: resource.getrusage(who).ru_maxrss
cpu = lambda who: resource.getrusage(who).ru_utime + resource.getrusage(who).ru_stime
print(json.dumps({"seconds": elapsed, "main_cpu": cpu(resource.RUSAGE_SELF), "worker_cpu": cpu(resource.RUSAGE_CHILDREN), "main_kb": kb(resource.RUSAGE_SELF), "worker_kb": kb(resource.RUSAGE_CHILDREN),
                  "drawn": sum(v["distribution"] != "fixed" for v in pop.sidecar["variables"]),
                  "compartments": len(pop.spec.compartments), "columns": len(pop.columns),
                  "touched": pop.sidecar["balance"]["volumes_touched_share"], "bytes": pop.path.stat().st_size}))
"""


def numpy_baseline(n: int, k: int, chunk: int = 65_536) -> float:
    """Seconds for numpy to draw n × k lognormal values, chunk by chunk, in one process."""
    rng = np.random.default_rng(1)
    start = time.perf_counter()
    for first in range(0, n, chunk):
        rng.lognormal(0.0, 0.3, (min(chunk, n - first), k))
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", help="store to use (default: build the bundled files into a temp dir)")
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--formats", nargs="+", default=["parquet", "csv"])
    args = parser.parse_args()

    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import build

    tmp = Path(tempfile.mkdtemp())
    store = Path(args.store) if args.store else tmp / "store.sqlite"
    if not args.store:
        build(bundled_data_dir(), store)
    layout = tmp / "bench14.toml"
    layout.write_text(LAYOUT, encoding="utf-8")
    print(f"{args.n:,} individuals, human, 14 compartments, {args.workers} worker(s)")
    for fmt in args.formats:
        out = tmp / f"pop.{fmt}"
        run = subprocess.run([sys.executable, "-c", CHILD, str(store), str(layout), str(args.n), str(args.workers),
                              str(out)], capture_output=True, text=True, check=True)
        r = json.loads(run.stdout.strip().splitlines()[-1])
        base = numpy_baseline(args.n, r["drawn"])
        peak = (r["main_kb"] + args.workers * r["worker_kb"]) / 1024
        print(f"{fmt:8s} {r['seconds']:6.2f} s  ({r['columns']} columns, {r['drawn']} drawn variables, "
              f"{r['bytes'] / 1e6:,.0f} MB; mass balance redrew {r['touched']:.1%} of individuals)")
        print(f"         CPU: main {r['main_cpu']:.1f} s, workers {r['worker_cpu']:.1f} s (the machine's load slows "
              "the wall time; CPU seconds do not depend on it)")
        print(f"         peak memory: main {r['main_kb'] / 1024:,.0f} MB, largest worker {r['worker_kb'] / 1024:,.0f} MB, "
              f"whole run ≤ {peak:,.0f} MB (target ≤ 2048 MB)")
        print(f"         numpy alone, {args.n:,} × {r['drawn']} lognormal values: {base:.2f} s; "
              f"ratio {r['seconds'] / base:.1f}×; target ≤ 20 s: {'met' if r['seconds'] <= 20 else 'MISSED'}")
        if fmt == args.formats[0]:  # memory stays flat: a quarter of the individuals, about the same peak
            quarter = subprocess.run([sys.executable, "-c", CHILD, str(store), str(layout), str(args.n // 4),
                                      str(args.workers), str(out)], capture_output=True, text=True, check=True)
            q = json.loads(quarter.stdout.strip().splitlines()[-1])
            print(f"         flat memory: {args.n // 4:,} individuals peak main {q['main_kb'] / 1024:,.0f} MB, "
                  f"worker {q['worker_kb'] / 1024:,.0f} MB against {r['main_kb'] / 1024:,.0f} and "
                  f"{r['worker_kb'] / 1024:,.0f} MB for {args.n:,}")


if __name__ == "__main__":
    main()
