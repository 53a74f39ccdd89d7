"""Figures of the whole population for a paper: the event ladders and the dated profiles.

Two figures, drawn on the report's canvas (:mod:`zoneprofile.report._canvas`)
in the report's palette (:mod:`zoneprofile.report.style`), at a print width
(single column 90 mm, double column 180 mm), written the figure system's way
(as :func:`zoneprofile.report.figures.canvas_bytes`: PNG at 300 dpi, SVG with its
size in points and text as text, PDF on request):

* **event ladders** (``ladders.*``): every crystal that has a dated boundary or
  a bound, one row each, grouped by sample (sample names on the left, a thin
  rule between samples), on one log-time axis. A date is its median (the
  event's symbol) and its 95 % interval (a bar); an upper bound is a bar at
  the bound with an arrow to younger ages, a lower bound an arrow to older
  ages, a boundary bounded both ways a dashed bar between its bounds. The
  population's events (:func:`zoneprofile.event_model.population_events`,
  ``population["events"]``) are the shaded spans of their 95 % age interval,
  each with a legend entry. The ages are the crystal record's own numbers
  (the whole-crystal model's ``age_days`` or the single fit's ``time_days``),
  the event of each boundary the population model's.
* **dated profiles** (``profiles-N.*``): one small panel per crystal of the
  ladder figure: the dated element along the traverse, the best-fit curve of
  each single-boundary fit or the whole-crystal model's profile
  (``crystal_model.curves``), the boundaries marked by event, and the ages in
  the panel title. Pages of 24 panels (double column) or 10 (single column).

Large populations: rows shrink to fit one page height (crystal names are
written while a row is at least 7 pt high; below that only the sample names),
so 200 crystals still make one readable ladder figure. The decisions are in
``docs/report.md`` ("Figures of the population").
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from zoneprofile._limits import FIGURE_PNG_DPI, FIGURE_WIDTH_IN
from zoneprofile._output import write_bytes
from zoneprofile._units import format_days
from zoneprofile.report._canvas import DPI, PT, Axes, Canvas, legend_columns, nice_ticks, text_width, tick_labels
from zoneprofile.report.style import COLOURS, EVENT_FILLS, LABELS, SERIES

__all__ = ["WIDTHS_MM", "PRINT_DPI", "PANELS_PER_PAGE", "ladder_crystals", "ladder_figure", "profile_pages",
           "paper_figures_html",
           "render_paper_figures", "PaperFigures"]

#: print widths of a journal figure (mm), as the figure system draws them (``_limits.FIGURE_WIDTH_IN``)
WIDTHS_MM = {k: round(v * 25.4) for k, v in FIGURE_WIDTH_IN.items()}
#: resolution of the PNG files (dots per inch), the figure system's
PRINT_DPI = FIGURE_PNG_DPI
#: small panels per page of the dated-profiles figure, by width: (columns, rows)
PANEL_GRID = {"single": (2, 5), "double": (4, 6)}
PANELS_PER_PAGE = {k: c * r for k, (c, r) in PANEL_GRID.items()}

MM = DPI / 25.4  # canvas pixels per millimetre
_MAX_ROWS_MM = 200.0  # ladder rows fit this height (a page less the caption)
_LABEL_PITCH_PT = 7.5  # a row at least this high gets its crystal's name
_MIN_PITCH_PT = 1.2
_TIME_LABEL = "time since boundary formed (days, log scale)"

# one symbol and one colour per event, as the report's event figure: E1 blue circle, E2 vermilion square, ...
_EVENT_MARKERS = ("o", "s", "^", "D", "v", "P", "X")
_EVENT_COLOURS = (COLOURS["blue"], COLOURS["vermilion"], COLOURS["green"], COLOURS["purple"], COLOURS["orange"],
                  COLOURS["sky"], COLOURS["black"])
_NO_EVENT = (SERIES["unresolved"][0], "o")


def _width_px(width) -> float:
    """Canvas pixels of a print width, the choice checked (as ``figures.figure_width_px``, which this module
    does not import: report.figures reaches the campaign package, and the report page imports this module)."""
    from zoneprofile._limits import check_choice

    return FIGURE_WIDTH_IN[check_choice("figure_width", width, "figure width")] * DPI


def _natural(text) -> tuple:
    """Sort key that orders ``c2`` before ``c10``."""
    return tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in re.split(r"(\d+)", str(text)) if p)


def _pos(x) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) and v > 0 else None


# --------------------------------------------------------------------------- data
def _record_time(record, member) -> dict:
    """The crystal record's own time summary of a population member (its age as the crystal dated it).

    Whole-crystal model: the boundary's ``age_days`` (matched by id). Single fits: the fit of the
    member's element at the member's position (within 1 µm). Else the member's own summary.
    """
    if member.get("source") == "crystal model":
        for b in (record.get("crystal_model") or {}).get("boundaries") or []:
            if isinstance(b, dict) and b.get("id") == member.get("boundary") and isinstance(b.get("age_days"), dict):
                return b["age_days"]
    else:
        x = _pos(member.get("position_um")) if member.get("position_um") else None
        for b in record.get("boundaries") or []:
            bx = b.get("position_um") if isinstance(b, dict) else None
            if (x is not None and isinstance(bx, (int, float)) and abs(float(bx) - x) <= 1.0
                    and b.get("element") == member.get("element") and isinstance(b.get("time_days"), dict)):
                td = dict(b["time_days"])
                if not b.get("resolved", True) and td.get("statement") is None:
                    td = {"statement": "upper_bound", "upper_bound": td.get("upper_bound", td.get("p97_5"))}
                return td
    return member.get("time_days") or {}


def _step(record, member) -> dict:
    td = _record_time(record, member)
    st = td.get("statement") or member.get("statement")
    if st not in ("date", "upper_bound", "lower_bound"):
        st = "date" if _pos(td.get("median")) else member.get("statement")
    out = {"boundary": member.get("boundary"), "event": member.get("event"), "element": member.get("element"),
           "position_um": member.get("position_um"), "source": member.get("source"), "kind": "none",
           "median": None, "p2_5": None, "p97_5": None, "upper": None, "lower": None}
    if st == "date" and _pos(td.get("median")) and _pos(td.get("p2_5")) and _pos(td.get("p97_5")):
        out.update(kind="date", median=float(td["median"]), p2_5=float(td["p2_5"]), p97_5=float(td["p97_5"]))
        return out
    up, low = _pos(td.get("upper_bound")), _pos(td.get("lower_bound"))
    mtd = member.get("time_days") or {}  # an interval of bounds from several elements lives in the member only
    up = up or _pos(mtd.get("upper_bound"))
    low = low or _pos(mtd.get("lower_bound"))
    if up and low:
        out.update(kind="between", upper=up, lower=low)
    elif up:
        out.update(kind="upper", upper=up)
    elif low:
        out.update(kind="lower", lower=low)
    return out


def ladder_crystals(records, population) -> list[dict]:
    """Crystals of the ladder figure, sample by sample in natural order.

    Each: ``{"sample", "crystal", "record", "steps"}``, ``steps`` oldest first, each
    ``{"boundary", "event", "kind" ("date" | "upper" | "lower" | "between" | "none"), "median",
    "p2_5", "p97_5", "upper", "lower", "position_um", "element", "source"}``. A crystal is in
    when the population's event model has at least one of its boundaries (a date or a bound).
    """
    by_key = {}
    for r in records or []:
        if not r.get("error"):
            by_key.setdefault((str(r.get("sample", "")), str(r.get("crystal", ""))), r)
    members = {}
    for m in ((population or {}).get("events") or {}).get("members") or []:
        members.setdefault((str(m.get("sample")), str(m.get("crystal"))), []).append(m)
    out = []
    for key in sorted(members, key=lambda k: (_natural(k[0]), _natural(k[1]))):
        rec = by_key.get(key, {})
        steps = [_step(rec, m) for m in members[key]]
        steps = [s for s in steps if s["kind"] != "none"]
        if steps:
            out.append({"sample": key[0], "crystal": key[1], "record": rec, "steps": steps})
    return out


def _events(population) -> list[dict]:
    return [e for e in ((population or {}).get("events") or {}).get("events") or [] if isinstance(e, dict)]


def _event_style(events):
    index = {e.get("id"): k for k, e in enumerate(events)}

    def style(event_id):
        k = index.get(event_id)
        if k is None:
            return _NO_EVENT
        return _EVENT_COLOURS[k % len(_EVENT_COLOURS)], _EVENT_MARKERS[k % len(_EVENT_MARKERS)]

    return style


# --------------------------------------------------------------------------- drawing helpers
def _arrow_head(canvas, x, y, direction, colour, size_pt=4.0):
    """A filled arrow head with its tip at (x, y), pointing left (-1) or right (+1)."""
    length = size_pt * PT
    half = 0.42 * length
    canvas.polygon([x, x - direction * length, x - direction * length], [y, y - half, y + half], colour)


def _bound_arrow(canvas, ax, value, y, direction, colour, *, width_pt, half_h):
    """A bound: a bar at ``value`` and an arrow a third of a decade long towards the allowed ages."""
    px = float(ax.x(value))
    tip = float(ax.x(value * 10.0 ** (direction / 3.0)))
    canvas.segments([px], [y - half_h], [px], [y + half_h], colour, width_pt)
    canvas.segments([px], [y], [tip], [y], colour, width_pt)
    _arrow_head(canvas, tip, y, direction, colour, size_pt=max(2.5, min(4.0, 2 * half_h / PT + 1.5)))


def _log_limits(values):
    v = np.asarray([x for x in values if x is not None and math.isfinite(x) and x > 0], dtype=float)
    if not v.size:
        return 1.0, 1000.0
    a, b = math.log10(v.min()), math.log10(v.max())
    if b - a < 0.5:
        a, b = (a + b) / 2 - 0.25, (a + b) / 2 + 0.25
    pad = 0.05 * (b - a)
    return 10.0 ** (a - pad), 10.0 ** (b + pad)


def _key(canvas, entries, *, left, top, max_width, size_pt=6.5):
    """Legend rows: ``(label, draw)`` where ``draw(canvas, x0, x1, y)`` paints the handle; returns the bottom."""
    size = size_pt * PT
    handle_w, gap, col_gap, row_h = 2.2 * size, 0.7 * size, 1.8 * size, 1.5 * size
    widths = [handle_w + gap + text_width(label, size_pt) for label, _ in entries]
    if not entries:
        return top
    cols = legend_columns(widths, col_gap, max_width)
    ncol = len(cols)
    for k, (label, draw) in enumerate(entries):
        r, c = divmod(k, ncol)
        x = left + sum(cols[:c]) + col_gap * c
        y = top + r * row_h + row_h / 2
        draw(canvas, x, x + handle_w, y)
        canvas.text(x + handle_w + gap, y, label, size_pt, va="center")
    return top + math.ceil(len(entries) / ncol) * row_h


# --------------------------------------------------------------------------- the ladder figure
@dataclass
class LadderFigure:
    """The drawn ladder figure: its canvas, the time axes, and each crystal's row (pixel y)."""

    canvas: Canvas
    axes: Axes | None
    rows: dict = field(default_factory=dict)  # (sample, crystal) -> y of the row centre (pixels)
    n_crystals: int = 0


