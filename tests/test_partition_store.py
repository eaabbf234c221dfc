"""Kp from the store: composition provenance, gaps, borrowing, output formats, model compartments.

A test store is built from the bundled curated files plus one invented source
(``kptest2026``, numbers invented for tests): rat plasma and erythrocyte composition (which
the bundled files lack) and a dog liver composition, so every path can run end to end.
"""

from __future__ import annotations

import csv
import json
import math
import shutil

import numpy as np
import pytest
from click.testing import CliRunner

import bodyplan
from bodyplan.api import kp_methods as km
from bodyplan.api.partition import (PartitionError, composition_coverage, model_partition_coefficients,
                                    species_composition)
from bodyplan.schema.model import COMPOSITION as ROLES

HEADER = ("id,species,life_stage,age,sex,strain,class,group,compartment,quantity,part,method,condition,value,unit,uncertainty,"
          "spread,low,high,statistic,uncertainty_assumed,n,n_counts,body_mass,temperature,denominator,basis,locator,verified,"
          "missing_reason,comment")
INVENTED = [  # (id, species, compartment, quantity, value, unit)
    ("rat_p_nl", "rat", "plasma", "tissue_neutral_lipid_fraction", 0.0023, "1"),
    ("rat_p_np", "rat", "plasma", "tissue_neutral_phospholipid_fraction", 0.0013, "1"),
    ("rat_p_w", "rat", "plasma", "tissue_water_fraction", 0.96, "1"),
    ("rat_rbc_iw", "rat", "red_blood_cells", "tissue_intracellular_water_fraction", 0.6, "1"),
    ("rat_rbc_nl", "rat", "red_blood_cells", "tissue_neutral_lipid_fraction", 0.002, "1"),
    ("rat_rbc_np", "rat", "red_blood_cells", "tissue_neutral_phospholipid_fraction", 0.003, "1"),
    ("rat_rbc_ap", "rat", "red_blood_cells", "acidic_phospholipid_concentration", 0.5, "mg/g"),
    ("dog_liver_ew", "dog", "liver", "tissue_extracellular_water_fraction", 0.17, "1"),
    ("dog_liver_iw", "dog", "liver", "tissue_intracellular_water_fraction", 0.55, "1"),
    ("dog_liver_nl", "dog", "liver", "tissue_neutral_lipid_fraction", 0.02, "1"),
    ("dog_liver_np", "dog", "liver", "tissue_neutral_phospholipid_fraction", 0.025, "1"),
    ("dog_liver_ap", "dog", "liver", "acidic_phospholipid_concentration", 4.0, "mg/g"),
    ("dog_liver_alb", "dog", "liver", "albumin_ratio", 0.1, "1"),
    ("dog_liver_lp", "dog", "liver", "lipoprotein_ratio", 0.15, "1"),
]
COMPOSITION_SOURCES = {"rodgers2005", "rodgers2006", "poulin2000", "poulin2002"}
COMPOUNDS = [
    {"name": "base_a", "log_p": 3.0, "pka_base": 9.5, "fu_plasma": 0.2, "blood_plasma_ratio": 0.9},
    {"name": "acid_b", "log_p": 2.5, "pka_acid": 4.2, "fu_plasma": 0.05, "blood_plasma_ratio": 0.6},
    {"name": "neutral_c", "log_p": 1.5, "fu_plasma": 0.8, "blood_plasma_ratio": 1.0},
]


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    from bodyplan.api.locate import bundled_data_dir
    from bodyplan.ingest import build

    root = tmp_path_factory.mktemp("kpstore") / "data"
    shutil.copytree(bundled_data_dir(), root)
    # the composition these checks recompute by hand is that of the method papers' own tables (as stored,
    # from memory): composition rows of every other source are set aside, so new curation cannot move them
    composition = set(ROLES.values())
    for path in (root / "values").glob("*.csv"):
        if path.stem in COMPOSITION_SOURCES:
            continue
        with open(path, newline="", encoding="utf-8") as fh:
            table = list(csv.reader(fh))
        quantity = table[0].index("quantity")
        kept = [table[0]] + [r for r in table[1:] if r[quantity] not in composition]
        if len(kept) < len(table):
            with open(path, "w", newline="", encoding="utf-8") as fh:
                csv.writer(fh, lineterminator="\n").writerows(kept)
    rows = [f"{i},{sp},adult,,unknown,,,,{comp},{q},,,,{v},{u},none,,,,,,,,,,,reference,Table 1,no,,invented for tests"
            for i, sp, comp, q, v, u in INVENTED]
    (root / "values" / "kptest2026.csv").write_text("\n".join([HEADER, *rows]) + "\n", encoding="utf-8")
    with open(root / "sources.bib", "a", encoding="utf-8") as fh:
        fh.write("\n@misc{kptest2026,\n  author = {Tester, K.},\n  title = {Invented composition for the Kp "
                 "tests},\n  year = {2026},\n  note = {invented for tests; no such publication}\n}\n")
    build(root, root.parent / "store.sqlite")
    return bodyplan.open_store(root.parent / "store.sqlite")


