"""The report: HTML page, results.json, supplement tables, figures, provenance.

The public surface:

* :func:`write_outputs` — everything into an existing output folder.
* :func:`render_crystal_figure`, :func:`render_population_figures` — figures alone.
* :func:`results_json` — the JSON document (records without curves and draws).
* table builders: :func:`zones_table`, :func:`fits_table`, :func:`intervals_table`,
  :func:`crystals_table`, :func:`events_table`.
* :data:`CAUTION` — the hazard caution every report carries.

The report computes no science: it lays out crystal records and the
population summary of :mod:`zoneprofile.chronology`.
"""

from __future__ import annotations

from pathlib import Path

from zoneprofile._output import write_json, write_text
from zoneprofile._units import format_days  # the one time formatter (re-exported for the report's users)
from zoneprofile._validation import InputError
from zoneprofile.report.figures import (
    FIGURE_FORMATS,
    render_crystal_figure,
    render_population_figures,
    slug,
)
from zoneprofile.report.html import build_html, collect_warnings
from zoneprofile.report.provenance import CAUTION, complete_provenance, law_entries
from zoneprofile.report.tables import (
    crystals_table,
    events_table,
    fits_table,
    intervals_table,
    write_tables,
    zones_table,
)

__all__ = [
    "write_outputs",
    "results_json",
    "render_crystal_figure",
    "render_population_figures",
    "crystal_figure_name",
    "zones_table",
    "fits_table",
    "intervals_table",
    "crystals_table",
    "events_table",
    "collect_warnings",
    "law_entries",
    "format_days",
    "CAUTION",
]

_DROP_BOUNDARY = ("curve", "time_draws_days")


def _clean_record(record: dict) -> dict:
    rec = dict(record)
    rec["boundaries"] = [{k: v for k, v in b.items() if k not in _DROP_BOUNDARY}
                         for b in (record.get("boundaries") or [])]
    m = rec.get("map")
    if isinstance(m, dict) and "image" in m:
        m = {k: v for k, v in m.items() if k != "image"}
        m["image"] = "omitted (array)"
        rec["map"] = m
    cm = rec.get("crystal_model")
    if isinstance(cm, dict) and "curves" in cm:  # the model's profiles stay in the cache, as fit curves do
        rec["crystal_model"] = {k: v for k, v in cm.items() if k != "curves"}
    rec.setdefault("error", None)
    rec.setdefault("recharge_intervals_days", [])
    return rec


def results_json(records, population, provenance) -> dict:
    """The ``results.json`` document: ``crystals``, ``population``, ``provenance``.

    Boundary curves and Monte Carlo draws stay in the per-crystal cache; they
    are not written here.
    """
    return {
        "crystals": [_clean_record(r) for r in records],
        "population": population,
        "provenance": complete_provenance(provenance, records),
    }


def crystal_figure_name(record, index: int) -> str:
    """Base file name (no suffix) of a crystal's figure, unique by record index."""
    return f"crystal-{index + 1:03d}-{slug(record.get('sample', ''))}-{slug(record.get('crystal', ''))}"


def _formats(formats) -> list[str]:
    fmts = []
    for f in ("png", *formats):
        f = str(f).lower().lstrip(".")
        if f not in FIGURE_FORMATS:
            message = f"unknown figure format '{f}'; choose from {', '.join(FIGURE_FORMATS)}"
            raise InputError(message)
        if f not in fmts:
            fmts.append(f)
    return fmts


