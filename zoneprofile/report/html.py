"""The self-contained HTML report.

One file, no network: figures embedded as base64 PNG, style inline, no
scripts, no external fonts. Every piece of user text (sample and crystal
names, file names, warnings, parameters) goes through :func:`html.escape`.
"""

from __future__ import annotations

import base64
import html
import math
from collections import defaultdict
from pathlib import Path

from zoneprofile._units import format_days
from zoneprofile.report.provenance import (
    CAUTION,
    citation_text,
    range_text,
    render_value_html,
    status_is_confirmed,
)
from zoneprofile.report.style import CSS
from zoneprofile.report.timetext import resolved_text, time_range_text, time_statement

__all__ = ["build_html", "collect_warnings"]

# a long unbroken name (sample, crystal, file path, checksum) may break anywhere inside a table cell, so that
# no table grows wider than the page (tests/report/test_browser.py checks this at a 1400 px window)
_TABLE_CSS = "th,td{overflow-wrap:anywhere}"


def _e(x) -> str:
    return html.escape("" if x is None else str(x), quote=True)


def _num(x, digits: int = 3) -> str:
    if x is None:
        return ""
    if isinstance(x, bool):
        return "yes" if x else "no"
    try:
        v = float(x)
    except (TypeError, ValueError):
        return _e(x)
    if not math.isfinite(v):
        return ""
    return _e(f"{v:.{digits}g}")


def _table(header, rows, *, numeric=()) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = []
    for row in rows:
        cells = []
        for k, cell in enumerate(row):
            cls = ' class="num"' if k in numeric else ""
            cells.append(f"<td{cls}>{cell}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _img(png_path: Path, alt: str, caption: str) -> str:
    data = base64.b64encode(Path(png_path).read_bytes()).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{_e(alt)}">'
            f"<figcaption>{caption}</figcaption></figure>")


def _anchor(kind: str, k: int) -> str:
    return f"{kind}-{k}"


def collect_warnings(records, population=None) -> list[dict]:
    """Every warning of the run, each with where it comes from."""
    out = []
    for r in records:
        where = f"{r.get('sample')} / {r.get('crystal')}"
        for w in r.get("warnings") or []:
            out.append({"where": where, "item": "crystal", "text": w})
        for b in r.get("boundaries") or []:
            for w in b.get("warnings") or []:
                out.append({"where": where, "item": f"{b.get('element')} boundary at "
                            f"{_fmt_um(b.get('position_um'))}", "text": w})
        for iv in r.get("recharge_intervals_days") or []:
            for w in iv.get("warnings") or []:
                out.append({"where": where, "item": f"interval {_fmt_um(iv.get('outer_um'))} → "
                            f"{_fmt_um(iv.get('inner_um'))}", "text": w})
    for u in (population or {}).get("unresolved") or []:
        out.append({"where": f"{u.get('sample')} / {u.get('crystal')}",
                    "item": f"{u.get('element')} boundary at {_fmt_um(u.get('position_um'))}",
                    "text": u.get("note") or "time is only an upper bound; listed, left out of the ECDF and "
                                             "density"})
    return out


def _fmt_um(x) -> str:
    try:
        return f"{float(x):.1f} µm"
    except (TypeError, ValueError):
        return "? µm"


def _time_cell(td, key):
    return _e(format_days((td or {}).get(key)))


