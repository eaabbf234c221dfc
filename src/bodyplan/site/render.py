"""The modeller pages, rendered once per store: a page per species, a parameter set per species × stage ×
layout (with JSON, CSV and SBML downloads), a page per value, and the coverage pages of the gap report.

The result is a dict URL path → (content type, bytes); the plugin serves it from memory, and
`bodyplan site --out DIR` writes it under DIR/pages, so a page's cost does not depend on load.
"""

from __future__ import annotations

from pathlib import Path
from urllib.parse import urlencode

from .. import CAUTION
from ..api.gaps import NOT_IN_LAYOUT
from .plugin import CONTENT_TYPES, describe_canonical, describe_value
from .sets import COVERAGE_LAYOUTS, LAYOUTS, OWN, SiteData, layouts_for

Pages = dict[str, tuple[str, bytes]]
VALUES_TABLE = "/bodyplan/curated_values"


def rows_url(**filters) -> str:
    """A link to the values table filtered to these columns (datasette filter syntax)."""
    return f"{VALUES_TABLE}?{urlencode({k: v for k, v in filters.items() if v is not None})}"


def set_url(species: str, stage: str, layout: str) -> str:
    return f"/sets/{species}/{stage}/{layout}"


def coverage_url(layout: str, stage: str) -> str:
    return "/coverage" if (layout, stage) == (OWN, "adult") else f"/coverage/{layout}/{stage}"


def _environment():
    from jinja2 import Environment, FileSystemLoader, select_autoescape

    env = Environment(loader=FileSystemLoader(str(Path(__file__).parent / "pages")),
                      autoescape=select_autoescape(["html"]), trim_blocks=True, lstrip_blocks=True)
    env.globals.update(rows_url=rows_url, set_url=set_url, coverage_url=coverage_url, caution=CAUTION,
                       layouts=COVERAGE_LAYOUTS, own=OWN, not_in_layout=NOT_IN_LAYOUT,
                       values_table=VALUES_TABLE)
    return env


def render_pages(store) -> Pages:
    """Every modeller page of ``store`` (an open Store)."""
    data = SiteData(store)
    env = _environment()
    env.globals["content_hash"] = data.content_hash[:16]
    pages: Pages = {}

    def html(path: str, template: str, **context) -> None:
        pages[path] = (CONTENT_TYPES["html"], env.get_template(template).render(**context).encode("utf-8"))

    labels = data.labels
    stage_of = {}
    for sp in data.species:
        stage_of[sp["id"]] = data.stages_with_rows(sp["id"]) or ["adult"]

    # parameter sets first: the species pages link to them and show their gaps
    sets = {}
    for sp in data.species:
        for stage in stage_of[sp["id"]]:
            for layout in layouts_for(sp["taxon_class"]):
                ps = data.parameter_set(sp["id"], stage, layout)
                sets[(sp["id"], stage, layout)] = ps
                base = set_url(sp["id"], stage, layout)
                downloads = ps.pop("downloads")
                for ext, key in (("json", "json"), ("csv", "csv"), ("sbml.xml", "sbml")):
                    pages[f"{base}.{ext}"] = (CONTENT_TYPES[ext.rsplit(".", 1)[-1]], downloads[key].encode("utf-8"))
                html(base, "parameter_set.html", ps=ps, species=sp, base=base, labels=labels,
                     other_layouts=[x for x in layouts_for(sp["taxon_class"]) if x != layout])

    for sp in data.species:
        stages = []
        for stage in stage_of[sp["id"]]:
            held = {}
            for r in data.rows:
                if r["species_id"] == sp["id"] and r["life_stage_id"] == stage:
                    h = held.setdefault(r["quantity_id"], {"quantity": r["quantity_id"], "rows": 0, "with_value": 0,
                                                           "verified": 0, "sources": set()})
                    h["rows"] += 1
                    h["with_value"] += r["value"] is not None
                    h["verified"] += bool(r["verified"])
                    h["sources"].add(r["source_id"])
            by_layout = []
            for layout in layouts_for(sp["taxon_class"]):
                cov = data.coverage(layout)
                ready = cov["readiness"].get((sp["id"], stage))
                cells = [dict(cov["cells"][(sp["id"], stage, p["id"])], **p)
                         for p in cov["parameters"] if (sp["id"], stage, p["id"]) in cov["cells"]]
                by_layout.append({"layout": layout, "ready": ready, "cells": cells, "colours": cov["colours"], "texts": cov["texts"],
                                  "set": sets[(sp["id"], stage, layout)]})
            stages.append({"stage": stage, "held": sorted(held.values(), key=lambda h: h["quantity"]),
                           "layouts": by_layout})
        html(f"/species/{sp['id']}", "species.html", species=sp, stages=stages, labels=labels,
             states=data.coverage(OWN)["states"])

    index = []
    cov = data.coverage(OWN)
    for sp in data.species:
        ready = cov["readiness"].get((sp["id"], "adult")) or {}
        n = sum(1 for r in data.rows if r["species_id"] == sp["id"])
        index.append({"species": sp, "readiness": ready.get("readiness"), "rows": n, "stages": stage_of[sp["id"]]})
    html("/species", "species_index.html", entries=index)

    for r in data.rows:
        html(f"/values/{r['id']}", "value.html", row=r, shown=describe_value(r) or "no value",
             canonical=describe_canonical(r), labels=labels,
             sets=[set_url(r["species_id"], r["life_stage_id"], x) for x in LAYOUTS
                   if (r["species_id"], r["life_stage_id"], x) in sets])

    names = {sp["id"]: sp["common_name"] for sp in data.species}
    for layout in COVERAGE_LAYOUTS:
        cov = data.coverage(layout)
        stages = sorted({st for _, st in cov["keys"]}, key=lambda s: (s != "adult", s))
        for stage in stages:
            keys = sorted((k for k in cov["keys"] if k[1] == stage),
                          key=lambda k: (-cov["readiness"][k]["readiness"], names.get(k[0], k[0])))
            html(coverage_url(layout, stage), "coverage.html", cov=cov, stage=stage, stages=stages,
                 keys=keys, names=names, layout=layout)
    return pages


def write_pages(pages: Pages, folder: str | Path) -> Path:
    """Pages as files: an HTML page's URL plus .html, every other file under its URL."""
    folder = Path(folder)
    for url, (ctype, body) in pages.items():
        path = folder / (url.lstrip("/") + (".html" if ctype == CONTENT_TYPES["html"] else ""))
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(body)
    return folder
