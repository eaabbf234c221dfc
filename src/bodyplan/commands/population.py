"""bodyplan population: virtual individuals drawn from the stored variability, written to CSV or Parquet."""

from __future__ import annotations

import sys
import time

import click

from ..output import set_choice_options, store_option


class _Progress:
    """A rich progress bar on stderr, shown once a run has taken a second; nothing when not a terminal."""

    def __init__(self, enabled: bool, clock=time.monotonic):
        self.enabled, self.clock, self.bar, self.task = enabled, clock, None, None
        self.start = clock()

    def __call__(self, chunks_done: int, chunks_total: int, individuals: int) -> None:
        if not self.enabled:
            return
        elapsed = self.clock() - self.start
        if self.bar is None:
            if elapsed < 1.0 or chunks_done == chunks_total:
                return
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

            self.bar = Progress(TextColumn("chunks"), BarColumn(), MofNCompleteColumn(),
                                TextColumn("{task.fields[rate]} individuals/s"), TimeRemainingColumn(),
                                console=Console(file=sys.stderr), transient=True)
            self.bar.start()
            self.task = self.bar.add_task("population", total=chunks_total, rate="")
        self.bar.update(self.task, completed=chunks_done, rate=f"{individuals / max(elapsed, 1e-9):,.0f}")

    def stop(self) -> None:
        if self.bar is not None:
            self.bar.stop()


def _write_sets(pop, k: int):
    """Individuals 0..k−1 as parameter-set files beside the population (refused before writing if any has gaps)."""
    sets = pop.parameter_sets(range(k))
    folder = pop.path.with_name(pop.path.name + ".sets")
    folder.mkdir(exist_ok=True)
    for i, ps in enumerate(sets):
        (folder / f"individual_{i}.json").write_text(ps.to_json() + "\n", encoding="utf-8")
        (folder / f"individual_{i}.xml").write_text(ps.to_sbml(), encoding="utf-8")
    return folder


def summary(pop) -> list[str]:
    """What a modeller should know about the drawn population, in a few lines."""
    sc = pop.sidecar
    variables = sc["variables"]
    stored = [v["column"] for v in variables if v["distribution"] != "fixed" and not v["marked"]]
    default = [v["column"] for v in variables if v["marked"] == "default_cv"]
    fixed = [v["column"] for v in variables if v["distribution"] == "fixed"]
    given = [f"{v['column']} ({v['sd_from']})" for v in variables if v["marked"] == "given" and v["distribution"] != "fixed"]
    lines = [f"{len(stored)} drawn with a stored between-animal SD: {', '.join(stored) or 'none'}"]
    if given:
        lines.append("drawn as given: " + ", ".join(given))
    if default:
        lines.append(f"{len(default)} drawn with the default CV (common practice, no source): {', '.join(default)}")
    if fixed:
        lines.append(f"{len(fixed)} held fixed (no SD stored): {', '.join(fixed)}"
                     + ("; --without-sd default-cv draws them with the default CV" if sc["without_sd"] == "fixed"
                        else ""))
    if "body_mass" in fixed:
        lines.append("body mass held at one value: --body-mass-cv or --body-mass-range lets it vary")
    if sc["filled"]:
        lines.append(f"filled across species (allometric): {', '.join(sc['filled'])}")
    if sc["in_rest_of_body"]:
        lines.append("gaps, their share kept in rest_of_body: " + ", ".join(r["column"] for r in sc["in_rest_of_body"]))
    if sc["not_in_output"]:
        lines.append("gaps, not in the output: " + ", ".join(r["column"] for r in sc["not_in_output"]))
    bal = sc["balance"]
    shifts = ", ".join(f"{s['column']} mean {s['mean']:+.1%}, sd {s['sd'] or 0:+.1%}" for s in bal["largest_shifts"])
    lines.append(f"balance ({pop.spec.balance}): volumes of {bal['volumes_touched_share']:.1%} and flows of "
                 f"{bal['flows_touched_share']:.1%} of individuals {pop.spec.balance}n"
                 + (f"; largest shifts: {shifts}" if shifts else ""))
    return lines


@click.command("population")
@click.argument("species")
@click.option("--n", "n", type=click.IntRange(min=1), required=True, help="Number of individuals.")
@click.option("--seed", type=click.IntRange(min=0), required=True, help="Random seed; the same seed gives the same bytes.")
@click.option("--out", type=click.Path(dir_okay=False), required=True,
              help="Output file, .csv or .parquet; the sidecar is written beside it as OUT.json.")
