"""Load on the read-only site: `bodyplan serve` on 127.0.0.1, concurrent keep-alive clients, latency percentiles.

Usage: python bench/site_load.py [--store PATH] [--clients 20] [--requests 2000] [--flood-clients 20]
                                 [--flood-each 5]

Every request carries a distinct query string (`_miss=N`), so no cache in front of a view can answer it.
In the same run it measures, with the same clients and request counts:
  baseline          /-/versions.json, a trivial static route: the floor this machine gives,
  modeller pages    species, parameter-set, value and coverage pages and a parameter-set download
                    (rendered once at start, served from memory),
  table and JSON    the values table filtered (HTML), table JSON, a named query, a value's row page,
then restarts the server with --allow-sql and measures
  flood             `--flood-clients` clients each sending `--flood-each` endless recursive CTEs, while
                    cheap pages (a modeller page and a small table's JSON) are asked for meanwhile,
  abuse             each abusive query once (all must be refused),
sampling the server's resident memory (VmRSS) every 0.1 s throughout. Prints p50/p95, errors, the ratio
of each p95 to the baseline's, the peak memory, and writes the figures to bench/results/site_load.json.
Targets: modeller p95 <= 150 ms, table and JSON p95 <= 1,000 ms, 0 errors; cheap pages during the flood
p95 <= 500 ms; every abuse refused; server memory < 500 MB.
"""

from __future__ import annotations

import argparse
import http.client
import itertools
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
from urllib.parse import quote

RESULTS = Path(__file__).parent / "results"
HOST = "127.0.0.1"
ENDLESS = "WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT max(i) FROM c"
ABUSE = ["SELECT zeroblob(200000000) AS b", "SELECT length(randomblob(200000000)) AS b",
         "SELECT fts3_tokenizer('simple') AS t", "SELECT load_extension('/tmp/x')",
         "SELECT length(printf('%.*c', 2000000000, 'x'))", "PRAGMA user_version = 3", ENDLESS,
         "WITH RECURSIVE s(x) AS (SELECT 'x' UNION ALL SELECT x || x FROM s) SELECT max(length(x)) FROM s"]


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind((HOST, 0))
        return sock.getsockname()[1]


