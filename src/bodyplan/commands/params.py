"""bodyplan params: the modeller's parameter set."""

from __future__ import annotations

import sys

import click


from ..output import choose_ids, force_option, guard_out, renamed_option, set_choice_options, store_option, to_json
from .partition import METHOD_CHOICES, kp_method_option


def _value_text(value, sd=None, se=None, low=None, high=None) -> str:
    if value is None:
        return "—"
    text = f"{value:.4g}"
    spread = sd if sd is not None else se
    if spread is not None:
        text += f" ± {spread:.2g}{'' if sd is not None else ' (se)'}"
    if low is not None and high is not None and spread is None:
        text += f" [{low:.3g}–{high:.3g}]"
    return text


def render_table(ps, file=None) -> None:
    """The view a modeller reads: compartment, volume, flow, how obtained, sources; gaps in colour."""
    from rich.console import Console
    from rich.table import Table

    from .. import CAUTION

    d = ps.to_dict()
    console = Console(file=file or sys.stdout, width=None if (file or sys.stdout).isatty() else 160)
    bw, co = d["body_mass"], d["cardiac_output"]
    title = (f"{ps.species}, {ps.life_stage}{', ' + ps.sex if ps.sex else ''}: {ps.layout.name} layout, "
             f"body mass {_value_text(bw['value'])} kg ({bw['origin']})"
             + (f", at {ps.temperature:g} °C" if ps.temperature is not None else ""))
    table = Table(title=title, title_justify="left")
    for name, justify in (("compartment", "left"), (f"volume ({d['compartments'][0]['volume']['unit']})", "right"),
                          ("how", "left"), (f"blood flow ({co['unit']})", "right"), ("how", "left"),
                          ("sources", "left")):
        table.add_column(name, justify=justify, overflow="fold")

    def how(cell):
        colour = {"gap": "bold red", "allometric": "yellow", "not_applicable": "dim"}.get(cell["origin"], "")
        text = "n/a" if cell["origin"] == "not_applicable" else cell["origin"]
        share = cell.get("verified_share")
        if share is not None and share < 0.5 and cell["origin"] != "gap":
            text += " ~"  # rests mostly on values recalled, not read in their source
        return f"[{colour}]{text}[/]" if colour else text

    def val(cell):
        v = _value_text(cell["value"], cell["sd"], cell["se"], *(cell.get("interval") or (None, None)))
        return "[bold red]gap[/]" if cell["origin"] == "gap" else v

    def short(sources):  # the JSON and CSV keep every source; the table names a few
        sources = list(dict.fromkeys(sources))
        return ", ".join(sources) if len(sources) <= 4 else ", ".join(sources[:3]) + f" +{len(sources) - 3} more"

    table.add_row("cardiac output", "", "", val(co), how(co), short(co["sources"]))
    for c in d["compartments"]:
        table.add_row(c["compartment"], val(c["volume"]), how(c["volume"]), val(c["blood_flow"]),
                      how(c["blood_flow"]), short(c["volume"]["sources"] + c["blood_flow"]["sources"]))
    console.print(table)
    console.print("± sd of one study, or (se) of a pooled mean; \\[low–high] the range of the study values, "
                  "or for allometric fills the 95 % prediction interval; ~ rests mostly on values recalled, not "
                  "read in their source (--verified-only leaves them out)")
    for name, label in (("gfr", "GFR"), ("hematocrit", "hematocrit")):
        cell = d["physiology"].get(name)
        if cell:
            unit = "" if cell["unit"] == "1" else f" {cell['unit']}"
            console.print(f"{label}: {val(cell)}{unit} ({how(cell)}; {short(cell['sources']) or 'no source'})")
    console.print(f"liver flow: {d['liver_flow']}")
    for check in d["checks"]:
        style = {"pass": "green", "warn": "yellow", "fail": "bold red"}[check["status"]]
        console.print(f"[{style}]{check['status']}[/] {check['check']}: {check['detail']}")
    if d["gaps"]:
        hint = ("give --body-mass to scale to" if bw["origin"] == "gap" else
                "fill them from other species with --fill allometric" if ps.fill == "none" else
                "too few species have these to fit across species")
        console.print(f"[bold red]{len(d['gaps'])} gap(s)[/]; {hint}, or curate a source "
                      "(bodyplan gaps shows what is missing)")
    console.print(f"[italic]{CAUTION}[/]")


