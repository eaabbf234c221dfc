"""Check named files, and set reviewed warnings apart with a baseline file.

A warning a curator has reviewed and kept (the source really prints the number) is listed in
``check_baseline.csv`` at the tree's root by file, row id and code; later checks report it as accepted,
so only new warnings stand out.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import BodyplanError
from .findings import Finding, Findings

BASELINE_FILE = "check_baseline.csv"


@dataclass
class FileCheck:
    """The findings of a check: new ones, and warnings the baseline accepts."""

    root: Path
    findings: Findings = field(default_factory=Findings)  # errors, and warnings not in the baseline
    accepted: list[Finding] = field(default_factory=list)
    stale: list[tuple[str, str, str]] = field(default_factory=list)  # baseline entries of these files no warning matches
    rows: int = 0  # value rows in the checked files
    errors_elsewhere: int = 0  # errors in other files of the tree: while any remain, no plausibility warnings

    @property
    def errors(self) -> list[Finding]:
        return self.findings.errors

    @property
    def warnings(self) -> list[Finding]:
        return self.findings.warnings


def read_baseline(root: Path) -> set[tuple[str, str, str]]:
    """(file, row id, code) of every accepted warning; an absent file accepts nothing."""
    path = Path(root) / BASELINE_FILE
    if not path.exists():
        return set()
    rows = csv.DictReader(io.StringIO(path.read_text(encoding="utf-8")))
    accepted, problems = set(), []
    for line, r in enumerate(rows, start=2):
        cells = [r.get(k) for k in ("file", "row_id", "code")]
        if None in cells or None in r or not all(c.strip() for c in cells):
            problems.append(f"{BASELINE_FILE}:{line}: expected file,row_id,code,note (a note with a comma is "
                            "quoted); fix the line or delete it")
            continue
        accepted.add(tuple(c.strip() for c in cells))
    if problems:
        raise BaselineError("\n".join(problems))
    return accepted


class BaselineError(BodyplanError, ValueError):
    """check_baseline.csv cannot be read: every bad line, one per line."""


def row_ids(frame) -> dict[tuple[str, int], str]:
    """(file, line) → row id of every value row."""
    if frame is None or len(frame) == 0:
        return {}
    return dict(zip(zip(frame["_file"], frame["_line"].astype(int)), frame["id"]))


def split_accepted(findings: Findings, frame, root: Path) -> tuple[Findings, list[Finding]]:
    """Findings minus the warnings the baseline accepts, and those accepted warnings."""
    accepted_keys = read_baseline(root)
    ids = row_ids(frame)
    kept, accepted = Findings(), []
    for f in findings.items:
        key = (f.file, ids.get((f.file, f.line), ""), f.code)
        if f.severity == "warning" and key in accepted_keys:
            accepted.append(f)
        else:
            kept.items.append(f)
    return kept, sorted(accepted)


def tree_root(path: Path) -> Path:
    """The curated tree a file belongs to: the nearest folder above it holding vocab/ or sources.bib."""
    path = Path(path).resolve()
    for folder in [path.parent, *path.parents]:
        if (folder / "vocab").is_dir() or (folder / "sources.bib").exists():
            return folder
    raise FileNotFoundError(f"{path} lies in no curated tree (no folder above it holds vocab/ or sources.bib)")


class CheckFilesError(BodyplanError, ValueError):
    """Files that cannot be checked together (missing, or from two trees)."""


def check_files(paths, plausibility: bool = True) -> FileCheck:
    """Check only the named curated files: every finding located in them, with the baseline applied.

    The whole tree is read (other sources are the reference of the plausibility comparisons and the
    vocabularies decide what is valid), but only findings in the named files are reported.
    """
    from .build_store import check

    paths = [Path(p) for p in paths]
    if not paths:
        raise CheckFilesError("no files named; give one or more curated files, e.g. values/brown1997.csv")
    missing = [str(p) for p in paths if not p.is_file()]
    if missing:
        raise CheckFilesError(f"no such file: {', '.join(missing)}")
    roots = {tree_root(p) for p in paths}
    if len(roots) > 1:
        raise CheckFilesError(f"the files lie in {len(roots)} curated trees ({', '.join(map(str, sorted(roots)))}); "
                              "check one tree at a time")
    root = roots.pop()
    named = {p.resolve().relative_to(root).as_posix() for p in paths}
    findings, _tree, frame = check(root, plausibility)
    mine = Findings([f for f in findings.items if f.file in named])
    kept, accepted = split_accepted(mine, frame, root)
    ids = row_ids(frame)
    matched = {(f.file, ids.get((f.file, f.line), ""), f.code) for f in accepted}
    stale = sorted(k for k in read_baseline(root) if k[0] in named and k not in matched) \
        if not findings.errors else []  # with errors left, plausibility did not run: nothing can be judged stale
    rows = int(frame["_file"].isin(named).sum()) if len(frame) else 0
    elsewhere = sum(1 for f in findings.errors if f.file not in named)
    return FileCheck(root=root, findings=kept, accepted=accepted, rows=rows, errors_elsewhere=elsewhere,
                     stale=stale)
