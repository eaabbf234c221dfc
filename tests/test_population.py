"""Virtual populations: distributions, recovery of the specified mean and SD, balances in every
individual, percentiles, reproducibility across chunkings and workers, readable files, the command.

Mechanics run on an invented mouse tree (tests/data/population_toy, every row says "invented for
tests"); the species the command is made for run on the bundled store.

Tolerances are Monte Carlo errors derived from the number of individuals N, not tuned: a sample mean
lies within Z·σ/√N of the mean, a sample SD within Z·√((μ₄ − σ⁴)/N)/(2σ) of the SD (the large-sample
variance of a sample variance, with μ₄ the distribution's fourth central moment from scipy.stats), with
Z = 4: a two-sided chance of 6·10⁻⁵ per comparison, under 0.2 % over the thirty comparisons of a run.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

import bodyplan
from bodyplan.api.population import (GRID, PopulationError, beta_parameters, lognormal_parameters,
                                     percentile_interval, population_spec, scipy_distribution)
from bodyplan.api.population.sample import draw
from bodyplan.cli import cli
from bodyplan.schema.model import is_pulmonary

TOY = Path(__file__).parent / "data" / "population_toy"
Z = 4.0
N = 40_000


@pytest.fixture(scope="module")
def toy_store(store_from_tree):
    return store_from_tree(TOY)


@pytest.fixture(scope="module")
def toy_population(toy_store):
    return toy_store.population("mouse", N, 11, workers=1)


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def drawn_form(frame: pd.DataFrame, var) -> np.ndarray:
    """A column back in the form its variable was drawn in."""
    if var.parameter in ("volume", "gfr"):
        return (frame[var.column] / frame["body_mass"]).to_numpy()
    if var.parameter == "blood_flow":
        return (frame[var.column] / frame["cardiac_output"]).to_numpy()
    if var.parameter == "cardiac_output":
        return (frame[var.column] / frame["body_mass"] * 0.025).to_numpy()  # the toy's reference mass
    return frame[var.column].to_numpy()


def sd_tolerance(dist, n: int) -> float:
    sd = float(dist.std())
    mu4 = (float(dist.stats(moments="k")) + 3) * sd**4
    return Z * math.sqrt((mu4 - sd**4) / n) / (2 * sd)


# ---- distributions against scipy.stats --------------------------------------------------------------
@settings(max_examples=60, deadline=None)
@given(st.floats(1e-4, 1e4), st.floats(0.01, 1.5))
def test_lognormal_has_the_arithmetic_mean_and_sd(mean, cv):
    mu, sigma = lognormal_parameters(mean, cv * mean)
    dist = stats.lognorm(s=sigma, scale=math.exp(mu))
    assert dist.mean() == pytest.approx(mean, rel=1e-9)
    assert dist.std() == pytest.approx(cv * mean, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.floats(0.001, 0.999), st.floats(0.01, 0.99))
def test_beta_has_the_mean_and_sd(mean, share):
    sd = share * math.sqrt(mean * (1 - mean))  # any SD below the largest a share can have
    a, b = beta_parameters(mean, sd)
    assert stats.beta(a, b).mean() == pytest.approx(mean, rel=1e-9)
    assert stats.beta(a, b).std() == pytest.approx(sd, rel=1e-7)


# ---- what the spec takes from the rows ------------------------------------------------------------
def test_se_becomes_sd_only_through_n(toy_store):
    """The toy gives kidney flow as SE 0.95 % with n = 8 and GFR as SE 0.7 mL/min/kg with n = 16."""
    spec = population_spec(toy_store, "mouse")
    var = {v.column: v for v in spec.variables}
    assert var["kidney.blood_flow"].sd == pytest.approx(0.0095 * math.sqrt(8))
    assert var["gfr"].sd == pytest.approx(0.7 * math.sqrt(16) * 60 / 1000)  # mL/min/kg → L/h/kg
    assert var["kidney.blood_flow"].n_animals == 8


def test_between_study_heterogeneity_is_kept_apart(toy_store):
    """Two invented cardiac output studies (0.9 ± 0.15 L/h, n 8; 1.1 ± 0.2 L/h, n 10, both at 25 g):
    the between-animal SD is their pooled CV (weights n − 1), tau² is DerSimonian–Laird's as
    statsmodels computes it, reported apart and not added to the SD."""
    from statsmodels.stats.meta_analysis import combine_effects

    spec = population_spec(toy_store, "mouse")
    co = next(v for v in spec.variables if v.column == "cardiac_output")
    cv = math.sqrt((7 * (0.15 / 0.9) ** 2 + 9 * (0.2 / 1.1) ** 2) / 16)
    assert co.sd == pytest.approx(cv * co.mean)
    res = combine_effects(np.array([0.9, 1.1]), np.array([0.15**2 / 8, 0.2**2 / 10]), method_re="dl")
    assert co.tau2 == pytest.approx(res.tau2, rel=1e-6)
    assert co.mean == pytest.approx(res.mean_effect_re, rel=1e-9)
    assert co.sd < math.sqrt(co.sd**2 + co.tau2)


def test_without_sd_is_fixed_or_default_cv_and_marked(real_store):
    fixed = population_spec(real_store, "dog")
    without = [v for v in fixed.variables if not v.sd_rows]  # no stored between-animal SD behind it
    assert without and all(v.marked == "fixed" and v.distribution == "fixed" for v in without)
    assert all(v.distribution != "fixed" for v in fixed.variables if v.sd_rows)
    default = population_spec(real_store, "dog", without_sd="default_cv", default_cv=0.25)
    names = {v.column for v in without}
    drawn = [v for v in default.variables if v.column in names
             and v.parameter in ("volume", "blood_flow", "cardiac_output", "gfr")]
    assert drawn and all(v.marked == "default_cv" and v.cv == pytest.approx(0.25) for v in drawn)
    assert all("common practice, no source" in v.sd_from for v in drawn)



def test_a_hematocrit_without_sd_stays_fixed_under_the_default_cv(real_store):
    """There is no default CV for hematocrit: a species whose hematocrit rows give no SD keeps it fixed."""
    for species in real_store.ids("species"):
        try:
            spec = population_spec(real_store, species, without_sd="default_cv", default_cv=0.25)
        except PopulationError:  # a species whose set has gaps has no population
            continue
        hct = next((v for v in spec.variables if v.column == "hematocrit"), None)
        if hct is not None and not hct.sd_rows:
            assert hct.marked == "fixed" and hct.distribution == "fixed", species
            return
    pytest.fail("no species with a hematocrit without SD to check")


# ---- recovery of the specified mean and SD -------------------------------------------------------
def test_each_parameter_recovers_its_mean_and_sd(toy_store, toy_population):
    frame, spec = toy_population.frame, toy_population.spec
    assert toy_population.sidecar["balance"]["volumes_touched"] == 0  # the toy leaves room: no truncation
    assert toy_population.sidecar["balance"]["flows_touched"] == 0
    checked = 0
    for var in [spec.body_mass, *spec.variables]:
        dist = scipy_distribution(var)
        x = drawn_form(frame, var)
        assert abs(x.mean() - var.mean) <= Z * var.sd / math.sqrt(N), var.column
        assert abs(x.std(ddof=1) - var.sd) <= sd_tolerance(dist, N), var.column
        checked += 1
    assert checked == 26


def test_percentile_99_matches_the_lognormal(toy_population):
    """The 99th percentile of GFR per kg (lognormal) with a 99 % bootstrap interval contains the analytic
    percentile exp(μ + σ·z₀.₉₉) (scipy.stats.lognorm.ppf)."""
    var = next(v for v in toy_population.spec.variables if v.column == "gfr")
    x = drawn_form(toy_population.frame, var)
    estimate, low, high = percentile_interval(x, 0.99, confidence=0.99, resamples=400, seed=5)
    mu, sigma = lognormal_parameters(var.mean, var.sd)
    analytic = stats.lognorm(s=sigma, scale=math.exp(mu)).ppf(0.99)
    assert low <= analytic <= high
    assert low < estimate < high and (high - low) < 0.1 * analytic  # an interval that can miss


# ---- balances --------------------------------------------------------------------------------------
def assert_balanced(frame: pd.DataFrame, pop) -> None:
    spec = pop.spec
    mass = sum(frame[v.column] * v.density for v in spec.volumes) + frame["rest_of_body.volume"] * 1.0
    assert (frame["rest_of_body.volume"] >= 0).all()
    np.testing.assert_allclose(mass, frame["body_mass"], rtol=1e-9)
    flows = sum(frame[v.column] for v in spec.flows) + frame["rest_of_body.blood_flow"]
    assert (frame["rest_of_body.blood_flow"] >= 0).all()
    np.testing.assert_allclose(flows, frame["cardiac_output"], rtol=1e-9)
    for comp in spec.pulmonary:
        np.testing.assert_array_equal(frame[f"{comp}.blood_flow"], frame["cardiac_output"])


@pytest.mark.parametrize("rule", ["redraw", "rescale"])
def test_balances_hold_in_every_individual_of_a_tight_set(real_store, rule):
    """Human with the default CV: the named organs leave under 1 % of body mass, so about half the
    individuals break the mass balance as first drawn."""
    pop = real_store.population("human", 20_000, 3, without_sd="default_cv", balance=rule, workers=1)
    assert pop.sidecar["balance"]["volumes_touched_share"] > 0.2
    assert_balanced(pop.frame, pop)
    shifts = {v["column"]: v["balance_shift"] for v in pop.sidecar["variables"]}
    assert shifts["muscle.volume"]["mean"] < 0  # the measured effect is reported, and it is a shrinkage
    assert shifts["body_mass"]["mean"] == 0 and shifts["cardiac_output"]["mean"] == 0


@pytest.mark.parametrize("species", ["human", "rat", "dog", "pig"])
def test_species_populations_balance(real_store, species):
    pop = real_store.population(species, 3_000, 1, fill="allometric", without_sd="default_cv", workers=1)
    assert_balanced(pop.frame, pop)
    assert len(pop.frame) == 3_000 and pop.frame.notna().all().all()
    filled = pop.sidecar["filled"]
    ps = real_store.parameter_set(species, fill="allometric")
    expected = {("cardiac_output" if c == "whole_body" and p == "cardiac_output" else p if c == "whole_body"
                 else f"{c}.{p}") for c, p, cell in ps.cells() if cell.origin == "allometric"
                and not (p == "blood_flow" and is_pulmonary(ps.layout.compartments.get(c, ())))}  # = cardiac output
    assert set(filled) == expected  # every fill of the set is named in the sidecar, and nothing else
    assert all(v["mean_origin"] == "allometric" for v in pop.sidecar["variables"] if v["column"] in filled)
    if species == "pig":  # the adult pig's cardiac output and more are filled across species
        assert filled


def test_second_level_draws_one_mean_per_population(toy_store):
    a = toy_store.population("mouse", 2_000, 1, workers=1, mean_uncertainty=True)
    b = toy_store.population("mouse", 2_000, 2, workers=1, mean_uncertainty=True)
    around = lambda p: {v["column"]: v["drawn_around"] for v in p.sidecar["variables"]}  # noqa: E731
    assert around(a)["cardiac_output"] != around(b)["cardiac_output"]
    plain = toy_store.population("mouse", 2_000, 1, workers=1)
    assert all(v["drawn_around"] == v["mean"] for v in plain.sidecar["variables"])


# ---- reproducible bytes, readable files -------------------------------------------------------------
@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_same_seed_same_bytes_whatever_the_chunks_and_workers(toy_store, tmp_path, fmt):
    n = 3 * GRID + 123
    digests = set()
    for chunk, workers in ((GRID, 1), (2 * GRID, 2), (10 * GRID, 1), (1, 2)):
        folder = tmp_path / f"{chunk}_{workers}"
        folder.mkdir()
        pop = toy_store.population("mouse", n, 42, out=folder / f"pop.{fmt}", chunk_size=chunk, workers=workers)
        digests.add((sha(pop.path), sha(pop.sidecar_path)))
    assert len(digests) == 1
    other = toy_store.population("mouse", n, 43, out=tmp_path / f"other.{fmt}", workers=1)
    assert sha(other.path) not in {d[0] for d in digests}


def test_files_are_strict_and_read_back_equal(toy_store, tmp_path):
    csv = toy_store.population("mouse", 1_000, 9, out=tmp_path / "pop.csv", workers=1)
    parquet = toy_store.population("mouse", 1_000, 9, out=tmp_path / "pop.parquet", workers=1)
    by_pandas = pd.read_csv(csv.path)
    by_arrow = pacsv.read_csv(csv.path).to_pandas()
    from_parquet = pd.read_parquet(parquet.path)
    assert list(by_pandas.columns) == ["individual", *(c for c, _ in csv.columns)]
    assert by_pandas["individual"].tolist() == list(range(1_000))
    pd.testing.assert_frame_equal(by_pandas, by_arrow)
    pd.testing.assert_frame_equal(by_pandas, from_parquet)  # shortest round-trip decimals read back exactly
    assert pq.read_metadata(parquet.path).num_rows == 1_000
    text = csv.path.read_bytes()
    assert b"\r" not in text and text.count(b"\n") == 1_001
    sidecar = json.loads(csv.sidecar_path.read_text())
    assert sidecar["data"] == {"file": "pop.csv", "format": "csv"} and sidecar["caution"] == bodyplan.CAUTION
    units = {c["column"]: c["unit"] for c in sidecar["columns"]}
    assert units["liver.volume"] == "L" and units["cardiac_output"] == "L/h"


# ---- bad input ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("options, message", [
    (dict(n=0), "n must be a positive"),
    (dict(seed=-1), "seed must be"),
    (dict(out="pop.xlsx"), "output format must be one of csv, parquet"),
    (dict(body_mass_range=("30 g", "20 g")), "low < high"),
    (dict(body_mass_range=("20 g", "30 g"), body_mass="25 g"), "not both"),
    (dict(body_mass="25 cm"), "not a mass"),
    (dict(without_sd="guess"), "without_sd must be one of"),
    (dict(balance="clip"), "balance must be one of"),
    (dict(default_cv=1.5), "default CV must lie between 0 and 1"),
])
def test_bad_requests_are_refused(toy_store, tmp_path, options, message):
    options = {"n": 10, "seed": 1, **options}
    if "out" in options:
        options["out"] = tmp_path / options["out"]
    with pytest.raises(PopulationError, match=message):
        toy_store.population("mouse", options.pop("n"), options.pop("seed"), workers=1, **options)
    assert not list(tmp_path.iterdir())  # nothing half-written


def test_a_share_that_cannot_have_its_sd_is_refused(toy_store):
    var = next(v for v in population_spec(toy_store, "mouse").variables if v.column == "hematocrit")
    var.sd = 0.6  # above √(0.45 · 0.55)
    from bodyplan.api.population.spec import _check_distribution

    with pytest.raises(PopulationError, match="beta distribution needs"):
        _check_distribution(var)


def test_draws_respect_fixed_and_uniform(toy_store):
    spec = population_spec(toy_store, "mouse", body_mass_range=("20 g", "30 g"))
    x = draw(spec.body_mass, np.random.default_rng(0), 10_000)
    assert x.min() >= 0.02 and x.max() <= 0.03
    assert abs(x.mean() - 0.025) <= Z * (0.01 / math.sqrt(12)) / math.sqrt(10_000)


# ---- the command -----------------------------------------------------------------------------------
def test_command_writes_files_and_says_what_it_drew(toy_store, tmp_path):
    out = tmp_path / "mice.parquet"
    result = CliRunner().invoke(cli, ["population", "mouse", "--n", "5000", "--seed", "4", "--out", str(out),
                                      "--workers", "1", "--store", str(toy_store.path)])
    assert result.exit_code == 0, result.output
    assert out.exists() and Path(str(out) + ".json").exists()
    assert "5,000 individuals" in result.output and "stored between-animal SD" in result.output
    assert bodyplan.CAUTION in result.output
    quiet = CliRunner().invoke(cli, ["population", "mouse", "--n", "10", "--seed", "4", "--out",
                                     str(tmp_path / "q.csv"), "--quiet", "--store", str(toy_store.path)])
    assert quiet.exit_code == 0 and quiet.output == ""


def test_command_writes_individuals_as_sets_that_a_reader_loads(real_store, tmp_path):
    """--sets K writes K individuals as JSON and SBML; the SBML is valid for libsbml and each JSON holds the
    individual's own row. A population that keeps gaps is refused before anything is drawn."""
    import libsbml

    out = tmp_path / "people.csv"
    result = CliRunner().invoke(cli, ["population", "human", "--n", "40", "--seed", "5", "--out", str(out),
                                      "--sets", "3", "--without-sd", "default-cv", "--workers", "1",
                                      "--store", str(real_store.path)])
    assert result.exit_code == 0, result.output
    frame = pd.read_csv(out).set_index("individual")
    folder = Path(str(out) + ".sets")
    assert sorted(p.name for p in folder.iterdir()) == [f"individual_{i}.{x}" for i in range(3) for x in ("json", "xml")]
    for i in range(3):
        data = json.loads((folder / f"individual_{i}.json").read_text())
        assert data["body_mass"]["value"] == pytest.approx(frame.loc[i, "body_mass"], rel=1e-12)
        assert data["body_mass"]["origin"] == "drawn"
        doc = libsbml.readSBMLFromString((folder / f"individual_{i}.xml").read_text())
        assert doc.getNumErrors(libsbml.LIBSBML_SEV_ERROR) == 0
    gappy = tmp_path / "cats.csv"  # the adult cat's set has many gaps (skin, bone, adipose among them)
    assert real_store.parameter_set("cat", body_mass="4 kg").gaps
    refused = CliRunner().invoke(cli, ["population", "cat", "--n", "40", "--seed", "5", "--out", str(gappy),
                                       "--sets", "2", "--body-mass", "4 kg", "--store", str(real_store.path)])
    assert refused.exit_code == 1 and "keeps gaps" in str(refused.exception) and not gappy.exists()


