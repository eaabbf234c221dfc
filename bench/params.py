"""Parameter-set speed: in-process warm latency, and the CLI end to end against importing pandas.

Targets: in-process ``parameter_set`` median ≤ 10 ms warm; ``bodyplan params dog --format json``
median wall time ≤ 1.3 × ``python -c "import pandas"``, both measured in this run.

    python bench/params.py [--store PATH] [--species dog] [--runs 15]
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def wall(cmd: list[str], runs: int, env: dict) -> list[float]:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=env)
        times.append(time.perf_counter() - start)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", help="store to use (default: build the bundled files into a temp dir)")
    parser.add_argument("--species", default="dog")
    parser.add_argument("--runs", type=int, default=15)
    args = parser.parse_args()

    import bodyplan
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import build

    tmp = Path(tempfile.mkdtemp())
    store_path = Path(args.store) if args.store else tmp / "store.sqlite"
    if not args.store:
        build(bundled_data_dir(), store_path)
    store = bodyplan.open_store(store_path)

    store.parameter_set(args.species)  # warm: imports and first queries
    inproc = []
    for _ in range(max(args.runs * 10, 100)):
        start = time.perf_counter()
        store.parameter_set(args.species)
        inproc.append(time.perf_counter() - start)
    print(f"in-process parameter_set({args.species!r}): median {statistics.median(inproc) * 1e3:.2f} ms, "
          f"p95 {sorted(inproc)[int(len(inproc) * 0.95)] * 1e3:.2f} ms over {len(inproc)} runs (target ≤ 10 ms)")

    env = dict(os.environ, BODYPLAN_STORE=str(store_path))
    exe = shutil.which("bodyplan") or str(Path(sys.executable).parent / "bodyplan")
    baseline = wall([sys.executable, "-c", "import pandas"], args.runs, env)
    cli = wall([exe, "params", args.species, "--format", "json"], args.runs, env)
    b, c = statistics.median(baseline), statistics.median(cli)
    print(f"python -c 'import pandas': median {b * 1e3:.0f} ms")
    print(f"bodyplan params {args.species} --format json: median {c * 1e3:.0f} ms")
    print(f"ratio CLI / import pandas: {c / b:.2f} (target ≤ 1.3)")
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