# --------------------------------------------------------------------------- sections
def _summary_section(records, population) -> str:
    from zoneprofile.report._crystal_html import counts as cm_counts

    by_sample = defaultdict(list)
    for r in records:
        by_sample[str(r.get("sample"))].append(r)
    rows = []

    def line(name, recs):
        ok = [r for r in recs if not r.get("error")]
        bs = [b for r in ok for b in (r.get("boundaries") or [])]
        ivs = [i for r in ok for i in (r.get("recharge_intervals_days") or [])]
        cm = [cm_counts(r) for r in ok]  # crystals dated by the whole-crystal model
        return [_e(name), str(len(recs)), str(len(ok)), str(len(recs) - len(ok)),
                str(len(bs) + sum(c[0] for c in cm)),
                str(sum(1 for b in bs if b.get("resolved", True)) + sum(c[1] for c in cm)),
                str(len(ivs) + sum(c[2] for c in cm))]

    for name in sorted(by_sample):
        rows.append(line(name, by_sample[name]))
    rows.append(["<strong>all samples</strong>", *line("", records)[1:]])
    parts = [_table(["sample", "crystals", "analysed", "failed", "dated boundaries", "resolved", "intervals"],
                    rows, numeric=range(1, 7))]
    from zoneprofile.report._crystal_html import glance_rows, model_of

    any_model = any(model_of(r).get("boundaries") for r in records)
    # with crystals dated by the whole-crystal model, the population's events (every crystal) come
    # first and the per-element ones (single fits only) are left to the chronology section
    ev_rows = glance_rows(population, format_days, _num) if any_model else []
    for block in ([] if any_model else (population.get("elements") or {}).values()):
        for e in block.get("events") or []:
            ev_rows.append([_e(e["id"]), _e(e.get("element")), _e(format_days(e.get("median_days"))),
                            f"{_e(format_days(e.get('p2_5_days')))} – {_e(format_days(e.get('p97_5_days')))}",
                            str(e.get("n_crystals")),
                            _num(100 * e["fraction_of_crystals"], 3) + " %" if e.get("fraction_of_crystals")
                            is not None else ""])
    if ev_rows:
        parts.append("<h3>Recharge events at a glance</h3>")
        parts.append(_table(["event", "element", "median time", "95% range", "crystals", "of all analysed"],
                            ev_rows, numeric=(4, 5)))
        parts.append('<p class="meta">Times are days before the eruption that quenched the crystals '
                     "(time since each boundary formed, at the stated temperatures).</p>")
    return "".join(parts)


def _chronology_section(population, pop_figs, records=(), paper=None) -> str:
    parts = []
    settings = population.get("settings") or {}
    parts.append(
        "<p>For each dated element: the empirical CDF of boundary times (medians) with its "
        "Dvoretzky–Kiefer–Wolfowitz band, a kernel density of log10(time) with a bootstrap band "
        "(crystals and time draws resampled), and the recharge events "
        f"({_e(settings.get('event_rule', ''))}). Method: <code>docs/chronology.md</code>.</p>")
    from zoneprofile.report.ladders import ladders_html

    parts.append(ladders_html(records, population))
    from zoneprofile.report.population_figures import paper_figures_html

    parts.append(paper_figures_html(paper, _img, _e))
    from zoneprofile.report._crystal_html import per_element_note

    parts.append(per_element_note(records))
    for el_key, block in (population.get("elements") or {}).items():
        parts.append(f"<h3>{_e(block.get('element') or el_key)}</h3>")
        figs = pop_figs.get(el_key) or {}
        if figs.get("chronology"):
            parts.append(_img(figs["chronology"], f"Chronology of {el_key}",
                              "Left: empirical CDF of boundary median times with the DKW band; per-sample "
                              "curves where there are several samples. Right: kernel density on "
                              "log10(time) with its 95% bootstrap band over crystals. Shaded spans: recharge events."))
        if figs.get("events"):
            parts.append(_img(figs["events"], f"Dated boundaries of {el_key}",
                              "Each dated boundary with its 95% interval, by crystal; symbols by event; "
                              "triangles: upper bounds only."))
        ev = block.get("events") or []
        samples = sorted({s for e in ev for s in (e.get("by_sample") or {})})
        if ev:
            rows = []
            for e in ev:
                fr = []
                for s in samples:
                    bs = (e.get("by_sample") or {}).get(s) or {}
                    fr.append(f"{bs.get('n_crystals', 0)}/{bs.get('n_analysed', 0)}")
                crystals = ", ".join(f"{c['sample']}/{c['crystal']}" for c in e.get("crystals") or [])
                rows.append([_e(e["id"]), _e(format_days(e.get("median_days"))),
                             f"{_e(format_days(e.get('p2_5_days')))} – {_e(format_days(e.get('p97_5_days')))}",
                             str(e.get("n_boundaries")), *[_e(f) for f in fr], _e(crystals)])
            parts.append("<h4>Events</h4>")
            parts.append(_table(["event", "median time", "95% range (pooled draws)", "boundaries",
                                 *[f"crystals in {s}" for s in samples], "crystals recording it"], rows))
        eiv = block.get("event_intervals") or []
        if eiv:
            parts.append("<h4>Time between events, from crystals recording both</h4>")
            parts.append(_table(
                ["from (younger)", "to (older)", "crystals", "median of crystal intervals", "range of medians"],
                [[_e(x["from_event"]), _e(x["to_event"]), str(x["n_crystals"]),
                  _e(format_days(x["median_of_medians_days"])),
                  f"{_e(format_days(x['min_median_days']))} – {_e(format_days(x['max_median_days']))}"]
                 for x in eiv], numeric=(2,)))
        srows = []
        for scope, s in [("all samples", block.get("campaign") or {}),
                         *sorted((block.get("samples") or {}).items())]:
            t = s.get("time_days") or {}
            ecdf = s.get("ecdf") or {}
            srows.append([_e(scope), str(s.get("n_crystals_dated", 0)), str(s.get("n_boundaries", 0)),
                          str(s.get("n_unresolved", 0)), _e(format_days(t.get("median_of_medians"))),
                          f"{_e(format_days(t.get('min')))} – {_e(format_days(t.get('max')))}",
                          _num(ecdf.get("halfwidth"), 2)])
        parts.append("<h4>Per sample</h4>")
        parts.append(_table(["scope", "crystals dated", "boundaries", "upper bounds", "median of medians",
                             "range of medians", "DKW half-width"], srows, numeric=(1, 2, 3, 6)))
    unres = population.get("unresolved") or []
    if unres:
        parts.append("<h4>Boundaries not dated: an upper bound only, or no bound</h4>")
        parts.append(_table(["sample", "crystal", "element", "position", "upper bound", "note"],
                            [[_e(u.get("sample")), _e(u.get("crystal")), _e(u.get("element")),
                              _e(_fmt_um(u.get("position_um"))),
                              _e(format_days(u["upper_bound_days"]) if u.get("upper_bound_days") else "none"),
                              _e(u.get("note") or "")]
                             for u in unres]))
    if not population.get("elements"):
        parts.append("<p>No dated boundary: nothing to summarise.</p>")
    return "".join(parts)