def start_server(store: Path, *extra: str) -> tuple[subprocess.Popen, str]:
    port = free_port()
    proc = subprocess.Popen([sys.executable, "-P", "-c", "from bodyplan.cli import main; main()", "serve", "--host",
                             HOST, "--port", str(port), "--store", str(store), *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            env=dict(os.environ, BODYPLAN_STORE=""))
    base = f"http://{HOST}:{port}"
    deadline = time.monotonic() + 120
    while True:
        try:
            urllib.request.urlopen(base + "/species", timeout=2).read()  # 503 until the pages are rendered
            return proc, base
        except OSError:
            if proc.poll() is not None or time.monotonic() > deadline:
                proc.kill()
                sys.exit("server did not start:\n" + proc.communicate()[0])
            time.sleep(0.3)


class Memory(threading.Thread):
    """Peak resident memory of one process, sampled until stopped."""

    def __init__(self, pid: int):
        super().__init__(daemon=True)
        self.pid, self.peak_mb, self.done = pid, 0.0, threading.Event()

    def run(self) -> None:
        while not self.done.is_set():
            try:
                text = Path(f"/proc/{self.pid}/status").read_text()
                kb = int(next(line.split()[1] for line in text.splitlines() if line.startswith("VmRSS")))
                self.peak_mb = max(self.peak_mb, kb / 1024)
            except (OSError, StopIteration):
                pass
            self.done.wait(0.1)


def routes(store: Path) -> dict[str, list[str]]:
    conn = sqlite3.connect(store)
    species, stage, quantity = (
        conn.execute("SELECT species_id, life_stage_id, quantity_id FROM curated_values WHERE species_id = 'dog' "
                     "GROUP BY 1, 2, 3 ORDER BY count(*) DESC").fetchone()
        or conn.execute("SELECT species_id, life_stage_id, quantity_id FROM curated_values "
                        "GROUP BY 1, 2, 3 ORDER BY count(*) DESC").fetchone())
    value = conn.execute("SELECT id FROM curated_values WHERE species_id = ? ORDER BY id", (species,)).fetchone()[0]
    return {
        "modeller": [f"/species/{species}", f"/sets/{species}/{stage}/whole_body", f"/values/{value}", "/coverage",
                     f"/sets/{species}/{stage}/rich_slow.json", "/species"],
        "tables": [f"/bodyplan/curated_values?species_id={species}&quantity_id={quantity}",
                   "/bodyplan/curated_values.json?_size=100",
                   f"/bodyplan/parameter_set.json?species={species}&life_stage={stage}",
                   f"/bodyplan/curated_values/{value}", "/bodyplan/curated_values"],
        "cheap": [f"/species/{species}", "/bodyplan/life_stages.json"],
    }


def load(base: str, paths, total: int, clients: int, expect=(200,)) -> dict:
    """``clients`` threads, each with its own keep-alive connection, share ``total`` requests; every URL distinct."""
    port = int(base.rsplit(":", 1)[1])
    work = queue.SimpleQueue()
    for i, path in zip(range(total), itertools.cycle(paths)):
        work.put((path, f"{path}{'&' if '?' in path else '?'}_miss={i}"))
    latencies: list[float] = []
    by_route: dict[str, list[float]] = {}
    errors: list[str] = []
    statuses: dict[int, int] = {}
    ready = threading.Barrier(clients + 1)

    def client() -> None:
        conn = http.client.HTTPConnection(HOST, port, timeout=60)
        ready.wait()
        while True:
            try:
                route, path = work.get_nowait()
            except queue.Empty:
                break
            start = time.perf_counter()
            try:
                conn.request("GET", path)
                response = conn.getresponse()
                response.read()
                statuses[response.status] = statuses.get(response.status, 0) + 1
                if response.status not in expect:
                    errors.append(f"{response.status} {path[:80]}")
            except (OSError, http.client.HTTPException) as exc:
                errors.append(f"{type(exc).__name__} {path[:80]}")
                conn.close()
                conn = http.client.HTTPConnection(HOST, port, timeout=60)
            latencies.append((time.perf_counter() - start) * 1000)
            by_route.setdefault(route, []).append(latencies[-1])
        conn.close()

    threads = [threading.Thread(target=client) for _ in range(clients)]
    for thread in threads:
        thread.start()
    ready.wait()
    started = time.perf_counter()
    for thread in threads:
        thread.join()
    wall = time.perf_counter() - started
    cuts = statistics.quantiles(latencies, n=100) if len(latencies) > 1 else latencies * 99
    return {"requests": len(latencies), "errors": len(errors), "error_samples": errors[:5], "statuses": statuses,
            "p50_ms": round(cuts[49], 1), "p95_ms": round(cuts[94], 1), "max_ms": round(max(latencies), 1),
            "throughput_rps": round(len(latencies) / wall, 1),
            "p95_ms_by_route": {r: round(statistics.quantiles(v, n=20)[18], 1) if len(v) > 1 else round(v[0], 1)
                                for r, v in by_route.items()}}


def warm(base: str, paths: list[str]) -> None:
    for path in paths:  # not counted: templates compile on first use
        urllib.request.urlopen(base + path, timeout=30).read()


def flood(base: str, cheap: list[str], clients: int, each: int, cheap_requests: int) -> dict:
    """Endless queries from ``clients`` clients (``each`` per client) while 4 clients ask for cheap pages."""
    out: dict = {}
    sql = "/bodyplan.json?sql=" + quote(ENDLESS)

    def run_flood() -> None:
        out["flood"] = load(base, [sql], clients * each, clients, expect=(400, 503))

    thread = threading.Thread(target=run_flood)
    thread.start()
    time.sleep(0.5)  # the pool is busy and its queue full before the cheap pages are timed
    out["cheap"] = load(base, cheap, cheap_requests, 4)
    thread.join()
    return out


def abuse(base: str) -> dict[str, int]:
    refused = {}
    for sql in ABUSE:
        try:
            urllib.request.urlopen(base + "/bodyplan.json?sql=" + quote(sql), timeout=30).read()
            refused[sql] = 200
        except urllib.error.HTTPError as exc:
            refused[sql] = exc.code
    return refused


def line(name: str, figures: dict, baseline: dict | None = None) -> str:
    ratio = f"  ×{figures['p95_ms'] / baseline['p95_ms']:.1f} baseline p95" if baseline else ""
    return (f"{name:34s} p50 {figures['p50_ms']:7.1f} ms  p95 {figures['p95_ms']:7.1f} ms  max {figures['max_ms']:7.1f}"
            f" ms  {figures['throughput_rps']:6.1f} req/s  errors {figures['errors']}/{figures['requests']}{ratio}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", type=Path, help="store file (default: the bundled store, built if needed)")
    parser.add_argument("--clients", type=int, default=20)
    parser.add_argument("--requests", type=int, default=2000, help="requests per mix (bounded)")
    parser.add_argument("--flood-clients", type=int, default=20)
    parser.add_argument("--flood-each", type=int, default=5)
    args = parser.parse_args()
    from bodyplan.api import locate_store

    store = locate_store(args.store)
    paths = routes(store)
    proc, base = start_server(store)
    memory = Memory(proc.pid)
    memory.start()
    try:
        warm(base, paths["modeller"] + paths["tables"])
        baseline = load(base, ["/-/versions.json"], args.requests, args.clients)
        modeller = load(base, paths["modeller"], args.requests, args.clients)
        tables = load(base, paths["tables"], args.requests, args.clients)
        sql_off = abuse(base)
    finally:
        proc.terminate()
        proc.wait(timeout=10)
        memory.done.set()
    proc, base = start_server(store, "--allow-sql")
    memory_sql = Memory(proc.pid)
    memory_sql.start()
    try:
        warm(base, paths["cheap"])
        baseline_sql = load(base, ["/-/versions.json"], args.requests // 4, 4)
        flooded = flood(base, paths["cheap"], args.flood_clients, args.flood_each, args.requests // 4)
        sql_on = abuse(base)
    finally:
        proc.terminate()
        proc.wait(timeout=10)
        memory_sql.done.set()
    peak = round(max(memory.peak_mb, memory_sql.peak_mb), 1)
    refused = all(code >= 400 for code in list(sql_off.values()) + list(sql_on.values()))
    report = {
        "store": str(store), "clients": args.clients, "requests_per_mix": args.requests, "cpus": os.cpu_count(),
        "load_average_1min": round(os.getloadavg()[0], 2), "routes": paths,
        "baseline_versions_json": baseline, "modeller_pages": modeller, "table_and_json_views": tables,
        "allow_sql_baseline_versions_json": baseline_sql, "flood": flooded["flood"],
        "cheap_pages_during_flood": flooded["cheap"],
        "abuse_status_sql_off": sql_off, "abuse_status_sql_on": sql_on, "peak_server_rss_mb": peak,
        "p95_ratio_to_baseline": {"modeller": round(modeller["p95_ms"] / baseline["p95_ms"], 2),
                                  "tables": round(tables["p95_ms"] / baseline["p95_ms"], 2),
                                  "cheap_during_flood": round(flooded["cheap"]["p95_ms"] / baseline_sql["p95_ms"], 2)},
        "targets": {"modeller_p95_le_150ms": modeller["p95_ms"] <= 150 and modeller["errors"] == 0,
                    "tables_p95_le_1000ms": tables["p95_ms"] <= 1000 and tables["errors"] == 0,
                    "cheap_during_flood_p95_le_500ms": flooded["cheap"]["p95_ms"] <= 500
                    and flooded["cheap"]["errors"] == 0,
                    "every_abuse_refused": refused, "memory_below_500mb": peak < 500},
    }
    RESULTS.mkdir(exist_ok=True)
    (RESULTS / "site_load.json").write_text(json.dumps(report, indent=2) + "\n")
    print(line("baseline /-/versions.json", baseline))
    print(line("modeller pages", modeller, baseline))
    print(line("table and JSON views", tables, baseline))
    for route, p95 in tables["p95_ms_by_route"].items():
        print(f"    p95 {p95:7.1f} ms  {route}")
    print(line("baseline (--allow-sql, 4 clients)", baseline_sql))
    print(line("cheap pages during the flood", flooded["cheap"], baseline_sql))
    print(line(f"flood: {args.flood_clients}x{args.flood_each} endless CTEs", flooded["flood"]),
          "statuses", flooded["flood"]["statuses"])
    print(f"abuse refused: SQL off {sorted(set(sql_off.values()))}, SQL on {sorted(set(sql_on.values()))}; "
          f"peak server memory {peak} MB; {report['cpus']} CPUs, load average {report['load_average_1min']}")
    print("targets:", ", ".join(f"{k} {'met' if v else 'MISSED'}" for k, v in report["targets"].items()))


if __name__ == "__main__":
    main()
