"""bodyplan gaps and bodyplan allometry: what is missing, and what the other species predict."""

from __future__ import annotations

from pathlib import Path

import click

from ..output import choose_ids, emit, force_option, format_option, guard_out, renamed_option, store_option


def _guard_report(out: str, store_file, force: bool) -> None:
    suffix = Path(out).suffix.lower()
    if suffix not in (".png", ".html", ".htm"):
        raise click.BadParameter(f"{out}: write a .html report or a .png heatmap", param_hint="--out")
    guard_out(out, kind="png" if suffix == ".png" else "text", suffixes=(suffix,), inputs=[store_file], force=force)


def _write_report(report, out: str, store) -> str:
    suffix = Path(out).suffix.lower()
    if suffix == ".png":
        from ..report.heatmap import write_heatmap

        write_heatmap(report, out)
    elif suffix in (".html", ".htm"):
        from ..report.page import write_gap_report_html

        write_gap_report_html(report, out, store.info())
    else:
        raise click.BadParameter(f"{out}: write a .html report or a .png heatmap", param_hint="--out")
    return out


@click.command("gaps")
@click.option("--species", "species", multiple=True, help="Species id (repeatable; default: every species).")
@renamed_option("--life-stage", "--stage", "stage", default=None,
                help="Life stage, or 'all' for every stage with data (plus adult for every species). Default: "
                     "every stage of the species asked for with --species, else adult.")
@click.option("--layout", default=None,
              help="Layout name (whole_body, rich_slow, fish) or a .toml file (default: each species' own: fish "
                   "take the fish layout, the others whole_body).")
@format_option()
@click.option("--out", type=click.Path(dir_okay=False), default=None,
              help="Also write the report: FILE.html (self-contained) or FILE.png (the heatmap).")
@force_option
@store_option
def gaps_cmd(species, stage, layout, fmt, out, force, store_path):
    """Coverage of each species × parameter, readiness per species, and what to curate next."""
    from ..api import locate_store, open_store

    store_file = locate_store(store_path)
    if out:
        _guard_report(out, store_file, force)
    store = open_store(store_file)
    if stage is None:  # a curator asking for one species wants each of its stages, not only the adult
        stage = "all" if species else "adult"
    species = choose_ids(store, "species", list(species) or None, "species", "--species")
    if stage != "all":
        stage = choose_ids(store, "life_stages", stage, "life stage", "--life-stage")
    report = store.gap_report(species, life_stage=stage, layout=layout)
    if out:
        click.echo(f"wrote {_write_report(report, out, store)}", err=True)
    if fmt == "json":
        emit(report.to_dict(), fmt)
    elif fmt == "csv":
        emit(report.coverage, fmt)
    else:
        ranked = report.under_studied.assign(readiness=lambda f: (f["readiness"] * 100).round(0).astype(int),
                                             readiness_verified=lambda f: (f["readiness_verified"] * 100).round(0)
                                             .astype(int))
        emit(ranked[["rank", "species", "life_stage", "readiness", "readiness_verified", "available_verified",
                     "available_unverified", "total", "covered_slots", "waits_on"]]
             .rename(columns={"readiness": "readiness %", "readiness_verified": "verified %",
                              "available_verified": "verified", "available_unverified": "unverified",
                              "covered_slots": "slots with data", "waits_on": "to curate"}),
             fmt, title=f"Readiness ({report.layout} layout), least ready first")
        for line in report.left_out_lines():
            click.echo(line)
        emit(report.most_wanted[["slot", "species_made_ready", "gaps_closed_alone", "species_needing"]]
             .head(15), fmt, title="Most wanted: curating this closes the most gaps")
        counts = report.coverage.pivot_table(index=["species", "life_stage"], columns="state", values="slot",
                                             aggfunc="count", fill_value=0).reset_index()
        emit(counts, fmt, title="Coverage cells per state (full matrix: --format csv or json, or --out FILE.html)")
        emit(report.composition.rename(columns={"poulin_theil": "Poulin–Theil", "rodgers_rowland_neutral":
                                                "Rodgers–Rowland (neutral, acid)",
                                                "rodgers_rowland_base": "Rodgers–Rowland (strong base)",
                                                "inputs": "inputs held", "verified_share": "read share"}),
             fmt, title="Tissue composition for Kp: tissues (of the whole-body layout) each method can run on "
                        "from the species' own rows")


@click.command("allometry")
@click.argument("quantity")
@click.option("--compartment", default=None, help="Compartment id (default: the one the quantity is stored on).")
@renamed_option("--life-stage", "--stage", "stage", default="adult", show_default=True, help="Life stage.")
@click.option("--class", "taxon_class", type=click.Choice(["mammals", "birds", "fish", "all"], case_sensitive=False),
              default="mammals", show_default=True, help="Which species to fit over.")
