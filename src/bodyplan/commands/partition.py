"""bodyplan kp: tissue:plasma partition coefficients from the store's tissue composition."""

from __future__ import annotations

import sys

import click

from ..output import format_option, store_option

METHOD_CHOICES = {"rodgers-rowland": "rodgers_rowland", "poulin-theil": "poulin_theil",
                  "berezhkovskiy": "berezhkovskiy"}
METHOD_HELP = ("rodgers-rowland: the 2005 equation for moderate-to-strong bases, 2006 for the rest; poulin-theil: "
               "Poulin & Theil 2002; berezhkovskiy: Poulin & Theil with the Berezhkovskiy 2004 correction.")


def kp_method_option(name: str):
    """The Kp method, spelled the same by every command that computes Kp."""
    return click.option(name, "kp_method", type=click.Choice(list(METHOD_CHOICES)), default="rodgers-rowland",
                        show_default=True, help=METHOD_HELP)
SHORT = {"Rodgers, Leahy & Rowland 2005": "RR 2005", "Rodgers & Rowland 2006": "RR 2006",
         "Poulin & Theil 2002 with the Berezhkovskiy 2004 correction": "PT 2002 + B 2004",
         "Poulin & Theil 2002": "PT 2002"}


def _short(method: str) -> str:
    for long, short in SHORT.items():
        if method.startswith(long):
            return short + method[len(long):]
    return method


def render_table(result, file=None) -> None:
    from rich.console import Console
    from rich.table import Table

    from .. import CAUTION

    out = file or sys.stdout
    console = Console(file=out, width=None if out.isatty() else 160)
    table = Table(title=f"{result.species}, {result.life_stage}: Kp by {result.to_dict()['method']}",
                  title_justify="left")
    for name, justify in (("compound", "left"), ("tissue", "left"), ("Kp tissue:plasma", "right"),
                          ("Kp tissue:blood", "right"), ("how", "left"), ("method", "left"), ("sources", "left")):
        table.add_column(name, justify=justify, overflow="fold")
    for r in result.table.itertuples(index=False):
        sources = r.sources
        if r.status == "gap":
            kp = kpb = how = "[bold red]gap[/]"
            needs = list(dict.fromkeys(m.split(" ")[0] for m in r.missing.split("; ") if m))
            sources = f"needs {', '.join(needs)} composition" if needs else r.reason
        else:
            kp, kpb = f"{r.kp:.3g}", f"{r.kp_blood:.3g}"
            how = f"[yellow]borrowed from {r.borrowed_from}[/]" if r.status == "borrowed" else "computed"
        table.add_row(r.compound, r.tissue, kp, kpb, how, _short(r.method), sources)
    console.print(table)
    console.print(f"pH: plasma and interstitial {7.4}, intracellular {7.0}, erythrocytes {7.22}; "
                  "Kp tissue:blood = Kp tissue:plasma / blood:plasma ratio", highlight=False)
    done = result.table[result.table["status"] != "gap"]
    if len(done) and not done["composition_verified"].all():
        console.print("composition behind these Kp is marked unverified in the store (recalled, not read in the "
                      "source); --format json lists every row used", highlight=False)
    for note in result.notes:
        console.print(f"note: {note}", highlight=False)
    gaps = result.gaps
    if len(gaps):
        missing = sorted({m.split(" ")[0] for text in gaps["missing"] for m in text.split("; ") if m})
        console.print(f"{len(gaps)} gap(s)" + (f": no stored composition for {', '.join(missing)}" if missing else ""),
                      highlight=False)
        if missing and not (gaps["borrowed_from"] != "").any():
            console.print("borrow it from a described species with --borrow-from SPECIES (e.g. rat or human), or "
                          "curate a source; bodyplan values --quantity tissue_neutral_lipid_fraction shows what is "
                          "stored", highlight=False)
        other = sorted(set(gaps.loc[gaps["missing"] == "", "reason"]))
        for reason in other:
            console.print(f"  {reason}", highlight=False, markup=False)
    console.print(CAUTION, highlight=False)


EXAMPLE = """\b
A compound file (TOML; CSV takes the same names as columns, pKa lists separated by ';'):
  [[compound]]
  name = "example_base"
  log_p = 3.0            # octanol:water, un-ionised form
  pka_base = 9.5         # or pka_acid = [3.1, 9.8]; at most two pKa values
  fu_plasma = 0.2        # or "20 %"
  blood_plasma_ratio = 0.9
"""


@click.command("kp", epilog=EXAMPLE)
@click.argument("species")
@click.option("--compound", "compound_file", required=True, type=click.Path(dir_okay=False),
              help="Compounds: a .toml file of [[compound]] tables or a .csv file (name, log_p, log_p_oil, "
                   "pka_acid, pka_base, fu_plasma, blood_plasma_ratio).")
@kp_method_option("--method")
@click.option("--berezhkovskiy", is_flag=True, hidden=True,
              help="Deprecated: use --method berezhkovskiy.")
@click.option("--borrow-from", "borrow_from", default=None, metavar="SPECIES|closest",
              help="Take a tissue's composition from this species where the species itself has none "
                   "(each such Kp is marked); 'closest' tries the same taxon class, rat first.")
@click.option("--borrow", is_flag=True, help="Shorthand for --borrow-from rat.")
@click.option("--life-stage", "life_stage", default="adult", show_default=True, help="Life stage id.")
@click.option("--out", "out_path", type=click.Path(dir_okay=False), default=None,
              help="Write the csv or json output to this file instead of the terminal.")
@format_option()
@store_option
def kp_cmd(species, compound_file, kp_method, berezhkovskiy, borrow_from, borrow, life_stage, out_path, fmt,
           store_path):
    """Tissue:plasma partition coefficients (Kp) of every tissue of SPECIES for each compound."""
    from ..api import open_store
    from ..api.partition import PartitionError

    if berezhkovskiy:  # the old spelling, kept for one release
        if kp_method not in ("poulin-theil", "berezhkovskiy"):
            raise PartitionError("--berezhkovskiy corrects the Poulin & Theil method; use --method berezhkovskiy")
        click.echo("note: --berezhkovskiy is deprecated and goes in the next release; use --method berezhkovskiy",
                   err=True)
        kp_method = "berezhkovskiy"
    if borrow and borrow_from:
        raise PartitionError("give either --borrow (from rat) or --borrow-from SPECIES, not both")
    if out_path and fmt == "table":
        raise PartitionError("--out writes csv or json; add --format csv or --format json")
    result = open_store(store_path).partition_coefficients(
        species, compound_file, method=METHOD_CHOICES[kp_method], life_stage=life_stage,
        borrow_from="rat" if borrow else borrow_from)
    if fmt == "table":
        render_table(result)
        return
    text = result.to_json() + "\n" if fmt == "json" else result.to_csv()
    if out_path:
        with open(out_path, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
        click.echo(f"wrote {out_path}: {len(result.table)} Kp rows ({len(result.gaps)} gaps)", err=True)
    else:
        sys.stdout.write(text)
