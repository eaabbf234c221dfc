"""The store's tables, defined once as SQLModel classes.

Constraints live in the database too (foreign keys, uniqueness, CHECKs), so a store
built by any route refuses rows the curated-file validation would refuse.
"""

from __future__ import annotations

from typing import Optional

from sqlalchemy import CheckConstraint, Column, ForeignKey, ForeignKeyConstraint, String, UniqueConstraint
from sqlmodel import Field, SQLModel

from .descriptors import BASES, DENOMINATORS, N_COUNTS, SEXES, STATISTICS, UNCERTAINTY_KINDS


def _ref(target: str, **kw):
    """A text foreign key to ``target`` ("table.column")."""
    return Field(sa_column=Column(String, ForeignKey(target), **kw))


def _in(column: str, allowed: list[str]) -> str:
    # OR-ed equalities rather than IN (...): SQLite builds an ephemeral table for an IN list on
    # every execution, which made CHECKs the largest cost of a bulk insert
    return "(" + " OR ".join(f"{column} = {a!r}" for a in allowed) + ")"


class Species(SQLModel, table=True):
    __tablename__ = "species"
    id: str = Field(primary_key=True)
    scientific_name: str
    common_name: str
    ncbi_taxon: int = Field(gt=0)
    taxon_class: str
    diet: Optional[str] = None
    id_note: Optional[str] = None


class LifeStage(SQLModel, table=True):
    __tablename__ = "life_stages"
    id: str = Field(primary_key=True)
    label: str
    description: Optional[str] = None


class Compartment(SQLModel, table=True):
    __tablename__ = "compartments"
    id: str = Field(primary_key=True)
    label: str
    uberon: Optional[str] = None
    kind: str
    part_of: Optional[str] = _ref("compartments.id", nullable=True)
    id_note: Optional[str] = None


class QuantityDef(SQLModel, table=True):
    __tablename__ = "quantities"
    id: str = Field(primary_key=True)
    label: str
    canonical_unit: str
    kind: str
    fraction_of: Optional[str] = None
    per: Optional[str] = None
    plausible_range: Optional[str] = None
    description: Optional[str] = None


class Method(SQLModel, table=True):
    __tablename__ = "methods"
    id: str = Field(primary_key=True)
    label: str
    quantities: str  # space-separated quantity ids, or * for any
    accepted: str
    not_accepted_in: Optional[str] = None
    reason: str
    description: Optional[str] = None


class Part(SQLModel, table=True):
    __tablename__ = "parts"
    id: str = Field(primary_key=True)
    label: str
    part_of: Optional[str] = _ref("parts.id", nullable=True)
    description: Optional[str] = None


class Condition(SQLModel, table=True):
    __tablename__ = "conditions"
    id: str = Field(primary_key=True)
    label: str
    in_sets: str
    reason: str
    description: Optional[str] = None


class SpeciesClass(SQLModel, table=True):
    __tablename__ = "classes"
    species: str = Field(sa_column=Column(String, ForeignKey("species.id"), primary_key=True))
    id: str = Field(primary_key=True)
    label: str
    in_sets: str
    reason: Optional[str] = None
    description: Optional[str] = None


class BodySurfaceFormula(SQLModel, table=True):
    __tablename__ = "body_surface"
    species: str = Field(sa_column=Column(String, ForeignKey("species.id"), primary_key=True))
    formula: str = Field(primary_key=True)
    k: Optional[float] = None
    preferred: str
    source: str


class Source(SQLModel, table=True):
    __tablename__ = "sources"
    id: str = Field(primary_key=True)
    entry_type: str
    author: Optional[str] = None
    title: Optional[str] = None
    container: Optional[str] = None  # journal, book or publisher
    year: Optional[int] = None
    volume: Optional[str] = None
    pages: Optional[str] = None
    doi: Optional[str] = None
    citation: str  # formatted one-line citation
    bibtex: str
    note: Optional[str] = None
    derived_from: Optional[str] = _ref("sources.id", nullable=True)  # the source whose numbers this one reprints


