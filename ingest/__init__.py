"""Curated files → validated, unit-converted rows → SQLite store."""

from .build_store import BuildResult, build, check
from .findings import CuratedDataError, Finding, Findings

__all__ = ["BuildResult", "build", "check", "CuratedDataError", "Finding", "Findings"]