def _intervals_rows(records):
    rows = []
    for r in records:
        for iv in r.get("recharge_intervals_days") or []:
            rows.append([_e(r.get("sample")), _e(r.get("crystal")), _e(iv.get("element")),
                         _e(_fmt_um(iv.get("outer_um"))), _e(_fmt_um(iv.get("inner_um"))),
                         _e(format_days(iv.get("median"))),
                         f"{_e(format_days(iv.get('p2_5')))} – {_e(format_days(iv.get('p97_5')))}",
                         _num(iv.get("fraction_negative"), 2)])
    return rows


def _crystal_section(k, record, fig_png) -> str:
    name = f"{record.get('sample')} / {record.get('crystal')}"
    parts = [f'<section id="{_anchor("crystal", k)}"><h3>{_e(name)}</h3>',
             f'<p class="meta">mineral: {_e(record.get("mineral"))}; inputs: '
             + _e(", ".join(str(i.get("path")) for i in record.get("inputs") or []) or "none recorded")
             + "</p>"]
    if fig_png is not None:
        parts.append(_img(fig_png, f"Profile and fits of {name}",
                          "Top: profile with zones shaded, steps (solid: reverse, dotted: normal), "
                          "resorption surfaces (dash-dot; set beside a step at the same place), oscillatory "
                          "bands (hatched), dated boundaries (triangles); points flagged by QC hollow and grey, "
                          "never setting the axis range; the map where there is one. Below: each dated "
                          "boundary with data (bars: ±1 sd where known), best fit, the 95% model band and the "
                          "model's initial profile (dashed). For Mg, Sr and Ba in plagioclase that initial "
                          "profile is K(An)·C<sub>melt</sub> (Bindeman et al. 1998) at the measured An, "
                          "smoothed and sharpened at its step, so it follows the An zoning and shows a narrow "
                          "spike or dip where the An step (placed from the An analyses) and the fitted step of "
                          "the element do not coincide exactly: it is the condition the model started from, not "
                          "a fitted shape."))
    bs = record.get("boundaries") or []
    if bs:
        rows = []
        for b in bs:
            td = b.get("time_days") or {}
            ok = b.get("resolved", True)
            rows.append([_e(_fmt_um(b.get("position_um"))), _e(b.get("kind")), _e(b.get("element")),
                         _e(b.get("law")), _time_cell(td, "best") if ok else "—", _e(time_statement(td, ok)),
                         _e(time_range_text(td, ok, "p16", "p84")), _e(time_range_text(td, ok)),
                         _e(resolved_text(td, ok)), _num(b.get("obliquity_deg"), 3)])
        parts.append(_table(["boundary", "kind", "element", "law", "best", "median", "68% range", "95% range",
                             "resolved", "obliquity (°)"], rows))
    from zoneprofile.report._crystal_html import crystal_model_html

    cm_html = crystal_model_html(record, _table)
    parts.append(cm_html)
    if not bs and not cm_html:
        parts.append("<p>No boundary dated in this crystal.</p>")
    ivs = _intervals_rows([record])
    if ivs:
        parts.append("<h4>Time between recharge boundaries</h4>")
        parts.append(_table(["sample", "crystal", "element", "outer", "inner", "median", "95% range",
                             "fraction negative"], ivs, numeric=(7,)))
    ws = [w for w in collect_warnings([record])]
    if ws:
        parts.append('<ul class="warnings">' + "".join(
            f"<li>{_e(w['item'])}: {_e(w['text'])}</li>" for w in ws) + "</ul>")
    parts.append("</section>")
    return "".join(parts)