def test_stage_fallback_and_class_reach_the_population(real_store):
    """A lactating cow and a broiler draw from their class's rows, borrowing other stages where asked;
    a borrowed number draws its spread from the rows of the stage it came from."""
    spreads_borrowed = []
    for species, stage, animal_class, mass in (("cattle", "lactating", "dairy", "650 kg"),
                                               ("chicken", "juvenile", "broiler", "2.5 kg"),
                                               ("rabbit", "adult", None, "3 kg")):
        plain = real_store.parameter_set(species, life_stage=stage, body_mass=mass, animal_class=animal_class,
                                         stage_fallback=True)
        pop = real_store.population(species, 2_000, 3, life_stage=stage, body_mass=mass, animal_class=animal_class,
                                    stage_fallback=True, without_sd="default_cv", workers=1)
        assert_balanced(pop.frame, pop)
        borrowed = [c for _, _, c in plain.cells() if c.origin == "fallback"]
        assert all(c.stage and c.stage != stage for c in borrowed)
        means = {v["column"]: v for v in pop.sidecar["variables"]}
        assert means["cardiac_output"]["mean_origin"] == plain.cardiac_output.origin
        spreads_borrowed += [v["column"] for v in means.values()
                             if v["mean_origin"] == "fallback" and v["sd_from"].startswith("pooled between-animal")]
    # rabbit kidney, muscle and skin volumes come from juvenile rows with SDs
    assert spreads_borrowed