def ladder_figure(records, population, *, width: str = "double") -> LadderFigure:
    """All crystals' event ladders on one log-time axis, grouped by sample, with the population's events."""
    crystals = ladder_crystals(records, population)
    events = _events(population)
    style = _event_style(events)
    fig_w = _width_px(width)
    canvas = Canvas(fig_w, 1)
    pad = 3 * MM
    n = len(crystals)
    canvas.text(pad, pad, "Recharge events and each crystal's dated boundaries", 8.5, va="top")
    if not n:
        canvas.text(fig_w / 2, 16 * MM, "no dated boundary", 7, ha="center", va="center")
        canvas.height = int(28 * MM)
        return LadderFigure(canvas, None)

    # ---- rows: one per crystal, samples separated by a gap and a rule
    samples = []
    for c in crystals:
        if not samples or samples[-1][0] != c["sample"]:
            samples.append((c["sample"], []))
        samples[-1][1].append(c)
    n_groups = len(samples)
    budget = _MAX_ROWS_MM * MM
    pitch = min(11.0 * PT, max(_MIN_PITCH_PT * PT, (budget - (n_groups - 1) * 5.0 * PT) / n))
    labelled = pitch >= _LABEL_PITCH_PT * PT
    group_gap = (0.8 * pitch if labelled else 4.0 * PT) if n_groups > 1 else 0.0
    min_group = 0.0 if labelled else 8.0 * PT  # room for a sample name beside a short group

    # ---- margins: sample names, crystal names
    name_pt, crystal_pt = 7.0, 6.0
    sample_names = [_short(s, 22) for s, _ in samples]
    sample_w = max(text_width(s, name_pt) for s in sample_names)
    crystal_w = max((text_width(_short(c["crystal"], 14), crystal_pt) for c in crystals), default=0.0) \
        if labelled else 0.0
    box_left = pad + sample_w + 4 + (crystal_w + 4 if labelled else 0.0) + 3
    box_right = fig_w - pad - 4
    sub = _wrap(f"{n} crystals in {n_groups} samples, one row each" + ("" if labelled else
                " (rows too thin for names)") + "; shaded: population events (95% age)", 6.0, fig_w - 2 * pad)
    canvas.text(pad, pad + 9 * PT + 1, sub, 6.0, va="top", colour="#333333")
    box_top = pad + 9 * PT + 1 + (sub.count("\n") + 1) * 7.2 * PT + 8

    y = 0.0
    rows, separators, group_mid = {}, [], []
    for g, (_, members) in enumerate(samples):
        if g:
            separators.append(y + group_gap / 2)
            y += group_gap
        start = y
        height = max(pitch * len(members), min_group)
        offset = (height - pitch * len(members)) / 2
        for k, c in enumerate(members):
            rows[(c["sample"], c["crystal"])] = start + offset + (k + 0.5) * pitch
        y = start + height
        group_mid.append((start + y) / 2)
    total = y
    values = [v for c in crystals for s in c["steps"] for v in (s["median"], s["p2_5"], s["p97_5"],
                                                                 s["upper"], s["lower"])]
    values += [(e.get("age_days") or {}).get(k) for e in events for k in ("p2_5", "p97_5")]
    xlim = _log_limits(values)
    xlim = (xlim[0] / 10 ** (1 / 3.0), xlim[1] * 10 ** (1 / 3.0))  # room for the bound arrows
    ax = Axes(canvas, (box_left, box_top, box_right, box_top + total), xlim, (0.0, max(total, 1.0)),
              inverted=True, xlog=True)
    ax.set_ticks("y", [], [], size_pt=6)
    for px in rows:
        rows[px] = float(ax.y(rows[px]))
    x0, y0, x1, y1 = ax.box

    # ---- events: shaded 95 % spans under everything
    entries = []
    for k, e in enumerate(events):
        age = e.get("age_days") or {}
        lo, hi = _pos(age.get("p2_5")), _pos(age.get("p97_5"))
        fill = EVENT_FILLS[k % len(EVENT_FILLS)]
        colour, marker = style(e.get("id"))
        if lo and hi:
            ax.vspan(lo, hi, fill)
        label = f"{e.get('id')}: {format_days(age.get('median'))} (95%: {_range(lo, hi)})"

        def patch(cv, a, b, yy, fill=fill, colour=colour, marker=marker):
            cv.rect(a, yy - 2.6 * PT, b, yy + 2.6 * PT, fill=fill)
            cv.markers([(a + b) / 2], [yy], marker, 3.6, colour)

        entries.append((label, patch))
    ax.grid()
    for sy in separators:
        py = float(ax.y(sy))
        canvas.line([x0 - sample_w - (crystal_w + 4 if labelled else 0) - 7, x1], [py, py], COLOURS["grey"], 0.5)

    # ---- the ladders
    lw = 0.8 if labelled else max(0.35, min(0.8, pitch / PT * 0.3))
    ms = 3.6 if labelled else max(1.4, min(3.6, pitch / PT * 1.2))
    half_h = min(2.2 * PT, 0.32 * pitch)
    kinds = set()
    for c in crystals:
        yc = rows[(c["sample"], c["crystal"])]
        m = len(c["steps"])
        spread = min(0.36 * pitch, 2.6 * PT) if labelled and m > 1 else 0.0
        ends = []
        for j, s in enumerate(c["steps"]):
            yj = yc + (spread * (j / (m - 1) - 0.5) if m > 1 else 0.0)
            colour, marker = style(s["event"])
            kinds.add(s["kind"])
            if s["kind"] == "date":
                lo, hi, med = (float(v) for v in ax.x([s["p2_5"], s["median"], s["p97_5"]])[[0, 2, 1]])
                canvas.segments([lo], [yj], [hi], [yj], colour, lw)
                canvas.segments([lo, hi], [yj - half_h] * 2, [lo, hi], [yj + half_h] * 2, colour, lw)
                canvas.markers([med], [yj], marker, ms, colour)
                ends += [lo, hi]
            elif s["kind"] == "upper":
                _bound_arrow(canvas, ax, s["upper"], yj, -1, colour, width_pt=lw, half_h=half_h)
                ends += [float(ax.x(s["upper"]))]
            elif s["kind"] == "lower":
                _bound_arrow(canvas, ax, s["lower"], yj, +1, colour, width_pt=lw, half_h=half_h)
                ends += [float(ax.x(s["lower"]))]
            elif s["kind"] == "between":
                a, b = (float(v) for v in ax.x([s["lower"], s["upper"]]))
                canvas.line([a, b], [yj, yj], colour, lw, dash="--")
                canvas.segments([a, b], [yj - half_h] * 2, [a, b], [yj + half_h] * 2, colour, lw)
                ends += [a, b]
        if labelled:
            canvas.text(x0 - 4, yc, _short(c["crystal"], 14), crystal_pt, ha="right", va="center")
    for name, mid in zip(sample_names, group_mid):
        canvas.text(pad, float(ax.y(mid)), name, name_pt, va="center")

    grey = COLOURS["black"]
    if "date" in kinds:
        def date_key(cv, a, b, yy):
            cv.segments([a + 2, b - 2], [yy - 2 * PT] * 2, [a + 2, b - 2], [yy + 2 * PT] * 2, grey, 0.8)
            cv.segments([a + 2], [yy], [b - 2], [yy], grey, 0.8)
            cv.markers([(a + b) / 2], [yy], "o", 3.6, grey)

        entries.append(("date: median and 95% interval (symbol: event)", date_key))
    if "upper" in kinds:
        def up_key(cv, a, b, yy):
            cv.segments([b - 2, b - 2], [yy - 2 * PT, yy], [b - 2, a + 4 * PT], [yy + 2 * PT, yy], grey, 0.8)
            _arrow_head(cv, a + 4 * PT, yy, -1, grey)

        entries.append(("upper bound (younger than)", up_key))
    if "lower" in kinds:
        def low_key(cv, a, b, yy):
            cv.segments([a + 2, a + 2], [yy - 2 * PT, yy], [a + 2, b - 4 * PT], [yy + 2 * PT, yy], grey, 0.8)
            _arrow_head(cv, b - 4 * PT, yy, +1, grey)

        entries.append(("lower bound (older than)", low_key))
    if "between" in kinds:
        def both_key(cv, a, b, yy):
            cv.line([a + 2, b - 2], [yy, yy], grey, 0.8, dash="--")
            cv.segments([a + 2, b - 2], [yy - 2 * PT] * 2, [a + 2, b - 2], [yy + 2 * PT] * 2, grey, 0.8)

        entries.append(("bounded both ways", both_key))
    ax.frame(xlabel="", ylabel="", title=None)
    label_y = y1 + 3.5 * PT + 3 + 8 * PT + 4
    half = text_width(_TIME_LABEL, 7.5) / 2
    canvas.text(min(max((x0 + x1) / 2, pad + half), fig_w - pad - half), label_y, _TIME_LABEL, 7.5, ha="center",
                va="top")
    bottom = _key(canvas, entries, left=pad, top=label_y + 7.5 * PT + 6,
                  max_width=fig_w - 2 * pad)
    canvas.height = int(math.ceil(bottom + pad))
    return LadderFigure(canvas, ax, rows, n)


