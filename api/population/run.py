"""Running a population: blocks grouped into chunks, drawn in parallel processes, streamed to disk in
block order (CSV or Parquet), with a sidecar JSON of the distributions used and the balances' effect.

Memory stays flat: at most two chunks per worker are in flight, and each is written as soon as it and
every chunk before it are done. Output bytes depend only on the seed, the spec and n: a chunk is a run
of whole blocks, Parquet row groups are the blocks, and moments are summed block by block in order.
"""

from __future__ import annotations

import json
import math
import os
from concurrent.futures import ProcessPoolExecutor
from contextlib import nullcontext
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from ... import CAUTION
from .sample import GRID, BlockStats, draw_block, population_means
from .spec import PopulationError, PopulationSpec

FORMATS = ("csv", "parquet")
DEFAULT_CHUNK = 8 * GRID


@dataclass
class Population:
    """A drawn population: where it was written (or the frame, when drawn in memory) and its sidecar."""

    spec: PopulationSpec
    n: int
    seed: int
    sidecar: dict
    path: Path | None = None
    sidecar_path: Path | None = None
    frame: object = None  # pandas DataFrame when no path was given
    columns: list[tuple[str, str]] = field(default_factory=list)

    def parameter_sets(self, individuals) -> list:
        """The parameter sets of the given individuals; see :func:`individuals.individual_sets`."""
        from .individuals import individual_sets

        return individual_sets(self, individuals)


def grid(n: int) -> list[tuple[int, int]]:
    """The fixed block grid of n individuals: (block, size) pairs; block i holds individuals from i·GRID."""
    return [(i, min(GRID, n - i * GRID)) for i in range(math.ceil(n / GRID))]


def _chunks(n: int, chunk_size: int) -> list[list[tuple[int, int]]]:
    """The grid grouped into chunks of whole blocks: [[(block, size), …], …]."""
    blocks = grid(n)
    per = max(1, math.ceil(chunk_size / GRID))
    return [blocks[i:i + per] for i in range(0, len(blocks), per)]


def _table(spec: PopulationSpec, matrix: np.ndarray, start: int):
    import pyarrow as pa

    arrays = [pa.array(np.arange(start, start + len(matrix), dtype=np.int64))]
    arrays += [pa.array(np.ascontiguousarray(matrix[:, i])) for i in range(matrix.shape[1])]
    return pa.Table.from_arrays(arrays, names=["individual", *(c for c, _ in spec.columns())])


def _work(spec: PopulationSpec, means: dict, seed: int, chunk: list[tuple[int, int]], fmt: str | None):
    """One chunk: its matrix (or its CSV bytes, formatted here so workers share the formatting) and stats."""
    parts, stats = [], []
    for block, size in chunk:
        matrix, st = draw_block(spec, means, seed, block, size)
        parts.append(matrix)
        stats.append(st)
    matrix = np.concatenate(parts)
    if fmt == "csv":
        import pyarrow as pa
        import pyarrow.csv as pacsv

        sink = pa.BufferOutputStream()
        pacsv.write_csv(_table(spec, matrix, chunk[0][0] * GRID), sink,
                        pacsv.WriteOptions(include_header=False, batch_size=GRID))
        return sink.getvalue().to_pybytes(), stats
    return matrix, stats


def _results(spec, means, seed, chunks, fmt, workers, executor=None):
    """Chunk results in order; with workers > 1 in processes (or on ``executor``, anything with
    concurrent.futures' ``submit``), never more than 2 × workers in flight."""
    if executor is None and (workers <= 1 or len(chunks) == 1):
        for chunk in chunks:
            yield _work(spec, means, seed, chunk, fmt)
        return
    with (nullcontext(executor) if executor is not None else ProcessPoolExecutor(max_workers=workers)) as pool:
        pending = []
        todo = iter(chunks)
        for chunk in todo:
            pending.append(pool.submit(_work, spec, means, seed, chunk, fmt))
            if len(pending) >= 2 * workers:
                break
        while pending:
            result = pending.pop(0).result()
            nxt = next(todo, None)
            if nxt is not None:
                pending.append(pool.submit(_work, spec, means, seed, nxt, fmt))
            yield result


