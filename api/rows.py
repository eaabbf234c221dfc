"""Which of one species' curated rows count, and as which animals.

The rows of one species, stage and sex (and class) are read once; a part that is not the whole, a condition
sets do not describe (exercise, exhaustion …), a method not accepted for the animal and quantity, a reprint
of a source that is itself here, a group whose animals another row already counts, or a share of empty body
without its source's ratio is left out, and ``left_out`` says why (trace shows it). Recalled rows give way to read ones (``read_first``). The
resolver (resolve.py) turns the rows that count into parameters.
"""

from __future__ import annotations

from collections import defaultdict
from functools import cached_property

from ..schema.descriptors import DENOMINATORS
from ..schema.model import (TEMPERATURE_BAND, body_plan, measured_compartment, parameter_of,
                            stands_for_the_whole)

ROW_COLUMNS = ("source_id, row_id, compartment_id, quantity_id, normalisation, value_canonical, sd_canonical, "
               "n, subject_body_mass_kg, sex, strain, age, verified, file, line, group_id, part_id, method_id, "
               "class_id, denominator, condition_id, temperature_c")
SAME_SUBJECTS = ("source_id", "group_id")  # rows of one source describing the same animals


# Rows of one group measured again alike (another day or age within the stage) are one estimate of
# those animals: their mean, n once. Rows unlike in these columns (mL/min against mL/min/kg, rest
# against anaesthesia) stay one row per group.
REPEAT_ALIKE = ("normalisation", "condition_id", "denominator", "temperature_c", "method_id", "part_id")


def _averaged(row: dict) -> dict:
    """A counted row with its repeated measures folded in: the mean value, the mean SD when every row has
    one, the mean body mass of the rows that give it; ``_repeats`` names the rows folded in (id, line)."""
    repeats = row.pop("_repeats")
    if not repeats:
        return row
    rows = [row, *repeats]
    mean = lambda xs: sum(xs) / len(xs)  # noqa: E731
    sds = [r["sd_canonical"] for r in rows]
    masses = [r["subject_body_mass_kg"] for r in rows if r["subject_body_mass_kg"] is not None]
    return dict(row, value_canonical=mean([r["value_canonical"] for r in rows]),
                sd_canonical=mean(sds) if None not in sds else None,
                subject_body_mass_kg=mean(masses) if masses else None,
                verified=min(r["verified"] for r in rows), _repeats=[(r["row_id"], r["line"]) for r in repeats])