def _wrap(text, size_pt, width) -> str:
    """``text`` broken at spaces into lines no wider than ``width`` pixels."""
    lines = [""]
    for word in text.split(" "):
        trial = f"{lines[-1]} {word}".strip()
        if lines[-1] and text_width(trial, size_pt) > width:
            lines.append(word)
        else:
            lines[-1] = trial
    return "\n".join(lines)


def _short(text, n) -> str:
    text = str(text)
    return text if len(text) <= n else text[:n - 1] + "…"


def _range(lo, hi) -> str:
    from zoneprofile._units import format_days_range

    return format_days_range(lo, hi)


# --------------------------------------------------------------------------- the dated profiles
def _element_series(record, element):
    """(distance, values, label) of ``element`` along the whole traverse, or None."""
    for key in ("profile", "trace_profile"):
        prof = record.get(key) or {}
        col = f"{element}_ppm"
        x, v = prof.get("distance_um"), prof.get(col)
        if x is not None and v is not None and len(x) == len(v) and len(x):
            x, v = np.asarray(x, float), np.asarray(v, float)
            qc = prof.get("qc")
            good = (np.array([q == "ok" for q in qc], bool) if qc is not None and len(qc) == len(x)
                    else np.ones(x.size, bool))
            return x, v, good, f"{element} (ppm)"
    return None