@format_option(choices=["table", "json"])
@click.option("--out", type=click.Path(dir_okay=False), default=None, help="Write the log–log plot to FILE.png.")
@click.option("--predict", "predict_species", default=None, help="Predict the quantity for this species.")
@renamed_option("--body-mass", "--body-weight", "body_weight", default=None,
                help='Body mass for --predict, e.g. "12 kg" (default: the species\' stored body mass).')
@force_option
@store_option
def allometry_cmd(quantity, compartment, stage, taxon_class, fmt, out, predict_species, body_weight, force,
                  store_path):
    """Fit QUANTITY = a · (body mass)^b across species, one point per species, with 95 % intervals."""
    from .. import CAUTION
    from ..api import locate_store, open_store

    store_file = locate_store(store_path)
    if out:
        if Path(out).suffix.lower() != ".png":
            raise click.BadParameter(f"{out}: the plot is written as .png", param_hint="--out")
        guard_out(out, kind="png", suffixes=(".png",), inputs=[store_file], force=force)
    store = open_store(store_file)
    quantity = choose_ids(store, "quantities", quantity, "quantity")
    compartment = choose_ids(store, "compartments", compartment, "compartment", "--compartment")
    stage = choose_ids(store, "life_stages", stage, "life stage", "--life-stage")
    predict_species = choose_ids(store, "species", predict_species, "species", "--predict")
    result = store.allometry(quantity, compartment=compartment, life_stage=stage, taxon_class=taxon_class)
    prediction = None
    if predict_species or body_weight:
        prediction = _prediction(store, result, predict_species, body_weight, stage)
    if out:
        from ..report.allometry_plot import write_allometry_png

        write_allometry_png(result, out, prediction, predict_species)
        click.echo(f"wrote {out}", err=True)
    if fmt == "json":
        data = result.to_dict()
        if prediction:
            data["prediction"] = prediction
            data["caution"] = CAUTION
        emit(data, fmt)
        return
    fit = result.fit
    pts = result.points[["species", "body_mass_kg", "value", "predicted", "low", "high", "outside_interval",
                         "n_rows", "converted_rows", "sources"]].copy()
    for col in ("body_mass_kg", "value", "predicted", "low", "high"):
        pts[col] = pts[col].map(lambda x: f"{x:.4g}")
    emit(pts.rename(columns={"value": f"value ({result.unit})", "low": "PI low", "high": "PI high"}), fmt,
         title=f"{quantity} of {result.compartment}, {stage}, {taxon_class}: one point per species")
    summary = {"model": f"{quantity} in {result.unit} = a · (body mass in kg)^b",
               "a": f"{fit.a:.4g} (95 % CI {fit.a_ci[0]:.4g}–{fit.a_ci[1]:.4g})",
               "b": f"{fit.b:.4f} (95 % CI {fit.b_ci[0]:.4f}–{fit.b_ci[1]:.4f})",
               "R²": f"{fit.r2:.4f}", "n species": fit.n, "residual sd (log10)": f"{fit.residual_sd:.4f}",
               "outside the 95 % prediction interval": ", ".join(fit.outliers()) or "none",
               "rows left out": f"{len(result.skipped)} (listed below)" if len(result.skipped) else "none"}
    if prediction:
        who = predict_species or "a new species"
        summary[f"predicted for {who} at {prediction['body_mass_kg']:.4g} kg"] = (
            f"{prediction['value']:.4g} {result.unit} (95 % prediction interval "
            f"{prediction['low']:.4g}–{prediction['high']:.4g})")
        if prediction.get("note"):
            summary["note"] = prediction["note"]
        summary["caution"] = CAUTION
    emit(summary, fmt, title="Fit")
    if len(result.skipped):
        left = (result.skipped.groupby(["species", "reason"], sort=True)
                .agg(rows=("row_id", "size"), sources=("source", lambda s: "; ".join(dict.fromkeys(s))))
                .reset_index())
        emit(left, fmt, title="Rows left out of the fit")


def _prediction(store, result, species, body_weight, stage) -> dict:
    from ..api.allometry import AllometryError, species_body_mass
    from ..units import to_quantity

    if body_weight:
        q = to_quantity(body_weight)  # UnitError names a malformed text
        if not q.check("[mass]"):
            raise AllometryError(f"body mass {body_weight!r} is not a mass; write e.g. '12 kg'")
        kg = float(q.to("kg").magnitude)
        basis = "given"
    else:
        kg, basis = species_body_mass(store, species, stage)
        if kg is None:
            raise AllometryError(f"no body mass stored for {species} ({stage}); give --body-mass")
    if kg <= 0:
        raise AllometryError(f"body mass must be positive, got {body_weight!r}")
    out = result.predict(kg)
    out.update(species=species, body_mass_from=basis)
    if species in set(result.points["species"]):
        out["note"] = f"{species} is one of the fitted points; its own data are in the table"
    return out
