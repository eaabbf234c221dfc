"""Integrity of the bundled curated files: one sub-test per file, every failure reported at once.

Each assertion message says how to fix what it found.
"""

from __future__ import annotations

from collections import defaultdict

import pytest

from bodyplan.api.locate import bundled_data_dir
from bodyplan.ingest import check
from bodyplan.ingest.lint import canonical_text, curated_files

ROOT = bundled_data_dir()
FILES = curated_files(ROOT)


@pytest.fixture(scope="module")
def checked():
    findings, tree, frame = check(ROOT)
    by_file = defaultdict(list)
    for finding in findings.items:
        by_file[finding.file].append(finding)
    return by_file, frame


@pytest.mark.parametrize("path, rel, descriptor", FILES, ids=[rel for _, rel, _ in FILES])
def test_file_is_canonical(path, rel, descriptor):
    assert path.read_text(encoding="utf-8") == canonical_text(path, rel, descriptor), \
        f"{rel} is not in canonical form; run `bodyplan lint` and commit the result"


@pytest.mark.parametrize("rel", [rel for _, rel, _ in FILES], ids=[rel for _, rel, _ in FILES])
def test_file_has_no_errors(checked, rel):
    by_file, _ = checked
    errors = [str(f) for f in by_file.get(rel, []) if f.severity == "error"]
    assert errors == [], "fix these (bodyplan check names file:line and the remedy):\n" + "\n".join(errors)


@pytest.mark.parametrize("rel", [rel for _, rel, _ in FILES if rel.startswith("values/")],
                         ids=[rel for _, rel, _ in FILES if rel.startswith("values/")])
def test_sums_of_fractions_are_sensible(checked, rel):
    """Per source and group of subjects, organ mass fractions ≤ 1 and flow fractions ≤ 1.1
    (published flow tables may print a little over 100 %, which the check tolerates)."""
    by_file, _ = checked
    sums = [str(f) for f in by_file.get(rel, []) if "sum to" in f.message]
    assert sums == [], "a part counted with its whole, or a % read as a fraction:\n" + "\n".join(sums)


def test_every_value_names_source_and_locator(checked):
    _, frame = checked
    assert frame["_source"].str.len().gt(0).all()
    missing = frame.loc[frame["locator"].str.strip() == "", ["_file", "_line"]]
    assert missing.empty, f"rows without a locator (give table, page or figure): {missing.values.tolist()[:10]}"


def test_unverified_rows_say_so(checked):
    """A number recalled rather than read is unverified, and its comment says where it came from."""
    _, frame = checked
    unverified = frame[frame["verified"] == "no"]
    silent = unverified[unverified["comment"].str.strip() == ""]
    assert silent.empty, f"unverified rows without a comment: {silent[['_file', '_line']].values.tolist()[:10]}"


def test_icrp89_reference_male(checked):
    """ICRP Publication 89 (2002), Table 2.8: reference adult male, 73 kg body mass, liver 1800 g,
    brain 1450 g (from memory of the table, which the curated rows cite)."""
    _, frame = checked
    rows = frame[(frame["_source"] == "icrp2002") & (frame["life_stage"] == "adult") & (frame["sex"] == "male")]
    mass = rows[(rows["quantity"] == "tissue_mass")].set_index("compartment")["_value_canonical"]
    body = rows[rows["quantity"] == "body_mass"]["_value_canonical"]
    assert body.iloc[0] == pytest.approx(73.0)
    assert mass["liver"] == pytest.approx(1.8)
    assert mass["brain"] == pytest.approx(1.45)


MILK_DENSITY = 1.032  # kg/L, whole cow's milk (common practice, no source)


def test_udder_blood_flow_per_litre_of_milk(checked):
    """Blood through the udder per litre of milk: 507 L/L, mean of 3 lactating cows with electromagnetic
    flowmeters on the external pudic artery (J Anim Sci 1979, abstract, "Electromagnetic blood flow
    recording and balance of nutrients in the udder of lactating cows"; authors not seen); 400–500 L/L is
    the usual figure (from memory). Every source giving the same cows' udder flow and milk yield at rest
    must land within ×/÷ 1.5 of 507 (a wrong unit or a half udder taken as the whole would not). One half
    of the udder counts as half: both halves are added as equal (common practice, no source)."""
    _, frame = checked
    rest = frame[(frame["species"] == "cattle") & (frame["_condition"] == "rest") & (frame["compartment"] == "mammary_gland")]
    flows = rest[rest["quantity"] == "blood_flow"]
    milk = rest[rest["quantity"] == "milk_yield"]
    pairs = flows.merge(milk, on=["_source", "_group"], suffixes=("_flow", "_milk"))
    assert len(pairs), "no source gives cows' udder blood flow with their milk yield"
    for row in pairs.to_dict("records"):
        halves = {"one_half": 2.0, "tissue": 1.0}[row["_part_flow"]]
        blood_l_per_day = row["_value_canonical_flow"] * halves * 24  # L/h → L/d
        milk_l_per_day = row["_value_canonical_milk"] / MILK_DENSITY  # kg/d → L/d
        ratio = blood_l_per_day / milk_l_per_day
        assert 507 / 1.5 <= ratio <= 507 * 1.5, f"{row['_source']}: {ratio:.0f} L of blood per L of milk"