def _panel_series(record, steps):
    elements = []
    cm = record.get("crystal_model") or {}
    elements += [str(e) for e in cm.get("elements") or []]
    for s in steps:
        for e in str(s.get("element") or "").replace(",", "+").split("+"):
            e = e.split(" (")[0].strip()
            if e and e not in elements:
                elements.append(e)
    for el in elements:
        found = _element_series(record, el)
        if found:
            return el, found
    prof = record.get("profile") or {}
    column = (record.get("zones") or {}).get("column") or ("An" if "An" in prof else None)
    if column and prof.get(column) is not None and prof.get("distance_um") is not None:
        x, v = np.asarray(prof["distance_um"], float), np.asarray(prof[column], float)
        if x.size == v.size and x.size:
            return column, (x, v, np.ones(x.size, bool), f"{column} (mol%)" if column in ("An", "Fo") else column)
    return None, None


def _age_text(s) -> str:
    if s["kind"] == "date":
        return format_days(s["median"])
    if s["kind"] == "upper":
        return "< " + format_days(s["upper"])
    if s["kind"] == "lower":
        return "> " + format_days(s["lower"])
    return f"{format_days(s['lower'])}–{format_days(s['upper'])}"


def _profile_panel(canvas, c, box, style):
    """One crystal's small panel in ``box`` (left, top, right, bottom); returns True if a model curve was drawn."""
    rec, steps = c["record"], c["steps"]
    left, top, right, bottom = box
    element, series = _panel_series(rec, steps)
    title = f"{_short(c['sample'], 16)} / {_short(c['crystal'], 12)}"
    canvas.text(left, top, title, 6.5, va="top")
    ages = " · ".join(f"{s['event'] or '?'} {_age_text(s)}" for s in steps)
    while len(ages) > 4 and text_width(ages, 5.5) > right - left:
        ages = ages[:-2].rstrip(" ·") + "…" if not ages.endswith("…") else ages[:-2] + "…"
    canvas.text(left, top + 7.5 * PT, ages, 5.5, va="top", colour="#333333")
    plot_top = top + 15 * PT
    if series is None:
        canvas.text((left + right) / 2, (plot_top + bottom) / 2, "no profile stored", 6, ha="center", va="center")
        return False
    x, v, good, ylabel = series
    curves = []
    cm_curve = ((rec.get("crystal_model") or {}).get("curves") or {}).get(element) or {}
    if cm_curve.get("distance_um") is not None and cm_curve.get("model") is not None \
            and len(cm_curve["distance_um"]) == len(cm_curve["model"]) and len(cm_curve["model"]):
        curves.append((np.asarray(cm_curve["distance_um"], float), np.asarray(cm_curve["model"], float)))
    for b in rec.get("boundaries") or []:
        cv = b.get("curve") if isinstance(b, dict) else None
        if b.get("element") != element or not cv:
            continue
        cx, cm = cv.get("distance_um"), cv.get("model")
        if cx is not None and cm is not None and len(cx) == len(cm) and len(cx):
            curves.append((np.asarray(cx, float), np.asarray(cm, float)))
    ok = good & np.isfinite(x) & np.isfinite(v)
    positions = [float(s["position_um"]) for s in steps if isinstance(s.get("position_um"), (int, float))]
    xs = np.concatenate([x[ok], positions]) if ok.any() or positions else np.array([0.0, 1.0])
    ys = np.concatenate([v[ok]] + [m[np.isfinite(m)] for _, m in curves])
    xlo, xhi = (float(np.min(xs)), float(np.max(xs))) if xs.size else (0.0, 1.0)
    ylo, yhi = (float(np.min(ys)), float(np.max(ys))) if ys.size else (0.0, 1.0)
    if xhi <= xlo:
        xlo, xhi = xlo - 1, xhi + 1
    if yhi <= ylo:
        ylo, yhi = ylo - 1, yhi + 1
    ypad = 0.08 * (yhi - ylo)
    yt = nice_ticks(ylo, yhi, 4)
    ytl = tick_labels(yt)
    lm = max((text_width(t, 5.5) for t in ytl), default=0.0) + 3.5 * PT + 3 + 7.5 * PT + 3
    ax = Axes(canvas, (left + lm, plot_top, right - 2, bottom - 15 * PT - 6), (xlo, xhi),
              (ylo - ypad, yhi + ypad))
    ax.set_ticks("x", nice_ticks(xlo, xhi, 4), size_pt=5.5)
    ax.set_ticks("y", yt, ytl, size_pt=5.5)
    bx0, by0, bx1, by1 = ax.box
    ax.grid()
    for s in steps:
        if isinstance(s.get("position_um"), (int, float)):
            colour, _ = style(s["event"])
            px = float(ax.x(s["position_um"]))
            canvas.line([px, px], [by0, by1], colour, 0.8, dash=":")
            canvas.text(px + 1.5, by0 + 1, str(s["event"] or "?"), 5, colour=colour, va="top")
    dc, _, dm = SERIES["data"]
    canvas.markers(ax.x(x[ok]), ax.y(v[ok]), dm, 1.6, dc)
    bad = ~good & np.isfinite(x) & np.isfinite(v)
    if bad.any():  # flagged points: hollow grey, never part of the axis range
        inside = bad & (v >= ax.ylim[0]) & (v <= ax.ylim[1])
        canvas.markers(ax.x(x[inside]), ax.y(v[inside]), "o", 1.6, "#FFFFFF", edge=SERIES["flagged"][0])
    mc = SERIES["model"][0]
    for cx, cm in curves:
        canvas.line(ax.x(cx), ax.y(cm), mc, 1.0)
    ax.frame(xlabel="", ylabel="", title=None)
    canvas.text((bx0 + bx1) / 2, by1 + 3.5 * PT + 3 + 5.5 * PT + 2, LABELS["distance"], 5.5, ha="center",
                va="top")
    canvas.text(left + 1, (by0 + by1) / 2, ylabel, 5.5, ha="center", va="top", rotation=90)
    return bool(curves)


