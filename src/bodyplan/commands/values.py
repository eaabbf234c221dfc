"""bodyplan values: the raw curated values, with provenance."""

from __future__ import annotations

import click

from ..output import emit, format_option, store_option

SHOWN = ["species", "life_stage", "sex", "compartment", "quantity", "value", "unit", "uncertainty", "spread",
         "low", "high", "n", "value_canonical", "unit_canonical", "source", "locator", "verified"]


@click.command("values")
@click.option("--species", multiple=True, help="Species id (repeatable).")
@click.option("--stage", "life_stage", multiple=True, help="Life stage id (repeatable).")
@click.option("--quantity", multiple=True, help="Quantity id (repeatable).")
@click.option("--compartment", multiple=True, help="Compartment id (repeatable).")
@click.option("--source", multiple=True, help="Source citation key (repeatable).")
@click.option("--all-columns", is_flag=True, help="Every column, including comments and file:line.")
@format_option()
@store_option
def values_cmd(species, life_stage, quantity, compartment, source, all_columns, fmt, store_path):
    """Raw curated values with their source, locator and uncertainty."""
    from ..api import open_store

    frame = open_store(store_path).values(species=species or None, life_stage=life_stage or None,
                                          quantity=quantity or None, compartment=compartment or None,
                                          source=source or None)
    emit(frame if all_columns or fmt != "table" else frame[SHOWN], fmt, title=f"{len(frame)} curated values")