class CountedRows:
    """All rows of one species, stage and sex, and which of them count."""

    def __init__(self, store, species: str, life_stage: str = "adult", sex: str | None = None,
                 verified_only: bool = False, animal_class: str | None = None, all_methods: bool = False,
                 temperature: float | None = None):
        self.store, self.species, self.life_stage, self.sex = store, species, life_stage, sex
        self.animal_class, self.all_methods, self.temperature = animal_class, all_methods, temperature
        self.target_mass: float | None = None  # the set's body mass, for within-species scaling
        sql = (f"SELECT {ROW_COLUMNS} FROM curated_values WHERE species_id = ? AND life_stage_id = ? "
               "AND value_canonical IS NOT NULL" + (" AND verified = 1" if verified_only else ""))
        params = [species, life_stage]
        if sex:
            sql += " AND sex IN (?, 'mixed', 'unknown')"
            params.append(sex)
        if animal_class:  # rows of that class, and rows that name no class (said on the set)
            sql += " AND (class_id = ? OR class_id IS NULL)"
            params.append(animal_class)
        self.all_rows = [dict(r) for r in store.query(sql + " ORDER BY source_id, line", params)]
        self.left_out: dict[tuple[str, str], str] = {}  # (source, row id) → why pooling leaves the row out
        self.counted_elsewhere: set[tuple[str, str]] = set()  # left out, but their animals count in another row
        self.other_temperature: set[tuple[str, str]] = set()  # left out as measured far from the set's temperature
        self.groups: dict[tuple[str, str], list[dict]] = defaultdict(list)
        for r in self._what_counts(self.all_rows):
            self.groups[(r["quantity_id"], measured_compartment(r["quantity_id"], r["compartment_id"]))].append(r)

    # ---- which rows count: parts, methods, reprints, the same animals once -------------------------
    def _what_counts(self, rows: list[dict]) -> list[dict]:
        """The rows pooling may use. A part that is not the whole (contents, one side, a segment …), a
        method not accepted for this animal and quantity, a reprint of a source that is itself here, a
        group whose animals another row already counts, a fraction of empty body without its source's
        ratio: each is left out, and ``left_out`` says why (trace shows it)."""
        kept = []
        present = {(r["source_id"], r["quantity_id"], r["compartment_id"]) for r in rows}
        for r in rows:
            why = self._not_for_pooling(r, present)
            if why:
                self.left_out[(r["source_id"], r["row_id"])] = why
            else:
                kept.append(r)
        kept = self._first_choice_first(kept)
        by_measure: dict[tuple, list[dict]] = defaultdict(list)
        for r in kept:  # one quantity of one compartment, however it is normalised (mL/min or mL/min/kg)
            by_measure[(r["source_id"], r["quantity_id"], r["compartment_id"])].append(r)
        counted = []
        for (source, *_), same in by_measure.items():
            keep = self._independent_groups(source, {r["group_id"] for r in same})
            seen: dict[str, dict] = {}
            # of two rows of the same animals, the one that needs no borrowed body mass counts
            for r in sorted(same, key=lambda r: r["normalisation"] == "none" and r["subject_body_mass_kg"] is None):
                first = seen.get(r["group_id"])
                if first is not None and all(first[k] == r[k] for k in REPEAT_ALIKE):
                    first["_repeats"].append(r)  # the same animals measured again the same way
                    continue
                if r["group_id"] not in keep or first is not None:
                    self.counted_elsewhere.add((source, r["row_id"]))
                if r["group_id"] not in keep:
                    self.left_out[(source, r["row_id"])] = (f"group {r['group_id']} overlaps another group of "
                                                            "this source that is counted (groups.csv)")
                elif first is not None:
                    self.left_out[(source, r["row_id"])] = (f"the same animals (group {r['group_id']}) are "
                                                            f"counted by row {first['row_id']} of this source")
                else:
                    seen[r["group_id"]] = dict(r, _repeats=[])
                    counted.append(seen[r["group_id"]])
        return [_averaged(r) for r in counted]

    def _not_for_pooling(self, r: dict, present: set) -> str:
        if not stands_for_the_whole(r["part_id"], r["compartment_id"]):
            return f"part {r['part_id']}: not the whole {r['compartment_id']}"
        if r["condition_id"] not in self._in_sets:
            return f"measured in condition {r['condition_id']}: sets describe animals at rest (vocab/conditions.csv)"
        measured_at = r["temperature_c"]
        if self.temperature is not None and measured_at is not None \
                and abs(measured_at - self.temperature) > TEMPERATURE_BAND:
            self.other_temperature.add((r["source_id"], r["row_id"]))
            return f"measured at {measured_at:g} °C; the set is for {self.temperature:g} ± {TEMPERATURE_BAND:g} °C"
        if not self.all_methods and r["method_id"] and not self._accepted(r["method_id"], r["quantity_id"]):
            return f"method {r['method_id']} is not accepted for {r['quantity_id']} here (vocab/methods.csv)"
        original = self._derived_from.get(r["source_id"])
        if original and (original, r["quantity_id"], r["compartment_id"]) in present:
            return f"reprints {original}, which is counted instead"
        if self.body_ratio(r) is None:
            return f"a share of {r['denominator'].replace('_', ' ')} mass without its source's ratio to live mass"
        return ""

    @cached_property
    def _conditions(self) -> dict[str, str]:
        """Condition id → in_sets (yes, fallback or no; vocab/conditions.csv)."""
        return dict(self.store.query("SELECT id, in_sets FROM conditions"))

    @cached_property
    def _in_sets(self) -> frozenset[str]:
        return frozenset(c for c, use in self._conditions.items() if use != "no")

    @cached_property
    def _fallback(self) -> frozenset[str]:
        return frozenset(c for c, use in self._conditions.items() if use == "fallback")

    @cached_property
    def _fallback_classes(self) -> frozenset[str]:
        """Classes a set that asks for none uses only where others lack the parameter (vocab/classes.csv)."""
        if self.animal_class:
            return frozenset()
        return frozenset(r["id"] for r in self.store.query("SELECT id FROM classes WHERE species = ? AND in_sets = "
                                                           "'fallback'", [self.species]))

    def _second_choice(self, r: dict) -> str:
        """Why a row counts only where no first-choice row gives its parameter: anaesthetised animals, or a
        breed unlike the species' usual animals when no class is asked for; "" for a first-choice row."""
        if r["condition_id"] in self._fallback:
            return f"measured in condition {r['condition_id']}: rows of animals at rest exist (vocab/conditions.csv)"
        if r["class_id"] in self._fallback_classes:
            return (f"class {r['class_id']}: rows of the species' usual animals exist; ask for the class to use it "
                    "(vocab/classes.csv)")
        return ""

    def _first_choice_first(self, rows: list[dict]) -> list[dict]:
        """Second-choice rows (anaesthetised animals; a breed unlike the species' usual animals, such as
        greyhounds among dogs) give way, parameter by parameter, to first-choice rows: an anaesthetised dog's
        kidney flow is not pooled with a conscious one's. A row read in its source gives way only to read
        ones: a recalled number is no evidence against a read one."""
        what = lambda r: (parameter_of(r["quantity_id"]) or r["quantity_id"], r["compartment_id"])  # noqa: E731
        first = {(what(r), bool(r["verified"])) for r in rows if not self._second_choice(r)}
        kept = []
        for r in rows:
            why = self._second_choice(r)
            if why and ((what(r), True) in first or (not r["verified"] and (what(r), False) in first)):
                self.left_out[(r["source_id"], r["row_id"])] = why
            else:
                kept.append(r)
        return kept

    @cached_property
    def _methods(self) -> dict[str, dict]:
        return {r["id"]: dict(r) for r in self.store.query("SELECT id, accepted, not_accepted_in FROM methods")}

    def _accepted(self, method: str, quantity: str) -> bool:
        """vocab/methods.csv: ``accepted``, and ``not_accepted_in`` scopes (taxon class or species, with an
        optional ``:quantity``) where an otherwise accepted method is refused."""
        m = self._methods.get(method)
        if m is None:
            return True
        if m["accepted"] != "yes":
            return False
        for scope in (m["not_accepted_in"] or "").split():
            who, _, what = scope.partition(":")
            if who in self.plan | {self.species} and what in ("", quantity):
                return False
        return True

    @cached_property
    def _derived_from(self) -> dict[str, str]:
        return {r["id"]: r["derived_from"] for r in self.store.query(
            "SELECT id, derived_from FROM sources WHERE derived_from IS NOT NULL")}

    @cached_property
    def _relations(self) -> dict[str, list[tuple[str, frozenset[str]]]]:
        out: dict[str, list] = defaultdict(list)
        for r in self.store.query("SELECT source_id, group_id, contains FROM groups ORDER BY rowid"):
            out[r["source_id"]].append((r["group_id"], frozenset(r["contains"].split())))
        return out

    def _independent_groups(self, source: str, present: set[str]) -> set[str]:
        """The groups whose animals are counted once: a group present drops its subgroups; among the
        subgroups of an absent group, one way of splitting it (the first declared with rows)."""
        relations = self._relations.get(source, [])
        keep = set(present)

        def below(group: str) -> set[str]:
            found: set[str] = set()
            for parent, children in relations:
                if parent == group:
                    for child in children:
                        found |= {child} | below(child)
            return found

        for group in list(keep):
            if group in keep:
                keep -= below(group)
        chosen: dict[str, frozenset[str]] = {}
        for parent, children in relations:
            if parent in keep or not children & keep:
                continue
            if parent not in chosen:
                chosen[parent] = children
            elif children != chosen[parent]:
                keep -= children - chosen[parent]
        return keep

    def read_first(self, rows: list[dict]) -> list[dict]:
        """Rows read in their source text stand for a parameter whenever there are any; rows recalled
        from memory are used only where nothing read exists (and trace says which were set aside)."""
        read = [r for r in rows if r["verified"]]
        if not read or len(read) == len(rows):
            return rows
        for r in rows:
            if not r["verified"]:
                self.left_out[(r["source_id"], r["row_id"])] = "recalled, not read: rows read in their source exist"
        return read

    def body_ratio(self, row: dict) -> float | None:
        """What turns the row's share or per-kg value into one of live body mass: 1 for live body (and for a
        flow per kg of its tissue, which is converted elsewhere); for empty body or carcass the source's
        own ratio to live body mass, for the same animals (None without one)."""
        quantity = DENOMINATORS.get(row["denominator"])
        if quantity is None:
            return 1.0
        ratios = [r["value_canonical"] for r in self.all_rows if r["quantity_id"] == quantity
                  and r["source_id"] == row["source_id"] and r["group_id"] in (row["group_id"], "all")]
        return ratios[0] if ratios else None

    @cached_property
    def plan(self) -> frozenset[str]:
        taxon = self.store.query("SELECT taxon_class FROM species WHERE id = ?", (self.species,))
        return body_plan(self.species, taxon[0][0] if taxon else "")

    def rows(self, quantity: str, compartment: str) -> list[dict]:
        return self.groups.get((quantity, compartment), [])