@dataclass
class ProfilePage:
    canvas: Canvas
    crystals: list  # (sample, crystal) of the panels, in order
    with_curve: int = 0  # panels with a model curve


def profile_pages(records, population, *, width: str = "double") -> list[ProfilePage]:
    """The dated profiles, one small panel per ladder crystal, in pages of :data:`PANELS_PER_PAGE`."""
    crystals = ladder_crystals(records, population)
    style = _event_style(_events(population))
    fig_w = _width_px(width)
    cols, nrows = PANEL_GRID[width]
    per_page = cols * nrows
    pad = 3 * MM
    cell_w = (fig_w - 2 * pad) / cols
    cell_h = 36 * MM
    pages = []
    n_pages = max(1, math.ceil(len(crystals) / per_page))
    sub = _wrap("dots: data; vermilion line: the best fit (whole-crystal model, or each single-boundary fit); "
                "dotted lines: dated boundaries by event", 5.5, fig_w - 2 * pad)
    n_sub = sub.count("\n") + 1
    for p in range(n_pages):
        chunk = crystals[p * per_page:(p + 1) * per_page]
        rows_here = max(1, math.ceil(len(chunk) / cols))
        head = 9 * PT + n_sub * 6.6 * PT + 10
        canvas = Canvas(fig_w, pad + head + rows_here * cell_h + 14 * PT + pad)
        title = "Dated profiles" + (f" (page {p + 1} of {n_pages})" if n_pages > 1 else "")
        canvas.text(pad, pad, title, 8.5, va="top")
        canvas.text(pad, pad + 9 * PT + 1, sub, 5.5, va="top", colour="#333333")
        page = ProfilePage(canvas, [])
        for k, c in enumerate(chunk):
            r, q = divmod(k, cols)
            left = pad + q * cell_w
            top = pad + head + r * cell_h
            drew = _profile_panel(canvas, c, (left + 2, top, left + cell_w - 6, top + cell_h - 6), style)
            page.crystals.append((c["sample"], c["crystal"]))
            page.with_curve += int(drew)
        if not chunk:
            canvas.text(fig_w / 2, pad + head + cell_h / 2, "no dated boundary", 7, ha="center", va="center")
        pages.append(page)
    return pages


