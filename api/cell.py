"""One number of a parameter set, with how it was obtained and what it rests on."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace


@dataclass
class Cell:
    """One number of a parameter set, with how it was obtained (its origin: measured, pooled, scaled,
    allometric, gap or not_applicable) and the slots whose data it rests on."""

    value: float | None
    unit: str
    origin: str
    sd: float | None = None
    se: float | None = None
    low: float | None = None
    high: float | None = None
    sources: tuple[str, ...] = ()
    method: str = ""
    reason: str = ""  # for gaps
    depends_on: tuple[str, ...] = ()  # slot ids (schema.model) whose curated data this number uses
    verified_share: float | None = None  # share of its weight on rows read in their source (None: not from rows)
    mass: float | None = None  # kg, for volumes: volume × the tissue density used (closes the mass balance)
    stage: str | None = None  # the life stage whose rows gave a stage-fallback number
    conditions: tuple[str, ...] = ()  # the animals' states other than rest behind it (anaesthesia, as a fallback)
    animals_kg: tuple[float, float] | None = None  # body masses of the animals behind it, when every row gives one

    @classmethod
    def gap(cls, unit: str, reason: str) -> "Cell":
        return cls(None, unit, "gap", reason=reason)

    def in_units(self, unit: str, factor: float) -> "Cell":
        mul = lambda x: None if x is None else x * factor  # noqa: E731
        return replace(self, value=mul(self.value), unit=unit, sd=mul(self.sd), se=mul(self.se), low=mul(self.low),
                       high=mul(self.high))  # mass stays in kg

    def resting_on(self, *slots: str) -> "Cell":
        return replace(self, depends_on=tuple(dict.fromkeys(self.depends_on + slots)))

    def as_dict(self) -> dict:
        out = {"value": _finite(self.value), "unit": self.unit, "sd": _finite(self.sd), "se": _finite(self.se),
               "origin": self.origin, "verified_share": _finite(self.verified_share), "sources": list(self.sources),
               "method": self.method}
        if self.low is not None:
            out["interval"] = [_finite(self.low), _finite(self.high)]
            out["interval_kind"] = ("95 % prediction interval" if "prediction interval" in self.method
                                    else "range of the study values")
        if self.reason:
            out["reason"] = self.reason
        if self.stage:
            out["from_stage"] = self.stage
        if self.conditions:
            out["conditions"] = list(self.conditions)
        if self.animals_kg:
            out["animals_kg"] = list(self.animals_kg)
        return out


def _finite(x):
    """Full precision in data formats; NaN (no number) is null. An infinity stays, so strict JSON refuses
    it loudly rather than printing a silent null."""
    if x is None or math.isnan(x):
        return None
    return float(x)