def test_command_errors_are_one_line(toy_store, tmp_path):
    from bodyplan.cli import main

    with pytest.raises(SystemExit) as exit_:
        main(["population", "mouse", "--n", "10", "--seed", "1", "--out", str(tmp_path / "x.txt"),
              "--store", str(toy_store.path)])
    assert exit_.value.code == 1


def test_progress_bar_only_after_a_second_on_a_terminal():
    from bodyplan.commands import population as command

    clock = iter([0.0, 0.5, 2.0, 3.0])
    progress = command._Progress(enabled=True, clock=lambda: next(clock))
    progress(1, 4, 100)  # at 0.5 s: nothing yet
    assert progress.bar is None
    progress(2, 4, 200)  # at 2 s: the bar appears
    assert progress.bar is not None
    task = progress.bar.tasks[0]
    assert task.completed == 2 and task.total == 4 and task.fields["rate"] == "100"
    progress.stop()
    assert command._Progress(enabled=False).bar is None


def test_any_executor_gives_the_same_bytes(toy_store, tmp_path):
    from concurrent.futures import ThreadPoolExecutor

    n = 2 * GRID + 5
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    local = toy_store.population("mouse", n, 8, out=tmp_path / "a" / "pop.parquet", workers=1)
    with ThreadPoolExecutor(2) as executor:
        other = toy_store.population("mouse", n, 8, out=tmp_path / "b" / "pop.parquet", chunk_size=GRID,
                                     executor=executor)
    assert sha(local.path) == sha(other.path) and sha(local.sidecar_path) == sha(other.sidecar_path)


