"""Store: read-only access to a built bodyplan SQLite file."""

from __future__ import annotations

from ..errors import BodyplanError

import sqlite3
from pathlib import Path

import pandas as pd

from .locate import StoreNotFoundError, locate_store, sqlite_uri

FILTERS = {  # keyword → column of curated_values
    "species": "species_id",
    "life_stage": "life_stage_id",
    "stage": "life_stage_id",
    "quantity": "quantity_id",
    "compartment": "compartment_id",
    "source": "source_id",
    "sex": "sex",
}


class UnknownIdError(BodyplanError, LookupError):
    """A species, stage, quantity or compartment id the store does not know."""


class Store:
    """A built store, opened read-only. Cheap to create; one SQLite connection."""

    def __init__(self, path: str | Path):
        self.path = Path(path)
        with open(self.path, "rb") as fh:  # a text file or a picture given as --store: a clear refusal
            if fh.read(16) != b"SQLite format 3\x00":
                raise StoreNotFoundError(f"{self.path} is not a bodyplan store (not an SQLite file); build one "
                                         f"with 'bodyplan build --out STORE.sqlite'")
        self.conn = sqlite3.connect(sqlite_uri(self.path, "ro"), uri=True, check_same_thread=False)
        self.conn.row_factory = sqlite3.Row
        if not self.conn.execute("SELECT 1 FROM sqlite_master WHERE name = 'build_info'").fetchone():
            self.conn.close()
            raise StoreNotFoundError(f"{self.path} is an SQLite file but not a bodyplan store (no build_info "
                                     "table); build one with 'bodyplan build --out STORE.sqlite'")

    def __repr__(self) -> str:
        return f"Store({str(self.path)!r})"

    def query(self, sql: str, params=()) -> list[sqlite3.Row]:
        return self.conn.execute(sql, params).fetchall()

    def frame(self, sql: str, params=()) -> pd.DataFrame:
        cur = self.conn.execute(sql, params)
        return pd.DataFrame.from_records(cur.fetchall(), columns=[d[0] for d in cur.description])

    def ids(self, table: str) -> list[str]:
        return [r[0] for r in self.query(f'SELECT id FROM "{table}" ORDER BY id')]

    def require(self, table: str, value: str, what: str) -> None:
        if not self.query(f'SELECT 1 FROM "{table}" WHERE id = ?', (value,)):
            known = ", ".join(self.ids(table))
            raise UnknownIdError(f"unknown {what} {value!r}; known: {known}")

    def build_info(self) -> dict[str, str]:
        return {r["key"]: r["value"] for r in self.query("SELECT key, value FROM build_info")}

    def info(self) -> dict:
        one = lambda sql: self.query(sql)[0][0]  # noqa: E731
        return {
            "store": str(self.path),
            "species": one("SELECT count(*) FROM species"),
            "species_with_data": one("SELECT count(DISTINCT species_id) FROM curated_values "
                                     "WHERE value IS NOT NULL"),
            "values": one("SELECT count(*) FROM curated_values"),
            "values_with_uncertainty": one("SELECT count(*) FROM curated_values WHERE uncertainty <> 'none'"),
            "verified_values": one("SELECT count(*) FROM curated_values WHERE verified = 1"),
            "sources": one("SELECT count(*) FROM sources"),
            "sources_with_values": one("SELECT count(DISTINCT source_id) FROM curated_values"),
            "compartments": one("SELECT count(DISTINCT compartment_id) FROM curated_values"),
            "quantities": one("SELECT count(DISTINCT quantity_id) FROM curated_values"),
            "content_hash": self.build_info().get("content_hash", ""),
        }

    def values(self, **filters) -> pd.DataFrame:
        """Curated values with provenance; filter by species, life_stage, quantity, compartment, source, sex."""
        where, params = [], []
        for key, wanted in filters.items():
            if key not in FILTERS:
                raise TypeError(f"unknown filter {key!r}; use one of: {', '.join(sorted(FILTERS))}")
            if wanted is None:
                continue
            wanted = [wanted] if isinstance(wanted, str) else list(wanted)
            where.append(f"v.{FILTERS[key]} IN ({', '.join('?' for _ in wanted)})")
            params.extend(wanted)
        sql = ("SELECT v.species_id AS species, v.life_stage_id AS life_stage, v.age, v.sex, v.strain, "
               "v.compartment_id AS compartment, v.quantity_id AS quantity, v.value, v.unit, "
               "v.value_canonical, v.unit_canonical, v.normalisation, v.uncertainty, v.spread, v.low, v.high, "
               "v.sd_canonical, v.low_canonical, v.high_canonical, v.n, v.subject_body_mass_kg, v.basis, "
               "v.source_id AS source, s.citation, v.locator, v.verified, v.missing_reason, v.comment, "
               "v.file, v.line, v.row_id "
               "FROM curated_values v JOIN sources s ON s.id = v.source_id")
        if where:
            sql += " WHERE " + " AND ".join(where)
        sql += " ORDER BY v.species_id, v.life_stage_id, v.compartment_id, v.quantity_id, v.source_id, v.line"
        frame = self.frame(sql, params)
        frame["verified"] = frame["verified"].astype(bool)
        return frame

    def parameter_set(self, species: str, **options):
        """A model-ready parameter set; see :func:`bodyplan.api.parameters.parameter_set`."""
        from .parameters import parameter_set

        return parameter_set(self, species, **options)

    def gap_report(self, species=None, *, life_stage: str = "adult", layout=None):
        """Coverage, readiness and most-wanted parameters; see :func:`bodyplan.api.gaps.gap_report`."""
        from .gaps import gap_report

        return gap_report(self, species, life_stage=life_stage, layout=layout)

    def partition_coefficients(self, species: str, compounds, **options):
        """Tissue:plasma Kp from tissue composition; see :func:`bodyplan.api.partition.partition_coefficients`."""
        from .partition import partition_coefficients

        return partition_coefficients(self, species, compounds, **options)

    def population(self, species: str, n: int, seed: int, **options):
        """Virtual individuals drawn from the stored variability; see :func:`bodyplan.api.population.population`."""
        from .population import population

        return population(self, species, n, seed, **options)

    def allometry(self, quantity: str, **options):
        """Cross-species power-law fit; see :func:`bodyplan.api.allometry.allometry`."""
        from .allometry import allometry

        return allometry(self, quantity, **options)


def open_store(path: str | Path | None = None) -> Store:
    return Store(locate_store(path))
