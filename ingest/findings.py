"""Findings: every problem in the curated files, located as file:line: column."""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True, order=True)
class Finding:
    file: str
    line: int
    column: str
    message: str
    severity: str = "error"  # "error" blocks a build; "warning" does not
    code: str = ""  # a stable kebab-case id of the kind of finding, e.g. "method-not-accepted"

    def __str__(self) -> str:
        tag = "" if self.severity == "error" else "warning: "
        return f"{self.file}:{self.line}: {self.column}: {tag}{self.message}"


@dataclass
class Findings:
    items: list[Finding] = field(default_factory=list)

    def error(self, file: str, line: int, column: str, message: str, code: str = "") -> None:
        self.items.append(Finding(file, int(line), column, message, "error", code))

    def warn(self, file: str, line: int, column: str, message: str, code: str = "") -> None:
        self.items.append(Finding(file, int(line), column, message, "warning", code))

    def extend(self, other: "Findings") -> None:
        self.items.extend(other.items)

    @property
    def errors(self) -> list[Finding]:
        return sorted(f for f in self.items if f.severity == "error")

    @property
    def warnings(self) -> list[Finding]:
        return sorted(f for f in self.items if f.severity == "warning")

    def sorted(self) -> list[Finding]:
        return sorted(self.items, key=lambda f: (f.file, f.line, f.column, f.message))


class CuratedDataError(Exception):
    """The curated files have errors; ``findings`` lists every one of them."""

    def __init__(self, findings: Findings):
        self.findings = findings
        errors = findings.errors
        super().__init__(f"{len(errors)} error(s) in the curated files; first: {errors[0] if errors else '-'}")