def test_a_distributed_engine_runs_the_grid_unchanged(toy_store):
    """The recipe of DEVELOPERS.md: one delayed task per block of the grid gives the same numbers."""
    dask = pytest.importorskip("dask")
    from bodyplan.api.population import draw_block, grid, population_means

    n, seed = 2 * GRID + 77, 21
    spec = population_spec(toy_store, "mouse")
    means = population_means(spec, seed, mean_uncertainty=False)
    blocks = dask.compute(*[dask.delayed(draw_block)(spec, means, seed, b, size) for b, size in grid(n)],
                          scheduler="threads")
    matrix = np.concatenate([m for m, _ in blocks])
    local = toy_store.population("mouse", n, seed, workers=1).frame
    np.testing.assert_array_equal(matrix, local.drop(columns="individual").to_numpy())


def test_a_set_without_room_and_a_balance_that_cannot_be_met_are_refused(toy_store, monkeypatch):
    from bodyplan.api.population import sample
    from bodyplan.api.population.spec import _check_room

    spec = population_spec(toy_store, "mouse")
    muscle = next(v for v in spec.volumes if v.column == "muscle.volume")
    muscle.mean += 0.3  # the named organs now outweigh the body
    with pytest.raises(PopulationError, match="no room for rest_of_body"):
        _check_room(spec.volumes, spec.flows)
    muscle.mean -= 0.3
    monkeypatch.setattr(sample, "MAX_REDRAWS", 0)  # any individual that needs a redraw now fails
    tight = population_spec(toy_store, "mouse", balance="redraw")
    next(v for v in tight.volumes if v.column == "adipose.volume").sd = 0.2  # wide: some draws break the balance
    means = sample.population_means(tight, 1, False)
    with pytest.raises(PopulationError, match="still have more named mass than body mass"):
        sample.draw_block(tight, means, 1, 0, GRID)


