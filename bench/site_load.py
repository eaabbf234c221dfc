"""Load on the read-only site: `bodyplan serve` on loopback, concurrent clients, latency percentiles.

Usage: python bench/site_load.py [--store PATH] [--clients 20] [--requests 400]

Runs the site in a subprocess, then in the same run measures
  baseline         a trivial static route (/-/versions.json),
  site             a mix of table JSON, a filtered table page and a named query, as a browser asks for
                   them (repeated URLs, so after the first request each comes from the site's page cache),
  site, uncached   the same mix with a unique `_miss=N` argument on every request, so every request
                   runs its queries and renders its page,
each with the same number of requests and clients; prints p50/p95 latency, errors and the ratios to
the baseline, and writes the figures to bench/results/site_load.json.
Target (issue): p95 ≤ 150 ms for the site mix, zero errors.
"""

from __future__ import annotations

import argparse
import http.client
import json
import os
import queue
import socket
import sqlite3
import statistics
import subprocess
import sys
import threading
import time
import urllib.request
from pathlib import Path

RESULTS = Path(__file__).parent / "results"


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def start_server(store: Path) -> tuple[subprocess.Popen, str]:
    port = free_port()
    proc = subprocess.Popen([sys.executable, "-P", "-c", "from bodyplan.cli import main; main()", "serve", "--port",
                             str(port), "--store", str(store)], stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                            text=True, env=dict(os.environ, BODYPLAN_STORE=""))
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            urllib.request.urlopen(base + "/-/versions.json", timeout=2).read()
            return proc, base
        except OSError:
            if proc.poll() is not None or time.monotonic() > deadline:
                proc.kill()
                sys.exit("server did not start:\n" + proc.communicate()[0])
            time.sleep(0.2)


def site_routes(store: Path) -> list[str]:
    """Table JSON, a filtered table page and a named query, for a species the store has values for."""
    conn = sqlite3.connect(store)
    species, stage, quantity = (
        conn.execute("SELECT species_id, life_stage_id, quantity_id FROM curated_values WHERE species_id = 'dog' "
                     "GROUP BY 1, 2, 3 ORDER BY count(*) DESC").fetchone()
        or conn.execute("SELECT species_id, life_stage_id, quantity_id FROM curated_values "
                        "GROUP BY 1, 2, 3 ORDER BY count(*) DESC").fetchone())
    return ["/bodyplan/curated_values.json?_size=100",
            f"/bodyplan/curated_values?species_id={species}&quantity_id={quantity}",
            f"/bodyplan/parameter_set.json?species={species}&life_stage={stage}"]


def load(base: str, routes: list[str], total: int, clients: int, unique: bool = False) -> dict:
    """``clients`` threads, each with its own keep-alive connection, share ``total`` requests."""
    host, port = base.removeprefix("http://").split(":")
    paths = queue.SimpleQueue()
    for i in range(total):
        path = routes[i % len(routes)]
        paths.put(f"{path}&_miss={i}" if unique else path)
    latencies: list[float] = []
    errors: list[str] = []

    def client() -> None:
        conn = http.client.HTTPConnection(host, int(port), timeout=30)
        for path in routes:  # warm-up, not counted: templates compile (and the page cache fills)
            conn.request("GET", path)
            conn.getresponse().read()
        ready.wait()  # a barrier: every client warmed up, then the clock starts
        while True:
            try:
                path = paths.get_nowait()
            except queue.Empty:
                break
            start = time.perf_counter()
            try:
                conn.request("GET", path)
                response = conn.getresponse()
                response.read()
                if response.status != 200:
                    errors.append(f"{response.status} {path}")
            except (OSError, http.client.HTTPException) as exc:
                errors.append(f"{type(exc).__name__} {path}")
                conn.close()
                conn = http.client.HTTPConnection(host, int(port), timeout=30)
            latencies.append((time.perf_counter() - start) * 1000)
        conn.close()

    ready = threading.Barrier(clients + 1)
    threads = [threading.Thread(target=client) for _ in range(clients)]
    for thread in threads:
        thread.start()
    ready.wait()
    started = time.perf_counter()
    for thread in threads:
        thread.join()
    wall = time.perf_counter() - started
    cuts = statistics.quantiles(latencies, n=100)
    return {"requests": len(latencies), "errors": len(errors), "error_samples": errors[:5],
            "p50_ms": round(cuts[49], 1), "p95_ms": round(cuts[94], 1), "max_ms": round(max(latencies), 1),
            "throughput_rps": round(len(latencies) / wall, 1)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", type=Path, help="store file (default: the bundled store, built if needed)")
    parser.add_argument("--clients", type=int, default=20)
    parser.add_argument("--requests", type=int, default=400)
    args = parser.parse_args()
    from bodyplan.api import locate_store

    store = locate_store(args.store)
    proc, base = start_server(store)
    try:
        baseline = load(base, ["/-/versions.json"], args.requests, args.clients)
        site = load(base, site_routes(store), args.requests, args.clients)
        uncached = load(base, site_routes(store), args.requests, args.clients, unique=True)
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    report = {"store": str(store), "clients": args.clients, "cpus": os.cpu_count(),
              "load_average_1min": round(os.getloadavg()[0], 2), "routes": site_routes(store),
              "baseline_versions_json": baseline, "site_mix": site, "site_mix_uncached": uncached,
              "p95_ratio_site_to_baseline": round(site["p95_ms"] / baseline["p95_ms"], 2),
              "p95_ratio_uncached_to_baseline": round(uncached["p95_ms"] / baseline["p95_ms"], 2),
              "target": "site p95 <= 150 ms, zero errors",
              "meets_target": site["p95_ms"] <= 150 and site["errors"] == 0 and baseline["errors"] == 0}
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "site_load.json").write_text(json.dumps(report, indent=2) + "\n")
    for name, figures in (("baseline /-/versions.json", baseline), ("site mix", site),
                          ("site mix, uncached", uncached)):
        print(f"{name:28s} p50 {figures['p50_ms']:7.1f} ms  p95 {figures['p95_ms']:7.1f} ms  "
              f"max {figures['max_ms']:7.1f} ms  {figures['throughput_rps']:6.1f} req/s  "
              f"errors {figures['errors']}/{figures['requests']}")
    print(f"p95 ratio to baseline: site {report['p95_ratio_site_to_baseline']}, uncached "
          f"{report['p95_ratio_uncached_to_baseline']}; target met (site mix): {report['meets_target']}; "
          f"{report['cpus']} CPUs, load average {report['load_average_1min']}")


if __name__ == "__main__":
    main()
