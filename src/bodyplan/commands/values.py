"""bodyplan values: the raw curated values, with provenance."""

from __future__ import annotations

import click

from ..output import choose_ids, emit, format_option, renamed_option, store_option

SHOWN = ["species", "life_stage", "sex", "compartment", "quantity", "value", "unit", "uncertainty", "spread",
         "low", "high", "n", "value_canonical", "unit_canonical", "source", "locator", "verified"]


@click.command("values")
@click.option("--species", multiple=True, help="Species id (repeatable).")
@renamed_option("--life-stage", "--stage", "life_stage", multiple=True, help="Life stage id (repeatable).")
@click.option("--quantity", multiple=True, help="Quantity id (repeatable).")
@click.option("--compartment", multiple=True, help="Compartment id (repeatable).")
@click.option("--source", multiple=True, help="Source citation key (repeatable).")
@click.option("--all-columns", is_flag=True, help="Every column, including comments and file:line.")
@format_option()
@store_option
def values_cmd(species, life_stage, quantity, compartment, source, all_columns, fmt, store_path):
    """Raw curated values with their source, locator and uncertainty."""
    from ..api import open_store

    store = open_store(store_path)
    # a misspelt name is an error listing the valid ones, never an empty table
    wanted = {key: choose_ids(store, table, given or None, what, f"--{option}")
              for key, given, table, what, option in (
                  ("species", species, "species", "species", "species"),
                  ("life_stage", life_stage, "life_stages", "life stage", "life-stage"),
                  ("quantity", quantity, "quantities", "quantity", "quantity"),
                  ("compartment", compartment, "compartments", "compartment", "compartment"),
                  ("source", source, "sources", "source", "source"))}
    frame = store.values(**wanted)
    emit(frame if all_columns or fmt != "table" else frame[SHOWN], fmt, title=f"{len(frame)} curated values")