def test_cardiac_output_follows_the_species_own_power_law(store_from_tree, tmp_path_factory):
    """With absolute cardiac outputs at body masses spanning two-fold, cardiac output scales with the
    species' own fitted exponent (checked against scipy.stats.linregress on log-log) rather than per kg."""
    import shutil

    tree = tmp_path_factory.mktemp("co_fit") / "population_toy"
    shutil.copytree(TOY, tree)
    rows = [(0.02, 0.80), (0.035, 1.24), (0.05, 1.59)]  # invented for tests
    with open(tree / "values" / "toypop2026b.csv", "a", encoding="utf-8") as fh:
        for i, (mass, co) in enumerate(rows):
            fh.write(f"co{i},mouse,adult,,mixed,,,mass{i},whole_body,cardiac_output,,,,{co},L/h,sd,{co * 0.15:.4f},,,,,"
                     f"8,,{mass} kg,,,measured,Table 2,no,,invented for tests: cardiac output at another body mass\n")
    store = store_from_tree(tree)
    spec = population_spec(store, "mouse", body_mass_cv=0.2)
    co = next(v for v in spec.variables if v.column == "cardiac_output")
    masses = [0.025, 0.025, *(m for m, _ in rows)]
    values = [0.9, 1.1, *(c for _, c in rows)]
    expected = stats.linregress(np.log10(masses), np.log10(values)).slope
    assert co.exponent == pytest.approx(expected, rel=1e-9) and abs(co.exponent - 1) > 0.1
    frame = store.population("mouse", 20_000, 5, body_mass_cv=0.2, workers=1).frame
    at_reference = frame["cardiac_output"] / (frame["body_mass"] / spec.body_mass.mean) ** co.exponent
    assert abs(at_reference.mean() - co.mean) <= Z * co.sd / math.sqrt(20_000)
    per_kg = frame["cardiac_output"] / frame["body_mass"]
    assert stats.spearmanr(frame["body_mass"], per_kg).statistic < -0.1  # smaller animals: more per kg


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 3 * GRID), cv=st.floats(0.05, 0.6),
       rule=st.sampled_from(["redraw", "rescale"]))
def test_any_seed_size_and_spread_keeps_the_balances(real_store, seed, n, cv, rule):
    pop = real_store.population("dog", n, seed, without_sd="default_cv", default_cv=cv, balance=rule,
                                workers=1)
    assert len(pop.frame) == n and pop.frame["individual"].tolist() == list(range(n))
    assert_balanced(pop.frame, pop)