@click.option("--format", "fmt", type=click.Choice(["csv", "parquet"]), default=None,
              help="Output format (default: from the suffix of --out).")
@click.option("--life-stage", "life_stage", default="adult", show_default=True, help="Life stage id.")
@click.option("--sex", type=click.Choice(["male", "female"]), default=None, help="Use rows of this sex (and mixed).")
@click.option("--body-mass", default=None, help='Centre body mass with a unit, e.g. "70 kg" (default: the stored typical one).')
@click.option("--body-mass-cv", type=float, default=None, help="Between-animal CV of body mass (lognormal).")
@click.option("--body-mass-range", nargs=2, default=None, metavar="LOW HIGH",
              help='Body masses uniform between two masses, e.g. "40 kg" "80 kg".')
@click.option("--layout", default=None, help="whole_body (the default; fish: fish), rich_slow, fish, or a TOML layout file.")
@click.option("--fill", type=click.Choice(["none", "allometric"]), default="none", show_default=True,
              help="Fill gaps of the set from a cross-species fit (listed in the sidecar).")
@click.option("--without-sd", type=click.Choice(["fixed", "default-cv"]), default="fixed", show_default=True,
              help="A parameter without any stored SD: held fixed, or drawn with the default CV; marked either way.")
@click.option("--default-cv", type=float, default=None, help="The default CV (0.3 unless given).")
@click.option("--balance", type=click.Choice(["redraw", "rescale"]), default="redraw", show_default=True,
              help="How an individual whose organs exceed its body mass or cardiac output is made to fit.")
@click.option("--mean-uncertainty", is_flag=True,
              help="Draw each mean once for the population from tau² + SE² of its pooled estimate.")
@click.option("--chunk-size", type=click.IntRange(min=1), default=None, help="Individuals per chunk (whole blocks of 8192).")
@click.option("--workers", type=click.IntRange(min=1), default=None, help="Processes (default: every core).")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary.")
@click.option("--sets", "n_sets", type=click.IntRange(min=1), default=None, metavar="K",
              help="Also write individuals 0 to K−1 as parameter sets (JSON and SBML) in the directory OUT.sets.")
@set_choice_options
@store_option
def population_cmd(species, n, seed, out, fmt, life_stage, sex, body_mass, body_mass_cv, body_mass_range, layout,
                   fill, without_sd, default_cv, balance, mean_uncertainty, chunk_size, workers, quiet, n_sets, stage_fallback,
                   verified_only, animal_class, temperature, store_path):
    """N virtual individuals of SPECIES: every compartment's volume and flow, cardiac output, GFR,
    hematocrit and body mass, drawn from the stored between-animal variability with both balances kept."""
    from .. import CAUTION
    from ..api import open_store
    from ..api.population import DEFAULT_CV
    from ..api.population.run import DEFAULT_CHUNK

    progress = _Progress(not quiet and sys.stderr.isatty())
    try:
        pop = open_store(store_path).population(
            species, n, seed, life_stage=life_stage, sex=sex, body_mass=body_mass, body_mass_cv=body_mass_cv,
            body_mass_range=tuple(body_mass_range) if body_mass_range else None, layout=layout, fill=fill,
            without_sd=without_sd.replace("-", "_"), default_cv=DEFAULT_CV if default_cv is None else default_cv,
            balance=balance, stage_fallback=stage_fallback, verified_only=verified_only, animal_class=animal_class,
            temperature=temperature, mean_uncertainty=mean_uncertainty, out=out, fmt=fmt, as_sets=bool(n_sets),
            chunk_size=chunk_size or DEFAULT_CHUNK, workers=workers, progress=progress)
    finally:
        progress.stop()
    if n_sets:
        written = _write_sets(pop, min(n_sets, n))
    if quiet:
        return
    click.echo(f"wrote {pop.path} ({n:,} individuals × {len(pop.columns)} columns) and {pop.sidecar_path} "
               "(distributions, sources, balance)", err=True)
    for line in summary(pop):
        click.echo(line, err=True)
    if n_sets:
        click.echo(f"wrote {written} ({min(n_sets, n)} individuals as parameter sets, JSON and SBML)", err=True)
    click.echo(CAUTION, err=True)