def test_composition_rows_carry_their_sources(store):
    comp = species_composition(store, "rat")
    liver_nl = comp[("liver", "neutral_lipid")]
    assert liver_nl.value == pytest.approx(0.0135) and liver_nl.rows == ("rodgers2005:liver_nl",)
    water = comp[("liver", "water")]  # parts are added: extracellular + intracellular
    assert water.value == pytest.approx(0.161 + 0.573)
    assert water.rows == ("rodgers2005:liver_ew", "rodgers2005:liver_iw")
    # poulin2002 reprints poulin2000's human table (derived_from): the original is counted, once
    human = species_composition(store, "human")[("muscle", "water")]
    assert human.how == "1 row" and human.sources == ("poulin2000",)


def test_rat_kp_against_the_equations(store):
    res = store.partition_coefficients("rat", COMPOUNDS)
    assert (res.table["status"] == "computed").all(), res.table[res.table.status != "computed"]
    # the acid in rat muscle, redone from the stored numbers with the 2006 equation
    y, x = 1 + 10 ** (7.4 - 4.2), 1 + 10 ** (7.0 - 4.2)
    P = 10 ** 2.5
    kpu = (0.118 + x / y * 0.63 + (P * 0.01 + (0.3 * P + 0.7) * 0.0072) / y
           + (1 / 0.05 - 1 - (P * 0.0023 + (0.3 * P + 0.7) * 0.0013) / y) * 0.064)
    assert res.kp("acid_b", "muscle") == pytest.approx(0.05 * kpu, rel=1e-9)
    assert "Rodgers & Rowland 2006" in res.table.set_index(["compound", "tissue"]).loc[("acid_b", "muscle"), "method"]
    # a Kp is marked verified only when every composition row behind it was read in its source
    rows = store.values(species="rat", compartment="muscle")
    rows = rows[rows["quantity"].str.contains("water|lipid|phospholipid|albumin")]
    assert res.table.set_index(["compound", "tissue"]).loc[("acid_b", "muscle"), "composition_verified"] == \
        bool(rows["verified"].all())
    base = res.table.set_index(["compound", "tissue"]).loc[("base_a", "liver")]
    assert base["method"].startswith("Rodgers, Leahy & Rowland 2005")
    assert "kptest2026" in base["sources"] and "rodgers2005" in base["sources"]
    assert base["kp_blood"] == pytest.approx(base["kp"] / 0.9)


def test_missing_composition_is_a_gap_until_borrowing_is_asked(store):
    res = store.partition_coefficients("dog", COMPOUNDS)
    liver = res.table[res.table.tissue == "liver"]
    # dog liver composition exists, but dog plasma/erythrocytes do not: gap, never a silent fill
    assert (liver["status"] == "gap").all()
    assert all("plasma" in r or "red_blood_cells" in r for r in liver["missing"])
    assert (res.table[res.table.tissue == "muscle"]["status"] == "gap").all()
    assert math.isnan(res.kp("neutral_c", "muscle"))

    borrowed = store.partition_coefficients("dog", COMPOUNDS, borrow_from="rat")
    t = borrowed.table.set_index(["compound", "tissue"])
    assert t.loc[("neutral_c", "muscle"), "status"] == "borrowed"
    assert t.loc[("neutral_c", "muscle"), "borrowed_from"] == "rat"
    rat = store.partition_coefficients("rat", COMPOUNDS).table.set_index(["compound", "tissue"])
    # same compound: equal wherever the composition is rat's, different only in the dog's own liver
    # (and, for the base, through the dog's own hematocrit, which enters its erythrocyte binding)
    assert t.loc[("base_a", "muscle"), "composition"]["hematocrit"] != \
        rat.loc[("base_a", "muscle"), "composition"]["hematocrit"]
    for (compound, tissue), row in t.iterrows():
        if compound == "base_a":
            continue
        if tissue == "liver":
            assert row["kp"] != pytest.approx(rat.loc[(compound, tissue), "kp"], rel=1e-6)
        else:
            assert row["kp"] == pytest.approx(rat.loc[(compound, tissue), "kp"], rel=1e-12)
    comp = borrowed.composition
    assert set(comp.loc[comp.compartment == "liver", "species"]) == {"dog"}
    assert set(comp.loc[comp.compartment == "muscle", "borrowed_from"]) == {"rat"}


