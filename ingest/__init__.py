"""Curated files → validated, unit-converted rows → SQLite store."""

from .baseline import FileCheck, check_files
from .build_store import BuildResult, build, check
from .findings import CuratedDataError, Finding, Findings

__all__ = ["BuildResult", "build", "check", "check_files", "CuratedDataError", "FileCheck", "Finding", "Findings"]