class Group(SQLModel, table=True):
    """A group of a source that contains disjoint subgroups (data_curated/groups.csv)."""

    __tablename__ = "groups"
    source_id: str = Field(sa_column=Column(String, ForeignKey("sources.id"), primary_key=True))
    group_id: str = Field(primary_key=True)
    contains: str = Field(primary_key=True)  # space-separated disjoint group ids of the same source
    label: Optional[str] = None
    note: Optional[str] = None


class Value(SQLModel, table=True):
    __tablename__ = "curated_values"
    __table_args__ = (
        UniqueConstraint("source_id", "row_id"),
        CheckConstraint(_in("sex", SEXES), name="sex_known"),
        CheckConstraint(_in("uncertainty", UNCERTAINTY_KINDS), name="uncertainty_known"),
        CheckConstraint(_in("basis", BASES), name="basis_known"),
        CheckConstraint("(verified = 0 OR verified = 1)", name="verified_flag"),
        CheckConstraint("value_canonical IS NULL OR value_canonical >= 0", name="non_negative"),
        CheckConstraint("quantity_kind <> 'fraction' OR value_canonical <= 1", name="fraction_at_most_1"),
        CheckConstraint("(value IS NULL) = (missing_reason IS NOT NULL)", name="empty_only_with_reason"),
        CheckConstraint("low IS NULL OR high IS NULL OR low <= high", name="bounds_ordered"),
        CheckConstraint("subject_body_mass_kg IS NULL OR subject_body_mass_kg > 0", name="positive_body_mass"),
        CheckConstraint("age_days IS NULL OR age_days >= 0", name="non_negative_age"),
        CheckConstraint(_in("statistic", STATISTICS), name="statistic_known"),
        CheckConstraint(_in("n_counts", N_COUNTS), name="n_counts_known"),
        CheckConstraint(_in("denominator", list(DENOMINATORS)), name="denominator_known"),
        CheckConstraint("(uncertainty_assumed = 0 OR uncertainty_assumed = 1)", name="uncertainty_assumed_flag"),
        ForeignKeyConstraint(["species_id", "class_id"], ["classes.species", "classes.id"]),
    )
    id: Optional[int] = Field(default=None, primary_key=True)
    source_id: str = _ref("sources.id", nullable=False, index=True)
    row_id: str
    species_id: str = _ref("species.id", nullable=False, index=True)
    life_stage_id: str = _ref("life_stages.id", nullable=False)
    age: Optional[str] = None
    age_days: Optional[float] = None
    sex: str
    strain: Optional[str] = None
    compartment_id: str = _ref("compartments.id", nullable=False, index=True)
    quantity_id: str = _ref("quantities.id", nullable=False, index=True)
    quantity_kind: str
    value: Optional[float] = None
    unit: str
    value_canonical: Optional[float] = None
    unit_canonical: str
    normalisation: str  # described in schema/columns.py, as every store-only column
    uncertainty: str
    spread: Optional[float] = None
    low: Optional[float] = None
    high: Optional[float] = None
    sd_canonical: Optional[float] = None
    low_canonical: Optional[float] = None
    high_canonical: Optional[float] = None
    n: Optional[int] = None
    subject_body_mass_kg: Optional[float] = None
    basis: str
    locator: str
    verified: bool
    missing_reason: Optional[str] = None
    comment: Optional[str] = None
    file: str
    line: int
    class_id: Optional[str] = None  # with species_id, a row of classes
    group_id: str = "all"
    part_id: str = _ref("parts.id", nullable=False)
    method_id: Optional[str] = _ref("methods.id", nullable=True)
    statistic: str = "mean"
    uncertainty_assumed: bool = False
    n_counts: str = "animals"
    denominator: str = "live_body"
    condition_id: str = _ref("conditions.id", nullable=False)
    temperature_c: Optional[float] = None  # the row's temperature in °C


class BuildInfo(SQLModel, table=True):
    __tablename__ = "build_info"
    key: str = Field(primary_key=True)
    value: str


class InputFile(SQLModel, table=True):
    __tablename__ = "input_files"
    path: str = Field(primary_key=True)
    sha256: str


TABLES = [Species, LifeStage, Compartment, QuantityDef, Method, Part, Condition, SpeciesClass, BodySurfaceFormula, Source, Group,
          Value, BuildInfo, InputFile]