# --------------------------------------------------------------------------- output
def _bytes(canvas: Canvas, fmt: str) -> bytes:
    """As ``figures.canvas_bytes``: PNG at the print resolution, SVG and PDF with text as text."""
    return canvas.png(dpi=FIGURE_PNG_DPI) if fmt == "png" else getattr(canvas, fmt)()


@dataclass
class PaperFigures:
    """Files of the population's paper figures (empty lists when no crystal is dated)."""

    ladders: list = field(default_factory=list)  # paths, one per format
    profiles: list = field(default_factory=list)  # per page: list of paths, one per format
    n_crystals: int = 0
    n_with_curve: int = 0
    width: str = "double"

    @property
    def files(self) -> list:
        return [*self.ladders, *(p for page in self.profiles for p in page)]


def render_paper_figures(records, population, fig_dir, *, formats=("png",), width: str = "double") -> PaperFigures:
    """Write ``ladders.<fmt>`` and ``profiles-<page>.<fmt>`` into ``fig_dir`` (nothing when no crystal is dated)."""
    _width_px(width)  # an unknown width or format is refused before anything is drawn
    formats = [str(f).lower().lstrip(".") for f in formats]
    for f in formats:
        if f not in ("png", "svg", "pdf"):
            from zoneprofile._validation import InputError

            raise InputError(f"unknown figure format '{f}'; choose from png, svg, pdf")
    fig_dir = Path(fig_dir)
    out = PaperFigures(width=width)
    lad = ladder_figure(records, population, width=width)
    if not lad.n_crystals:
        return out
    out.n_crystals = lad.n_crystals
    out.ladders = [write_bytes(fig_dir / f"ladders.{fmt}", _bytes(lad.canvas, fmt)) for fmt in formats]
    for k, page in enumerate(profile_pages(records, population, width=width)):
        out.profiles.append([write_bytes(fig_dir / f"profiles-{k + 1}.{fmt}", _bytes(page.canvas, fmt))
                             for fmt in formats])
        out.n_with_curve += page.with_curve
    return out