def _laws_section(laws, records, provenance) -> str:
    rows = []
    for law in laws:
        status = law.get("status")
        cls = "status-confirmed" if status_is_confirmed(status) else "status-other"
        cite = _e(law.get("citation"))
        if law.get("doi"):
            cite += f" doi:{_e(law['doi'])}"
        if law.get("formula"):
            cite += f"<br><code>{_e(law['formula'])}</code>"
        rows.append([f"<code>{_e(law.get('id'))}</code>", _e(law.get("element")), _e(law.get("mineral")),
                     cite, f'<span class="{cls}">{_e(str(status).lower())}</span>',
                     _e(range_text(law)), str(law.get("n_boundaries", 0))])
    parts = ["<p>Status <em>confirmed</em>: the law's numbers were checked against the publication; "
             "<em>from memory</em> or <em>secondary</em>: recalled or seen only in a secondary source, "
             "to be checked before a result is relied on.</p>"]
    parts.append(_table(["law", "element", "mineral", "citation", "status", "calibrated range",
                         "boundaries dated"], laws and rows or [["", "", "", "no law used", "", "", ""]],
                        numeric=(6,)))
    params = (provenance or {}).get("parameters")
    if isinstance(params, dict) and any(r.get("parameters") for r in records):
        params = {k: v for k, v in params.items() if k != "crystals"}  # shown per crystal below
    if params:
        parts.append("<h4>Campaign parameters</h4>")
        parts.append(render_value_html(params))
    from zoneprofile.report.widetables import settings_tables_html  # shared once, the rest split narrow

    parts.append(settings_tables_html(records, table=_table, render=render_value_html, escape=_e))
    return "".join(parts)


def _provenance_section(provenance) -> str:
    prov = dict(provenance or {})
    parts = []
    sw = prov.pop("software", None)
    if sw is not None:
        parts.append("<h4>Software</h4>" + render_value_html(sw))
    inputs = prov.pop("inputs", None) or []
    if inputs:
        rows = [[_e(i.get("sample")), _e(i.get("crystal")), _e(i.get("role")), f"<code>{_e(i.get('path'))}</code>",
                 f"<code>{_e(i.get('sha256'))}</code>"] for i in inputs if isinstance(i, dict)]
        parts.append("<h4>Input files</h4>")
        parts.append(_table(["sample", "crystal", "role", "file", "SHA-256"], rows))
    for key in ("laws", "caution", "parameters"):
        prov.pop(key, None)
    if prov:
        parts.append("<h4>Run</h4>" + render_value_html(prov))
    return "".join(parts)