def test_borrow_options(store):
    with pytest.raises(PartitionError, match="itself"):
        store.partition_coefficients("rat", COMPOUNDS, borrow_from="rat")
    with pytest.raises(bodyplan.api.UnknownIdError):
        store.partition_coefficients("rat", COMPOUNDS, borrow_from="unicorn")
    with pytest.raises(PartitionError, match="unknown method"):
        store.partition_coefficients("rat", COMPOUNDS, method="guess")
    closest = store.partition_coefficients("cat", COMPOUNDS, borrow_from="closest")
    assert set(closest.table["borrowed_from"]) == {"rat"}  # a mammal: rat comes first


def test_poulin_theil_in_human_uses_human_rows(store):
    res = store.partition_coefficients("human", COMPOUNDS, method="poulin_theil")
    assert (res.table["status"] == "computed").all()
    # neutral_c in human muscle, redone by hand from the stored Poulin & Theil numbers
    P, fu = 10 ** 1.5, 0.8
    num = P * (0.0238 + 0.3 * 0.0072) + 0.76 + 0.7 * 0.0072
    den = P * (0.0035 + 0.3 * 0.00225) + 0.945 + 0.7 * 0.00225
    fut = 1 / (1 + 0.5 * (1 - fu) / fu)
    assert res.kp("neutral_c", "muscle") == pytest.approx(num / den * fu / fut, rel=1e-9)
    corrected = store.partition_coefficients("human", COMPOUNDS, method="berezhkovskiy")
    assert corrected.kp("neutral_c", "muscle") != pytest.approx(res.kp("neutral_c", "muscle"))


def test_json_is_strict_and_csv_flat(store):
    res = store.partition_coefficients("dog", COMPOUNDS)
    data = json.loads(res.to_json())  # allow_nan=False inside: a NaN would raise
    assert data["kp"][0]["kp"] is None and data["caution"] == bodyplan.CAUTION
    assert data["ph"] == {"plasma": 7.4, "interstitial": 7.4, "intracellular": 7.0, "erythrocyte": 7.22}
    csv_text = res.to_csv()
    assert csv_text.splitlines()[0].startswith("compound,tissue,kp,kp_blood,status")
    assert len(csv_text.splitlines()) == 1 + len(res.table)


def test_model_compartments_are_volume_weighted(store):
    res = store.partition_coefficients("rat", COMPOUNDS)
    ps = store.parameter_set("rat", body_mass="250 g", layout="rich_slow")
    model = model_partition_coefficients(res, ps, store).set_index(["compound", "compartment"])
    assert model.loc[("neutral_c", "liver"), "kp"] == pytest.approx(res.kp("neutral_c", "liver"))
    row = model.loc[("neutral_c", "richly_perfused")]
    from bodyplan.api.parameters import resolve_parameter

    parts = ("brain", "heart", "lung", "gut", "spleen")
    vols = {p: resolve_parameter(store, "rat", p, "volume").estimate.value for p in parts}
    expected = sum(vols[p] * res.kp("neutral_c", p) for p in vols) / sum(vols.values())
    assert row["kp"] == pytest.approx(expected, rel=1e-9)
    assert row["kp_blood"] == pytest.approx(expected / 1.0)
    # weights are printed to 6 decimals: their sum is 1 within half a unit of the last digit per part
    assert sum(row["weights"].values()) == pytest.approx(1.0, abs=len(row["weights"]) * 5e-7)
    # the store holds no rat bone volume: the lumped compartment cannot be weighted, and says why
    slow = model.loc[("neutral_c", "slowly_perfused")]
    assert slow["status"] == "gap" and "bone" in slow["reason"]
    # blood is the reference of a tissue:blood Kp; tissue:plasma is then the blood:plasma ratio (1.0 here)
    blood = model.loc[("neutral_c", "blood")]
    assert (blood["status"], blood["kp_blood"], blood["kp"]) == ("reference", 1.0, 1.0)
    # rest_of_body has no composition: muscle lies in slowly_perfused, which has no Kp here, so it stays a gap
    assert model.loc[("neutral_c", "rest_of_body"), "status"] == "gap"
    whole = model_partition_coefficients(res, store.parameter_set("rat", body_mass="250 g"), store)
    whole = whole.set_index(["compound", "compartment"])
    rest, muscle = whole.loc[("neutral_c", "rest_of_body")], whole.loc[("neutral_c", "muscle")]
    assert rest["status"] == "assumed" and rest["kp"] == muscle["kp"] and "muscle" in rest["reason"]
    with pytest.raises(PartitionError):
        model_partition_coefficients(res, store.parameter_set("dog", body_mass="10 kg"), store)


