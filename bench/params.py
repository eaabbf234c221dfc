"""Parameter-set speed: in-process warm latency, and the CLI end to end against importing pandas.

Targets: in-process ``parameter_set`` median ≤ 10 ms warm; ``bodyplan params dog --body-mass "12 kg"
--format json`` (the body mass is parsed, so the unit registry loads) and the same without a body
mass: median wall time ≤ 1.3 × ``python -c "import pandas"``, all measured in this run, the commands
interleaved so that a change in the machine's load hits each of them alike.

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


def interleaved(cmds: dict[str, list[str]], runs: int, env: dict) -> dict[str, list[float]]:
    times = {name: [] for name in cmds}
    for name, cmd in cmds.items():  # warm the OS file cache and the unit registry's cache once
        subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=env)
    for _ in range(runs):
        for name, cmd in cmds.items():
            start = time.perf_counter()
            subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=env)
            times[name].append(time.perf_counter() - start)
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
    cmds = {"python -c 'import pandas'": [sys.executable, "-c", "import pandas"],
            f"bodyplan params {args.species} --format json": [exe, "params", args.species, "--format", "json"],
            f"bodyplan params {args.species} --body-mass '12 kg' --format json":
                [exe, "params", args.species, "--body-mass", "12 kg", "--format", "json"]}
    times = interleaved(cmds, args.runs, env)
    medians = {name: statistics.median(t) for name, t in times.items()}
    base = medians["python -c 'import pandas'"]
    for name, m in medians.items():
        print(f"{name}: median {m * 1e3:.0f} ms over {len(times[name])} runs")
    for name, m in list(medians.items())[1:]:
        print(f"ratio {name} / import pandas: {m / base:.2f} (target ≤ 1.3)")
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