def build_html(records, population, provenance, *, laws, crystal_pngs, population_pngs, title=None,
               paper_figures=None) -> str:
    """Assemble the report page.

    ``crystal_pngs`` maps the record index to its PNG file (or None);
    ``population_pngs`` is the dict returned by ``render_population_figures``;
    ``paper_figures`` the files of ``population_figures.render_paper_figures``.
    """
    title = title or (provenance or {}).get("title") or "Recharge chronology report"
    sw = (provenance or {}).get("software") or {}
    version = sw.get("version") if isinstance(sw, dict) else sw
    created = (provenance or {}).get("created_utc")
    ok = [(k, r) for k, r in enumerate(records) if not r.get("error")]
    failed = [r for r in records if r.get("error")]
    warnings = collect_warnings(records, population)

    nav = [("caution", "Caution"), ("summary", "Summary"), ("chronology", "Recharge chronology"),
           ("intervals", "Time between recharges"), ("crystals", "Crystals"),
           ("failed", f"Failed crystals ({len(failed)})"), ("warnings", f"Warnings ({len(warnings)})"),
           ("laws", "Laws and parameters"), ("provenance", "Provenance"), ("cite", "How to cite")]
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>{_e(title)}</title><style>{CSS}{_TABLE_CSS}</style></head><body><main>",
           f"<h1>{_e(title)}</h1>",
           f'<p class="meta">zoneprofile {_e(version or "")}'
           + (f" · run {_e(created)}" if created else "")
           + f" · {len(records)} crystals in {len({str(r.get('sample')) for r in records})} samples</p>",
           "<nav><ul>" + "".join(f'<li><a href="#{a}">{_e(t)}</a></li>' for a, t in nav) + "</ul></nav>"]
    out.append(f'<section id="caution"><h2>Caution</h2><div class="caution"><p>{_e(CAUTION)}</p></div></section>')
    out.append(f'<section id="summary"><h2>Summary</h2>{_summary_section(records, population)}</section>')
    out.append(f'<section id="chronology"><h2>Recharge chronology</h2>'
               f"{_chronology_section(population, population_pngs, records, paper_figures)}</section>")
    iv_rows = _intervals_rows(records)
    from zoneprofile.report._crystal_html import gap_rows

    cm_gaps = gap_rows(records)
    out.append('<section id="intervals"><h2>Time between recharges</h2>'
               + ("<p>Whole-crystal model: the gap between successive recharges of a crystal, a parameter of "
                  "its model (positive by construction), with its 95% interval or a bound.</p>"
                  + _table(["sample", "crystal", "older", "younger", "statement", "gap (95% interval) or bound"],
                           cm_gaps) if cm_gaps else "")
               + ("<p>Single-boundary fits: inner minus outer boundary time per Monte Carlo draw (draws of one "
                  "crystal share the temperature draw), summarised by percentiles; negative draws are kept and "
                  "reported.</p>" + _table(["sample", "crystal", "element", "outer", "inner", "median", "95% range",
                                            "fraction negative"], iv_rows, numeric=(7,)) if iv_rows
                  else "" if cm_gaps else "<p>No crystal has two dated boundaries of one element.</p>")
               + "</section>")
    out.append('<section id="crystals"><h2>Crystals</h2>')
    if ok:
        out.append("<ul>" + "".join(
            f'<li><a href="#{_anchor("crystal", k)}">{_e(r.get("sample"))} / {_e(r.get("crystal"))}</a></li>'
            for k, r in ok) + "</ul>")
    else:
        out.append("<p>No crystal ran to the end; see the failed crystals below.</p>")
    for k, r in ok:
        out.append(_crystal_section(k, r, crystal_pngs.get(k)))
    out.append("</section>")
    out.append('<section id="failed"><h2>Failed crystals</h2>')
    if failed:
        out.append(_table(["sample", "crystal", "reason"],
                          [[_e(r.get("sample")), _e(r.get("crystal")), _e(r.get("error"))] for r in failed]))
        for k, r in enumerate(records):  # what was read and zoned before the failure
            if r.get("error") and crystal_pngs.get(k) is not None:
                name = f"{r.get('sample')} / {r.get('crystal')}"
                out.append(_img(crystal_pngs[k], f"What was read and zoned of {name}",
                                f"{_e(name)} (failed: {_e(r.get('error'))}): the profile as read and the "
                                "zoning found before the failure; nothing was dated."))
    else:
        out.append("<p>None: every crystal ran to the end.</p>")
    out.append("</section>")
    out.append('<section id="warnings"><h2>Warnings</h2>')
    if warnings:
        out.append(_table(["crystal", "item", "warning"],
                          [[_e(w["where"]), _e(w["item"]), _e(w["text"])] for w in warnings]))
    else:
        out.append("<p>No warnings.</p>")
    out.append("</section>")
    out.append(f'<section id="laws"><h2>Laws and parameters</h2>{_laws_section(laws, records, provenance)}'
               "</section>")
    out.append(f'<section id="provenance"><h2>Provenance</h2>{_provenance_section(provenance)}</section>')
    out.append(f'<section id="cite"><h2>How to cite</h2><p>{_e(citation_text(provenance))}</p>'
               "<p>Keep <code>results.json</code> and the <code>tables/</code> folder with the paper's "
               "supplement: they hold every number shown here and the checksums of the inputs. "
               '<a href="supplement.xlsx">supplement.xlsx</a> holds the same tables as one workbook, '
               "rounded to the digits each uncertainty supports, with units in the header row.</p>"
               f'<div class="caution"><p>{_e(CAUTION)}</p></div></section>')
    out.append("</main></body></html>")
    return "\n".join(out)
