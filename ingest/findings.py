"""Findings: every problem in the curated files, located as file:line: column, with a stable code.

Every kind of finding has a short code registered in ``CODES`` (code → what it means and what to do);
tests assert codes rather than sentences, ``bodyplan check --explain CODE`` prints the meaning, and
the table in DEVELOPERS.md is generated from this dict.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..errors import BodyplanError

# R: reading a file; V: validating rows and references; W: plausibility warnings.
CODES: dict[str, str] = {
    "R101": "The file is not UTF-8. Save it as UTF-8 (lint will not guess an encoding).",
    "R102": "A quote is misplaced (text after a closing quote, or a quote inside an unquoted cell). "
            "Quote the whole cell and double any quote inside it.",
    "R103": "A quote opened on this line is never closed, so every later line would be read as part of one "
            "cell. Close the quote.",
    "R104": "The row has a different number of fields than the header. Quote cells that contain commas.",
    "R105": "The file is empty. It needs at least the header line.",
    "R106": "The header names a column the descriptor does not define. Fix the name or remove the column.",
    "R107": "The header repeats a column name. Each column appears once.",
    "R108": "A required column is missing from the header. Add it (empty cells are fine where allowed).",
    "R109": "The data folder does not exist, or lacks values/. Give the folder holding vocab/, values/ and "
            "sources.bib.",
    "R110": "A vocabulary file or sources.bib is missing. Every curated tree needs them.",
    "R111": "The BibTeX file repeats an entry key. Keep one entry per key.",
    "R112": "A BibTeX block cannot be parsed. Check its braces and commas.",
    "R115": 'A bare % in a BibTeX entry: BibTeX reads the rest of the line as a comment, cutting the field. Write \\%.',
    "R113": "The file is a symbolic link to a file outside the data folder. Copy the file into the folder.",
    "R114": "The reader could not account for every physical line of the file (a bodyplan bug). Report it with "
            "the file.",
    "V201": "A required cell is empty. Fill it as the column's description says.",
    "V202": "The cell is not one of the column's allowed words. Use one of the listed values.",
    "V203": "The cell is not well formed for its column (e.g. an age or body mass without a unit). Follow the "
            "column's description.",
    "V204": "The cell is not a finite number. Write digits with '.' as the decimal point.",
    "V205": "The cell is not a whole number. Give an integer.",
    "V206": "The number is below the column's minimum.",
    "V207": "An id appears more than once in the file. Make each id unique.",
    "V208": "The cell names an id that is not in the vocabulary. Use an id from vocab/ or add it there.",
    "V209": "A quantity's canonical unit, normalisers or plausible range cannot be read. Fix vocab/quantities.csv.",
    "V210": "A fraction's canonical unit is not '1'. Use kind 'ratio' for other units.",
    "V211": "A citation key is not lowercase letters, digits and '_'. Rename the entry (it names the values file).",
    "V212": "A BibTeX entry lacks a title or a year. Add it.",
    "V213": "A values file has no BibTeX entry of the same name. Name the file after the source's citation key.",
    "V214": "The value is empty without a missing_reason. Give the value or say why the source lacks it.",
    "V215": "A missing_reason is given beside a value. Clear one of them.",
    "V216": "The value is negative. Physiological amounts are never below 0.",
    "V217": "The uncertainty kind needs a spread (sd, se or cv) and none is given.",
    "V218": "A ci95 or range needs both low and high.",
    "V219": "The uncertainty is 'none' but a spread or bounds are filled. Name the kind.",
    "V220": "A spread is given with a kind that uses bounds. Use low and high for a range or ci95.",
    "V221": "The value lies outside its own low..high bounds. Check the bounds.",
    "V222": "low is above high. Swap the bounds.",
    "V223": "A fraction above 1 (above 100 %). Check the unit ('%' or '1').",
    "V224": "The unit cannot be read, or its dimension does not fit the quantity. Write it as the source "
            "prints it, in the unit grammar (e.g. 'mL/min/kg').",
    "V225": "An age or body mass cannot be read as a number and a unit of the right dimension (e.g. '10 week', "
            "'0.25 kg'), or is not positive.",
    "V226": "A number becomes infinite once converted to the canonical unit (e.g. 1e308 L/min in L/h). Check "
            "the number and its unit.",
    "V227": 'The method does not measure this quantity (vocab/methods.csv lists the quantities of each method). Pick the method the source used.',
    "V228": 'A denominator (empty body, carcass) is given on something that is not a share of body mass or a per-kg value. Leave it empty.',
    "V229": 'uncertainty_assumed is yes but the uncertainty is not sd or se. Mark only an assumed sd or se.',
    "V230": 'statistic single_animal with n above 1. Give the statistic the source printed.',
    "V231": 'A negative age. Give the age since birth or hatching.',
    "V232": "groups.csv names a group no values row of its source uses. Fix the id or the rows' group.",
    "V233": 'groups.csv names a source with no entry in sources.bib. Fix the key.',
    "V234": 'groups.csv makes a group contain itself through its subgroups. Untangle the relation.',
    "V235": 'derived_from names no source in sources.bib. Fix the key.',
    "V236": 'A source is derived_from itself. Name the original source.',
    "V237": 'derived_from loops back to the source. Name the original source.',
    "V238": 'vocab/methods.csv names a quantity that is not in vocab/quantities.csv. Fix the id.',
    "V239": 'vocab/methods.csv not_accepted_in names no taxon class, species or quantity. Fix the scope.',
    "V240": 'A Meeh body-surface formula without its constant k. Give k for the species.',
    "V241": 'A k given for a formula that takes none. Leave k empty.',
    "V243": 'A blood flow per mass that does not say per which mass. Set denominator to tissue (per kg of the organ, as in mL/min/100 g) or live_body (per kg of body mass).',
    "V244": 'A temperature given for a mammal or bird. Clear it; heat or cold stress goes in condition.',
    "V242": 'Two entries in sources.bib share a DOI, a title and year, or a journal, volume and first page: one publication counted as two sources. Keep one entry.',
    "W301": "The value lies outside the quantity's plausible range. Check the unit and the digits.",
    "W302": "Fractions of one animal group in one source sum to an odd total. Look for a part counted with its "
            "whole, a missing organ, or a '%' read as '1'.",
    "W303": "The value is far from other sources' values of the same parameter. Check the number, unit, "
            "compartment, life stage and strain.",
    "W304": "The value is off from the file's other rows by about the ratio of two units. Check for a unit "
            "typo (g for kg).",
    "W305": "An organ's mass is above the body mass of its animals. Check the unit, the number and the body mass.",
    "W306": 'Parts of a compartment (part_of, or parts of parts.csv) of one group sum above their whole. Look for contents or a side stored as the whole.',
    "W307": 'The method is not accepted for this animal and quantity (vocab/methods.csv); pooling leaves the row out. Keep the row when the source prints it.',
    "W308": 'The same group, quantity, compartment and method twice: sets average such rows as repeated measures of the same animals (n once). If they are other animals, give each set its own group; accept it when they are repeats.',
    "W309": 'A group and its subgroup (groups.csv) both give a value; pooling uses one. Accept in check_baseline.csv once reviewed.',
    "W310": "The value equals an end of its range, or the comment's 'from … to …'. Put range ends in low/high.",
    "W311": 'A reference_midpoint value that is not the middle of its range. Check the value and the range.',
    "W312": "A share of empty body (or carcass) mass, but the source gives no ratio to live body mass; pooling leaves it out. Add the source's ratio.",
}


def explain(code: str) -> str:
    """What a finding code means; BodyplanError listing the codes when it is unknown."""
    key = code.strip().upper()
    if key not in CODES:
        raise UnknownCodeError(f"unknown finding code {code!r}; the codes are: {', '.join(CODES)}")
    return f"{key}: {CODES[key]}"


def codes_markdown() -> str:
    """The table of codes in DEVELOPERS.md (a test keeps the copy there current)."""
    lines = ["| code | meaning |", "|---|---|"]
    lines += [f"| `{code}` | {meaning} |" for code, meaning in CODES.items()]
    return "\n".join(lines)


class UnknownCodeError(BodyplanError, KeyError):
    def __str__(self) -> str:
        return str(self.args[0])


@dataclass(frozen=True, order=True)
class Finding:
    file: str
    line: int
    column: str
    message: str
    severity: str = "error"  # "error" blocks a build; "warning" does not
    code: str = field(default="", compare=False)

    def __str__(self) -> str:
        tag = "" if self.severity == "error" else "warning: "
        return f"{self.file}:{self.line}: {self.column}: {tag}{self.message}"


@dataclass
class Findings:
    items: list[Finding] = field(default_factory=list)

    def error(self, file: str, line: int, column: str, message: str, *, code: str | None = None) -> None:
        self.items.append(Finding(file, int(line), column, message, "error", code or ""))

    def warn(self, file: str, line: int, column: str, message: str, *, code: str | None = None) -> None:
        self.items.append(Finding(file, int(line), column, message, "warning", code or ""))

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


class CuratedDataError(BodyplanError):
    """The curated files have errors; ``findings`` lists every one of them."""

    def __init__(self, findings: Findings):
        self.findings = findings
        errors = findings.errors
        super().__init__(f"{len(errors)} error(s) in the curated files; first: {errors[0] if errors else '-'}")