def write_outputs(records, population, provenance, out_dir, *, formats=("png", "svg"), title=None,
                  crystal_figures=None, crystal_formats=None, map_dir=None, figure_width="double") -> dict:
    """Write the report, results.json, tables and figures into ``out_dir``.

    Parameters
    ----------
    records : list of dict
        Crystal records (layout in ``docs/report.md``); failed crystals carry
        ``error`` and are reported with their reason.
    population : dict
        The result of :func:`zoneprofile.chronology.population_summary`.
    provenance : dict
        ``software {name, version}``, ``inputs [{path, sha256, role, sample,
        crystal}]``, ``parameters``, ``laws`` (list of ``{id, element,
        mineral, citation, status, range}`` or dict id -> that), optional
        ``title``, ``created_utc``, ``campaign_file``, ``command``. Missing
        laws are looked up in the diffusion registry.
    out_dir : path-like
        An existing folder (typically the temporary folder of an atomic run).
    formats : sequence of {"png", "svg", "pdf"}
        Figure formats written to ``figures/``; PNG is always made (the HTML
        embeds it).
    title : str, optional
        Page title (default ``provenance["title"]`` or a generic title).
    crystal_figures : dict, optional
        ``{record index: path of an already rendered PNG}`` (e.g. drawn by
        parallel workers); those crystals are not drawn again.
    crystal_formats : sequence, optional
        Formats of the crystal figures if different from ``formats`` (PNG is
        always made). A crystal figure costs about 25 ms (PNG) and 5 ms
        (SVG) of CPU on the development machine.
    map_dir : path-like, optional
        Folder that ``map.image_png`` paths are relative to; default ``out_dir``.
    figure_width : {"single", "double"}
        Print width of every figure (crystal, chronology, events, and the
        population's paper figures ``ladders``, ``profiles-N``): one journal
        column (90 mm) or two (180 mm).

    Returns
    -------
    dict
        ``{"files": [relative paths written], "report": Path, "results": Path,
        "figures": [...], "tables": [...]}``.
    """
    out = Path(out_dir)
    if not out.is_dir():
        message = "output folder does not exist; create it first"
        raise InputError(message, path=out)
    fmts = _formats(formats)
    crystal_fmts = fmts if crystal_formats is None else _formats(crystal_formats)
    records = list(records or [])
    population = population or {}
    fig_dir = out / "figures"
    fig_dir.mkdir(exist_ok=True)
    map_dir = out if map_dir is None else Path(map_dir)

    figures = []
    crystal_pngs = {}
    given = crystal_figures or {}
    for k, rec in enumerate(records):
        if rec.get("error") and not rec.get("profile"):
            continue  # failed before anything was read: nothing to draw
        if k in given and given[k] is not None:
            p = Path(given[k])
            p = p if p.is_absolute() else out / p
            crystal_pngs[k] = p
            for fmt in crystal_fmts:  # list the files drawn elsewhere that live in this folder
                sibling = p.with_suffix("." + fmt)
                if sibling.is_file() and sibling.resolve().is_relative_to(out.resolve()):
                    figures.append(sibling)
            continue
        paths = render_crystal_figure(rec, fig_dir / (crystal_figure_name(rec, k) + ".png"),
                                      formats=crystal_fmts, map_dir=map_dir, width=figure_width)
        figures += paths
        crystal_pngs[k] = next(p for p in paths if p.suffix == ".png")
    pop = render_population_figures(population, fig_dir, formats=fmts, width=figure_width)
    pop_pngs = {}
    for el, d in pop.items():
        figures += d["chronology"] + d["events"]
        pop_pngs[el] = {kind: next(p for p in paths if p.suffix == ".png") for kind, paths in d.items()}
    from zoneprofile.report.population_figures import render_paper_figures

    paper = render_paper_figures(records, population, fig_dir, formats=fmts, width=figure_width)
    figures += paper.files

    tables = write_tables(records, population, out / "tables")
    doc = results_json(records, population, provenance)
    from zoneprofile.report.supplement import write_supplement

    tables.append(write_supplement(records, population, doc["provenance"], out / "supplement.xlsx"))
    results = write_json(out / "results.json", doc)
    page = build_html(records, population, doc["provenance"], laws=doc["provenance"]["laws"],
                      crystal_pngs=crystal_pngs, population_pngs=pop_pngs, title=title,
                      paper_figures=paper)
    report = write_text(out / "report.html", page)
    files = [p.resolve().relative_to(out.resolve()).as_posix() for p in [report, results, *tables, *figures]]
    return {"files": files, "report": report, "results": results, "figures": figures, "tables": tables}