def paper_figures_html(paper, img, escape) -> str:
    """The report's part for the paper figures: the ladder figure and the first page of profiles, embedded;
    every file (all pages, all formats) linked from ``figures/``. ``img(png, alt, caption)`` and ``escape``
    are the report's own helpers."""
    if paper is None or not paper.ladders:
        return ""

    def png(paths):
        return next((p for p in paths if Path(p).suffix == ".png"), None)

    def links(paths):
        return ", ".join(f'<a href="figures/{escape(Path(p).name)}">{escape(Path(p).suffix.lstrip(".").upper())}</a>'
                         for p in paths)

    width = f"{WIDTHS_MM[paper.width]:.0f} mm wide, PNG at {PRINT_DPI} dpi"
    parts = ["<h3>Figures of the population for a paper</h3>"]
    parts.append(img(png(paper.ladders), "Event ladders of all crystals",
                     f"Every crystal with a dated boundary or a bound ({paper.n_crystals}), one row each, grouped "
                     "by sample, on one log-time axis. Bars: a boundary's 95% interval, symbol at its median, "
                     "symbol and colour by the population event it belongs to; a bar with an arrow: an upper "
                     "bound (arrow to younger ages) or a lower bound (arrow to older ages); dashed: bounded both "
                     "ways. Shaded spans: the population's events (95% age interval of each). Ages as each "
                     "crystal dated them (whole-crystal model or single-boundary fits). "
                     f"Print files ({width}): {links(paper.ladders)}."))
    n_pages = len(paper.profiles)
    no_curve = paper.n_crystals - paper.n_with_curve
    note = (f" {no_curve} panel(s) show data and boundary marks only: their record keeps no model curve "
            "(e.g. a crystal model computed before curves were kept)." if no_curve else "")
    more = ""
    if n_pages > 1:
        more = " Further pages: " + "; ".join(f"page {k + 1} ({links(paths)})"
                                               for k, paths in enumerate(paper.profiles) if k) + "."
    parts.append(img(png(paper.profiles[0]), "Dated profiles, small multiples",
                     "One small panel per crystal of the ladder figure, in the same order: the dated element "
                     "along the traverse (dots; flagged points hollow grey), the best fit in vermilion (the "
                     "whole-crystal model's profile over the whole traverse, or the curve of each single-boundary "
                     "fit over its window), the dated boundaries (dotted, coloured and labelled by "
                     f"event), the ages in the panel title.{escape(note)}"
                     + (f" Page 1 of {n_pages}." if n_pages > 1 else "")
                     + f" Print files ({width}): {links(paper.profiles[0])}.{more}"))
    return "".join(parts)