OUT_SUFFIXES = {"json": (".json",), "csv": (".csv",), "sbml": (".xml", ".sbml"), "table": (".txt",)}


@click.command("params")
@click.argument("species")
@renamed_option("--life-stage", "--stage", "life_stage", default="adult", show_default=True, help="Life stage id.")
@click.option("--sex", type=click.Choice(["male", "female"], case_sensitive=False), default=None,
              help="Use rows of this sex (and mixed).")
@renamed_option("--body-mass", "--body-weight", "body_weight", default=None,
                help='Body mass with a unit, e.g. "12 kg" or "26 lb" (default: the species\' typical body mass).')
@click.option("--layout", default=None,
              help="whole_body (the default; fish: fish), rich_slow, fish, or a TOML layout file.")
@click.option("--fill", type=click.Choice(["none", "allometric"], case_sensitive=False), default="none",
              show_default=True, help="Fill gaps from a cross-species allometric fit (recorded on each value).")
@click.option("--units", type=click.Choice(["SI", "clinical"], case_sensitive=False), default="SI", show_default=True,
              help="SI: L and L/h; clinical: mL and mL/min.")
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json", "sbml"]), default="table",
              show_default=True, help="Output format.")
@set_choice_options
@click.option("--allow-gaps", is_flag=True, help="SBML: export a set with gaps, each marked and set to NaN.")
@click.option("--compound", "compound_file", type=click.Path(dir_okay=False, exists=True), default=None,
              help="A compound file (TOML or CSV, as for bodyplan kp): add Kp of every compartment to the set.")
@kp_method_option("--kp-method")
@click.option("--kp-borrow-from", default=None, metavar="SPECIES|closest",
              help="Borrow missing tissue composition from this species (marked on each Kp).")
@click.option("--out", type=click.Path(dir_okay=False), default=None, help="Write to a file instead of stdout.")
@force_option
@store_option
def params_cmd(species, life_stage, sex, body_weight, layout, fill, units, fmt, stage_fallback, verified_only,
               animal_class, temperature, allow_gaps, compound_file, kp_method, kp_borrow_from, out, force, store_path):
    """A model-ready parameter set for SPECIES, scaled to a body mass, every gap marked."""
    from pathlib import Path

    from ..api import locate_store, open_store

    store_file = locate_store(store_path)
    if out:
        layout_file = [Path(layout)] if layout and Path(layout).suffix == ".toml" else []
        guard_out(out, kind="text", suffixes=OUT_SUFFIXES[fmt], inputs=[store_file, *layout_file], force=force)
    if body_weight is not None:
        from ..units import parse_quantity_text

        parse_quantity_text(body_weight)  # the strict grammar names a malformed body mass before anything runs
    store = open_store(store_file)
    species = choose_ids(store, "species", species, "species")
    life_stage = choose_ids(store, "life_stages", life_stage, "life stage", "--life-stage")
    ps = store.parameter_set(species, life_stage=life_stage, sex=sex, body_mass=body_weight, layout=layout,
                             fill=fill, units=units, stage_fallback=stage_fallback, verified_only=verified_only,
                             animal_class=animal_class, temperature=temperature)
    if compound_file:
        ps.add_partition_coefficients(store, compound_file, method=METHOD_CHOICES[kp_method],
                                      borrow_from=kp_borrow_from)
    text = {"json": lambda: to_json(ps.to_dict()), "csv": ps.to_csv,
            "sbml": lambda: ps.to_sbml(allow_gaps=allow_gaps)}.get(fmt)
    if out:
        content = text() if text else None  # computed first: a refused result leaves no half-written file
        with open(out, "w", encoding="utf-8", newline="\n") as fh:
            if text:
                fh.write(content if fmt != "json" else content + "\n")
            else:
                render_table(ps, file=fh)
        click.echo(f"wrote {out} ({fmt}, {len(ps.gaps)} gap(s))", err=True)
    elif text:
        click.echo(text(), nl=fmt == "json")
    else:
        render_table(ps)