def draw_population(spec: PopulationSpec, n: int, seed: int, *, out=None, fmt: str | None = None,
                    chunk_size: int = DEFAULT_CHUNK, workers: int | None = None, mean_uncertainty: bool = False,
                    progress=None, executor=None) -> Population:
    """Draw ``n`` individuals; write them to ``out`` (CSV or Parquet, by ``fmt`` or the suffix) with a
    sidecar ``out + '.json'``, or keep them in memory as a DataFrame when ``out`` is None.
    ``progress(chunks_done, chunks_total, individuals_done)`` is called after each chunk. ``executor``
    (a concurrent.futures Executor, or a distributed engine's equivalent) runs the chunks instead of a
    pool of ``workers`` local processes; the bytes are the same either way."""
    if not isinstance(n, (int, np.integer)) or n < 1:
        raise PopulationError(f"n must be a positive whole number, got {n!r}")
    if not isinstance(seed, (int, np.integer)) or seed < 0:
        raise PopulationError(f"seed must be a whole number ≥ 0, got {seed!r}")
    if chunk_size < 1:
        raise PopulationError(f"chunk size must be positive, got {chunk_size!r}")
    workers = (os.cpu_count() or 1) if workers is None else max(1, int(workers))
    path = None if out is None else Path(out)
    if path is not None:
        fmt = fmt or path.suffix.lstrip(".").lower()
        if fmt not in FORMATS:
            raise PopulationError(f"output format must be one of {', '.join(FORMATS)} (from --format or the file "
                                  f"suffix), not {fmt!r}")
    means = population_means(spec, seed, mean_uncertainty)
    chunks = _chunks(int(n), chunk_size)
    names = ["individual", *(c for c, _ in spec.columns())]
    stats: list[BlockStats] = []
    frames, done = [], 0
    writer = handle = None
    tmp = None if path is None else path.with_name(path.name + ".partial")
    try:
        if fmt == "parquet":
            import pyarrow.parquet as pq

            # no dictionary pages: drawn doubles hardly repeat, and trying costs 7× the writing time
            writer = pq.ParquetWriter(tmp, _table(spec, np.empty((0, len(names) - 1)), 0).schema, use_dictionary=False)
        elif fmt == "csv":
            handle = open(tmp, "wb")
            handle.write((",".join(names) + "\n").encode())
        for i, (result, block_stats) in enumerate(_results(spec, means, seed, chunks, fmt, workers, executor)):
            start = chunks[i][0][0] * GRID
            if fmt == "csv":
                handle.write(result)
            elif fmt == "parquet":
                writer.write_table(_table(spec, result, start), row_group_size=GRID)
            else:
                frames.append(_table(spec, result, start).to_pandas())
            stats += block_stats
            done += sum(size for _, size in chunks[i])
            if progress:
                progress(i + 1, len(chunks), done)
    except BaseException:
        if tmp is not None:
            if handle:
                handle.close()
            if writer:
                writer.close()
            tmp.unlink(missing_ok=True)
        raise
    if handle:
        handle.close()
    if writer:
        writer.close()
    sidecar = build_sidecar(spec, int(n), int(seed), means, stats, mean_uncertainty, path, fmt)
    pop = Population(spec, int(n), int(seed), sidecar, columns=spec.columns())
    if path is not None:
        tmp.replace(path)
        pop.path, pop.sidecar_path = path, path.with_name(path.name + ".json")
        pop.sidecar_path.write_text(json.dumps(sidecar, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    else:
        import pandas as pd

        pop.frame = pd.concat(frames, ignore_index=True)
    return pop


# ---- the sidecar ----------------------------------------------------------------------------------------
def _moments(sums: np.ndarray, n: int, mean: float) -> dict:
    m1, m2 = sums[0] / n, sums[1] / n
    var = max(m2 - m1 * m1, 0.0) * n / (n - 1) if n > 1 else 0.0
    return {"mean": float(mean + m1), "sd": float(math.sqrt(var))}


def _largest_shifts(variables: list[dict], k: int = 3) -> list[dict]:
    shifts = [(abs(v["balance_shift"]["mean"] or 0), v["column"], v["balance_shift"]) for v in variables]
    return [{"column": c, **shift} for size, c, shift in sorted(shifts, key=lambda s: (-s[0], s[1]))[:k] if size > 0]


def _finite(x):
    return None if x is None or not math.isfinite(x) else float(x)


def build_sidecar(spec: PopulationSpec, n: int, seed: int, means: dict, stats: list[BlockStats],
                  mean_uncertainty: bool, path, fmt) -> dict:
    """The distributions used, with sources, n and SD; the balance rule and what it did to each share."""
    # summed block by block in order, so the figures do not depend on the chunking
    first, kept = np.zeros_like(stats[0].first), np.zeros_like(stats[0].kept)
    for s in stats:
        first, kept = first + s.first, kept + s.kept
    variables = []
    for i, v in enumerate([spec.body_mass, *spec.variables]):
        entry = {k: (_finite(x) if isinstance(x, float) else x) for k, x in asdict(v).items()}
        entry["sources"], entry["sd_sources"] = list(v.sources), list(v.sd_sources)
        entry["cv"] = _finite(v.cv)
        entry["drawn_around"] = means[v.column]
        entry["drawn"] = _moments(first[i], n, means[v.column])
        entry["kept"] = _moments(kept[i], n, means[v.column])
        drawn, kept_ = entry["drawn"], entry["kept"]
        entry["balance_shift"] = {  # relative change the balance made to the mean and the SD
            "mean": _finite((kept_["mean"] - drawn["mean"]) / drawn["mean"]) if drawn["mean"] else None,
            "sd": _finite(kept_["sd"] / drawn["sd"] - 1) if drawn["sd"] > 0 else None}
        variables.append(entry)
    touched_v = sum(s.touched_volumes for s in stats)
    touched_f = sum(s.touched_flows for s in stats)
    rule = ("redraw: an individual whose named compartments' masses exceed its body mass (or whose named "
            "flows exceed its cardiac output) draws its volume (or flow) shares again until they fit"
            if spec.balance == "redraw" else
            "rescale: an individual whose named compartments' masses exceed its body mass (or whose named flows "
            "exceed its cardiac output) has its volume (or flow) shares shrunk in proportion until they fit")
    return {
        "species": spec.species, "life_stage": spec.life_stage, "sex": spec.sex, "layout": spec.layout,
        "fill": spec.fill, "filled": spec.filled, "n": n, "seed": seed, "grid": GRID,
        "temperature_c": None if spec.parameter_set is None else spec.parameter_set.temperature,
        "random_numbers": "numpy PCG64; block i of the grid draws from SeedSequence(seed, spawn_key=(1, i)), "
                          "the population-level means from spawn_key=(0,)",
        "data": None if path is None else {"file": Path(path).name, "format": fmt},
        "columns": [{"column": "individual", "unit": ""}] + [{"column": c, "unit": u} for c, u in spec.columns()],
        "construction": {
            "body_mass": "drawn first",
            "volume": "its drawn share (L per kg body mass; as a beta share of body mass by mass: × density) × body mass",
            "blood_flow": "its drawn fraction × the individual's cardiac output",
            "cardiac_output": "drawn at the reference body mass × (body mass / reference)^exponent",
            "gfr": "drawn per kg × body mass",
            "pulmonary blood_flow": "the individual's cardiac output",
            "rest_of_body.volume": "(body mass − Σ named volume × density) at 1 kg/L",
            "rest_of_body.blood_flow": "cardiac output × (1 − Σ named systemic fractions)"},
        "variables": variables,
        "in_rest_of_body": spec.in_rest,
        "not_in_output": spec.missing,
        "mean_uncertainty": ("each mean drawn once for this population from its predictive distribution for a "
                             "new group of animals (SD² = tau² + SE² of the DerSimonian–Laird pool)"
                             if mean_uncertainty else "not sampled: every individual is drawn around the pooled "
                             "means; tau² and the SE of each mean are reported, not mixed into the SD"),
        "without_sd": spec.without_sd,
        "balance": {"rule": rule, "largest_shifts": _largest_shifts(variables), "volumes_touched": touched_v, "volumes_touched_share": touched_v / n,
                    "flows_touched": touched_f, "flows_touched_share": touched_f / n,
                    "effect": "per variable, 'drawn' are the mean and SD of the first draws, 'kept' those after "
                              "the balance"},
        "caution": CAUTION,
    }