def test_coverage_helper(store):
    cov = composition_coverage(store)
    rat = cov[(cov.species == "rat") & (cov.compartment == "liver")].iloc[0]
    assert rat["tissue_neutral_lipid_fraction"] == 1 and rat["poulin_theil"] and rat["rodgers_rowland_tissue"]
    human = cov[(cov.species == "human") & (cov.compartment == "liver")].iloc[0]
    assert human["tissue_neutral_lipid_fraction"] == 2 and not human["rodgers_rowland_tissue"]
    assert composition_coverage(store, species="ferret").empty


def test_many_compounds_in_one_call_match_one_at_a_time(store):
    rng = np.random.default_rng(1)
    many = [{"name": f"c{i}", "log_p": float(rng.uniform(-2, 6)), "fu_plasma": float(rng.uniform(0.01, 1)),
             "blood_plasma_ratio": 1.0, **({"pka_acid": float(rng.uniform(2, 6))} if i % 2 else {})}
            for i in range(50)]
    together = store.partition_coefficients("rat", many).table.set_index(["compound", "tissue"])["kp"]
    for c in many[:5]:
        alone = store.partition_coefficients("rat", [c]).table.set_index(["compound", "tissue"])["kp"]
        assert np.allclose(alone.values, together.loc[alone.index].values, rtol=1e-12)


def test_cli_table_json_csv_and_errors(store, tmp_path):
    from bodyplan.cli import cli

    path = tmp_path / "c.toml"
    path.write_text("[[compound]]\nname = \"neutral_c\"\nlog_p = 1.5\nfu_plasma = 0.8\nblood_plasma_ratio = 1.0\n")
    runner = CliRunner()
    out = runner.invoke(cli, ["kp", "dog", "--compound", str(path), "--store", str(store.path)])
    assert out.exit_code == 0, out.output
    assert "gap" in out.output and "--borrow-from" in out.output and bodyplan.CAUTION[:40] in out.output
    out = runner.invoke(cli, ["kp", "dog", "--compound", str(path), "--borrow", "--format", "json",
                              "--store", str(store.path)])
    data = json.loads(out.output)
    assert {r["borrowed_from"] for r in data["kp"] if r["tissue"] != "liver"} == {"rat"}
    out = runner.invoke(cli, ["kp", "human", "--compound", str(path), "--method", "berezhkovskiy",
                              "--format", "csv", "--store", str(store.path)])
    assert "Berezhkovskiy 2004" in out.output
    old_spelling = runner.invoke(cli, ["kp", "human", "--compound", str(path), "--method", "poulin-theil",
                                       "--berezhkovskiy", "--format", "csv", "--store", str(store.path)])
    assert old_spelling.output.replace("note: --berezhkovskiy is deprecated and goes in the next release; "
                                       "use --method berezhkovskiy\n", "") == out.output
    bad = tmp_path / "bad.csv"
    bad.write_text("name,log_p,fu_plasma,blood_plasma_ratio\nx,2,5,1\n")
    from bodyplan.cli import main

    with pytest.raises(SystemExit) as exc:
        main(["kp", "rat", "--compound", str(bad), "--store", str(store.path)])
    assert exc.value.code == 1


def test_ionisation_is_declared_once():
    # the store path and the equations share the same pH constants
    assert (km.PH_PLASMA, km.PH_INTRACELLULAR) == (7.4, 7.0)


def test_composition_follows_the_row_rules_on_the_real_store(real_store):
    """Rat liver water read in its source (an inulin-space study, Cieslar and colleagues) stands in place of
    the recalled extracellular + intracellular sum; gray and white matter water are pieces of the brain,
    not the brain (brainwater_mri2019)."""
    rat = species_composition(real_store, "rat")
    water = rat[("liver", "water")]
    assert water.verified and all(r.startswith("cieslar_nd:") for r in water.rows)
    human_brain = species_composition(real_store, "human")[("brain", "water")]
    assert human_brain.rows and not any(r.startswith("brainwater_mri2019:") for r in human_brain.rows)

