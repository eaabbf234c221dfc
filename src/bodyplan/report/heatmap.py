"""The coverage heatmap: species × parameter, one colour per state plus a text mark in every cell.

Readable on paper: colours from the cividis map (ordered in lightness, so they survive greyscale
and the common colour-vision deficiencies), "absent" left white, "fraction only" also hatched,
and each cell's mark spells out sources, verification and uncertainty.
"""

from __future__ import annotations

from pathlib import Path

from . import figure_png
from ..api.gaps import NOT_IN_LAYOUT, STATES, GapReport

HATCH = {"fraction only": "////", NOT_IN_LAYOUT: "xx"}


def state_colours() -> dict[str, tuple]:
    """absent → white; the other states from light to dark along cividis (reversed)."""
    from matplotlib import colormaps

    cmap = colormaps["cividis"]
    shades = [cmap(x) for x in (0.97, 0.76, 0.52, 0.28, 0.0)]
    return {"absent": (1.0, 1.0, 1.0, 1.0), **dict(zip(STATES[1:], shades)), NOT_IN_LAYOUT: (0.88, 0.88, 0.88, 1.0)}


def _text_colour(rgba) -> str:
    r, g, b = rgba[:3]
    return "black" if 0.299 * r + 0.587 * g + 0.114 * b > 0.5 else "white"


def row_labels(report: GapReport, keys) -> list[str]:
    ready = {(r.species, r.life_stage): r.readiness for r in report.readiness.itertuples()}
    one_stage = len({st for _, st in keys}) == 1
    return [f"{sp if one_stage else f'{sp} ({st})'}  {ready[(sp, st)] * 100:3.0f} %" for sp, st in keys]


def heatmap_figure(report: GapReport):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Patch, Rectangle

    states = report.matrix("state")
    marks = report.matrix("mark")
    # most ready species on top
    order = report.readiness.sort_values(["readiness", "covered_slots", "species"],
                                         ascending=[False, False, True], kind="stable")
    keys = [k for k in zip(order["species"], order["life_stage"])]
    states, marks = states.loc[keys], marks.loc[keys]
    labels = [p.label for p in report.slots]
    n_rows, n_cols = states.shape
    colours = state_colours()

    width = 3.4 + 0.40 * n_cols
    height = 3.7 + 0.3 * n_rows
    fig, ax = plt.subplots(figsize=(width, height), dpi=150)
    for i in range(n_rows):
        for j in range(n_cols):
            state = states.iat[i, j]
            rgba = colours[state]
            ax.add_patch(Rectangle((j, i), 1, 1, facecolor=rgba, edgecolor="0.6", linewidth=0.4,
                                   hatch=HATCH.get(state)))
            if marks.iat[i, j]:
                ax.text(j + 0.5, i + 0.5, marks.iat[i, j], ha="center", va="center", fontsize=7.5,
                        color=_text_colour(rgba),
                        bbox=dict(boxstyle="square,pad=0.05", facecolor=rgba, edgecolor="none")
                        if state in HATCH else None)
    # separators between whole-body, volume and flow columns
    kinds = [p.id.split(".")[-1] if "." in p.id else "whole" for p in report.slots]
    for j in range(1, n_cols):
        if kinds[j] != kinds[j - 1]:
            ax.axvline(j, color="black", linewidth=1.2)
    ax.set_xlim(0, n_cols)
    ax.set_ylim(n_rows, 0)
    ax.set_xticks([j + 0.5 for j in range(n_cols)])
    ax.set_yticks([i + 0.5 for i in range(n_rows)])
    ax.set_yticklabels(row_labels(report, keys), fontsize=9.5, family="monospace")
    ax.tick_params(length=0)
    ax.xaxis.tick_top()
    ax.set_xticklabels(labels, rotation=60, ha="left", rotation_mode="anchor", fontsize=9.5)
    for side in ax.spines.values():
        side.set_visible(False)
    stage = "all stages" if report.life_stage == "all" else report.life_stage
    fig.suptitle(f"Curated coverage, {report.layout} layout, {stage}  (row label: readiness)", fontsize=12,
                 x=0.01, ha="left")

    shown = STATES + ([NOT_IN_LAYOUT] if (states == NOT_IN_LAYOUT).any().any() else [])
    handles = [Patch(facecolor=colours[s], edgecolor="0.4", hatch=HATCH.get(s), label=s) for s in shown]
    footer = 1.55  # inches below the grid for the legend and the key to the cell text
    legend = fig.legend(handles=handles, loc="lower left", ncol=6, fontsize=9.5, frameon=False,
                        bbox_to_anchor=(0.01, 0.78 / height), title="cell state", title_fontsize=9.5,
                        alignment="left", handlelength=1.6, columnspacing=1.2)
    legend.get_title().set_ha("left")
    fig.text(0.012, 0.08 / height,
             "Cell text: number of sources; v verified against the source text; ± uncertainty given; "
             "f fraction or per-kg form only;\n* a lumped compartment with a part lacking data (the cell shows "
             "its worst part). Rows on parts a set may sum (stomach for gut)\nare counted with their whole; readiness "
             "is the share of the parameter set that is not a gap.",
             ha="left", va="bottom", fontsize=9, linespacing=1.4)
    fig.tight_layout(rect=(0, footer / height, 1, 1 - 0.35 / height))
    return fig


def write_heatmap(report: GapReport, path: str | Path | None = None) -> bytes:
    """Render the heatmap as PNG; write it to path if given; return the bytes."""
    return figure_png(heatmap_figure(report), path)
