"""Figures of the report: one per crystal, two per dated element for the population.

Every figure is laid out here and drawn on the small canvas of
:mod:`zoneprofile.report._canvas` (SVG, PNG, and PDF through matplotlib): the
crystal figure, drawn for every crystal of a campaign, and the population
figures (chronology and events per dated element), drawn in the main process
after all crystals. Only a PDF imports matplotlib. Every requested format is
written atomically. Axes always carry units.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from zoneprofile._output import write_bytes
from zoneprofile.report._canvas import (
    DPI,
    PT,
    Axes,
    Canvas,
    autoscale,
    colour_bar,
    colour_bar_width,
    colour_image,
    legend,
    step_xy,
    text_width,
)
from zoneprofile.report.style import (
    COLOURS,
    EVENT_FILLS,
    MAP_CMAP,
    LABELS,
    SERIES,
    ZONE_FILLS,
)
from zoneprofile.report.timetext import time_title

__all__ = [
    "render_crystal_figure",
    "crystal_figure_bytes",
    "render_population_figures",
    "crystal_canvas",
    "boundary_entry",
    "fit_canvas",
    "zoning_record",
    "zoning_canvas",
    "map_canvas",
    "write_figure",
    "canvas_bytes",
    "figure_width_px",
    "slug",
    "FIGURE_FORMATS",
]

FIGURE_FORMATS = ("png", "svg", "pdf")

_UNITS = {"An": "mol%", "Ab": "mol%", "Or": "mol%", "Fo": "mol%", "Mg_number": "", "Wo": "mol%",
          "En": "mol%", "Fs": "mol%"}


def slug(text: str) -> str:
    """A file-name-safe version of ``text`` (letters, digits, dash, underscore)."""
    s = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return s[:60] or "x"


def _quantity_label(column: str) -> str:
    column = str(column)
    if column == "Mg_number":
        return "Mg# (mol%)"
    if column.endswith("_ppm"):
        return f"{column[:-4]} (ppm)"
    unit = _UNITS.get(column, "")
    return f"{column} ({unit})" if unit else column


# --------------------------------------------------------------------------- crystal
# The crystal figure is drawn on the small canvas of ``_canvas`` (not matplotlib
# axes): one figure per crystal, for every crystal of a campaign, so its cost
# counts (docs/performance-report.md). Sizes below are pixels at canvas.DPI.
# It is made of blocks (profile, map, fits), each a canvas of its own placed
# in the figure: ``zones --plot``, ``map --plot`` and ``fit --plot`` draw the
# same blocks from the same record parts, so a command's figure is the
# report's drawing of that item (docs/report.md, "Figures").
_HEADER = 34.0  # figure title band
_AXES_H = 215.0  # height of every plot box
_BELOW = 46.0  # x tick labels and x label under a plot box
_PAD = 10.0  # figure edge
_FIT_TOP = 42.0  # two title lines above a fit panel
_FIT_GAP = 16.0  # between rows of fit panels
_MERGE_PT = 2.5  # vertical marks closer than this (points) are drawn side by side


def figure_width_px(width="double") -> float:
    """Canvas width in pixels of a print width: ``"single"`` (one column) or ``"double"`` (two columns)."""
    from zoneprofile._limits import FIGURE_WIDTH_IN, check_choice

    return FIGURE_WIDTH_IN[check_choice("figure_width", width, "figure width")] * DPI


def _profile_data(record):
    prof = record.get("profile") or {}
    zones = record.get("zones") or {}
    column = zones.get("column") or ("An" if "An" in prof else None)
    if column is None:
        for k in prof:
            if k not in ("distance_um", "qc", "point") and not str(k).endswith("_sd"):
                column = k
                break
    x = np.asarray(prof.get("distance_um") if prof.get("distance_um") is not None else [], dtype=float)
    y = np.asarray(prof.get(column) if column and prof.get(column) is not None else [], dtype=float)
    sd = prof.get(f"{column}_sd") if column else None
    sd = np.asarray(sd, dtype=float) if sd is not None and len(sd) == x.size else None
    qc = prof.get("qc")
    qc = list(qc) if qc is not None else ["ok"] * x.size
    good = np.array([q == "ok" for q in qc], dtype=bool) if len(qc) == x.size else np.ones(x.size, bool)
    trace = None
    for b in record.get("boundaries") or []:
        key = f"{b.get('element')}_ppm"
        if key in prof and prof[key] is not None and len(prof[key]) == x.size:
            trace = (key, np.asarray(prof[key], dtype=float))
            break
    return column, x, y, sd, good, trace


def _spans(items):
    out = []
    for z in items or []:
        try:
            out.append((float(z["start_um"]), float(z["end_um"])))
        except (KeyError, TypeError, ValueError):
            continue
    return out


def _error_bars(canvas, ax, x, y, sd, colour, width_pt=0.6):
    """Vertical ±1 sd bars at data points with a finite positive sd; returns whether any was drawn."""
    if sd is None:
        return False
    ok = np.isfinite(x) & np.isfinite(y) & np.isfinite(sd) & (sd > 0)
    if not ok.any():
        return False
    px = ax.x(x[ok])
    canvas.segments(px, ax.y(y[ok] - sd[ok]), px, ax.y(y[ok] + sd[ok]), colour, width_pt)
    return True


def _value_limits(y, sd, good):
    """y limits over the points that count (QC ok) with their ±1 sd; flagged points never set them."""
    if y.size == 0 or not good.any():
        return autoscale(None)
    yg = y[good]
    if sd is None:
        return autoscale(yg)
    sg = np.where(np.isfinite(sd[good]), sd[good], 0.0)
    return autoscale(yg - sg, yg + sg)


def _vertical_marks(canvas, ax, marks):
    """Full-height lines at x positions; marks closer than ``_MERGE_PT`` are set side by side.

    ``marks`` are ``(x, colour, width_pt, dash)``. A reverse step on a
    resorption surface then shows both lines, touching, instead of one over
    the other.
    """
    x0, y0, x1, y1 = ax.box
    placed = sorted(((float(ax.x(m[0])), m) for m in marks if np.isfinite(ax.x(m[0]))), key=lambda t: t[0])
    clusters = []
    for px, m in placed:
        if clusters and px - clusters[-1][-1][0] < _MERGE_PT * PT:
            clusters[-1].append((px, m))
        else:
            clusters.append([(px, m)])
    for group in clusters:
        centre = sum(p for p, _ in group) / len(group)
        step = max(m[2] for _, m in group) * PT + 1.0
        for j, (px, (_, colour, lw, dash)) in enumerate(group):
            at = centre + (j - (len(group) - 1) / 2) * step if len(group) > 1 else px
            canvas.line([at, at], [y0, y1], colour, lw, dash=dash)


def _profile_panel(canvas, record, cell):
    """Profile with zones, steps, surfaces, dated boundaries and the trace element; returns the bottom."""
    left, top, right = cell
    column, x, y, sd, good, trace = _profile_data(record)
    zones = record.get("zones") or {}
    zone_spans = _spans(zones.get("zones"))
    bands = _spans(zones.get("oscillatory_bands"))
    steps = [s for s in zones.get("steps") or [] if s.get("position_um") is not None]
    surfaces = [r for r in zones.get("resorption_surfaces") or [] if r.get("position_um") is not None]
    dated = [b for b in record.get("boundaries") or [] if b.get("position_um") is not None]
    if not dated and not record.get("error"):  # dated together by the whole-crystal model (no fit panels)
        dated = [b for b in (record.get("crystal_model") or {}).get("boundaries") or []
                 if isinstance(b, dict) and b.get("position_um") is not None]
    has_y = x.size > 0 and y.size == x.size
    positions = [float(s["position_um"]) for s in steps] + [float(r["position_um"]) for r in surfaces]
    positions += [float(b["position_um"]) for b in dated]
    xlim = autoscale(x, [v for span in zone_spans + bands for v in span], positions)
    ylim = _value_limits(y, sd, good) if has_y else autoscale(None)
    twin_lim = autoscale(trace[1][good]) if trace is not None and has_y else None
    box_top = top + 24
    l_margin = Axes.left_margin(ylim, _AXES_H)
    r_margin = Axes.left_margin(twin_lim, _AXES_H) + 4 if twin_lim else 18.0
    ax = Axes(canvas, (left + l_margin, box_top, right - r_margin, box_top + _AXES_H), xlim, ylim)
    x0, y0, x1, y1 = ax.box
    entries = []
    for k, (a, b) in enumerate(zone_spans):
        pa, pb = np.clip(ax.x([a, b]), x0, x1)
        canvas.rect(pa, y0, pb, y1, fill=ZONE_FILLS[k % len(ZONE_FILLS)])
    if zone_spans:
        entries.append((LABELS["zone"], {"patch": (ZONE_FILLS[0], 1.0)}))
    for a, b in bands:
        pa, pb = np.clip(ax.x([a, b]), x0, x1)
        canvas.rect(pa, y0, pb, y1, hatch=COLOURS["grey"])
    if bands:
        entries.append((LABELS["band_osc"], {"hatch": COLOURS["grey"]}))
    ax.grid()
    if has_y:
        c, ls, m = SERIES["profile"]
        bars = _error_bars(canvas, ax, x[good], y[good], sd[good] if sd is not None else None, c)
        canvas.line(ax.x(x[good]), ax.y(y[good]), c, 0.9)
        canvas.markers(ax.x(x[good]), ax.y(y[good]), m, 2.5, c)
        handle = {"line": (c, 0.9, ls), "marker": (m, 2.5, c, None)}
        if bars:
            handle["bar"] = (c, 0.6)
        entries.append((f"{column} (±1 sd)" if bars else str(column), handle))
        flagged = ~good & np.isfinite(y)
        if flagged.any():
            c, _, m = SERIES["flagged"]
            fx, fy = x[flagged], y[flagged]
            lo, hi = ylim
            inside = (fy >= lo) & (fy <= hi)
            _error_bars(canvas, ax, fx[inside], fy[inside], sd[flagged][inside] if sd is not None else None, c)
            canvas.markers(ax.x(fx[inside]), ax.y(fy[inside]), m, 4, "#FFFFFF", edge=c)
            entries.append((LABELS["flagged"], {"marker": (m, 4, "#FFFFFF", c)}))
            # off the scale: a hollow triangle on the edge, pointing to where the value lies
            for shape, sel, at in (("^", fy > hi, y0 + 4), ("v", fy < lo, y1 - 4)):
                if sel.any():
                    canvas.markers(ax.x(fx[sel]), np.full(int(sel.sum()), at), shape, 5, "#FFFFFF", edge=c)
            if (~inside).any():
                entries.append((LABELS["flagged_off"], {"marker": ("^", 5, "#FFFFFF", c)}))
    marks = []
    seen = set()
    for s in steps:
        kind = s.get("kind")
        role = "step_reverse" if kind == "reverse" else "step_normal"
        c, ls, _ = SERIES[role]
        marks.append((float(s["position_um"]), c, 1.4, ls))
        if role not in seen:
            entries.append((f"{kind or 'step'} step", {"line": (c, 1.4, ls)}))
            seen.add(role)
    for k, r in enumerate(surfaces):
        c, ls, _ = SERIES["resorption"]
        marks.append((float(r["position_um"]), c, 1.6, ls))
        if k == 0:
            entries.append((LABELS["resorption"], {"line": (c, 1.6, ls)}))
    _vertical_marks(canvas, ax, marks)
    if dated and has_y and np.isfinite(y[good]).any():
        canvas.markers(ax.x([float(b["position_um"]) for b in dated]), np.full(len(dated), y0 + 5), "v", 6,
                       COLOURS["black"])
        entries.append((LABELS["dated"], {"marker": ("v", 6, COLOURS["black"], None)}))
    green = COLOURS["green"]
    if twin_lim is not None:
        twin = ax.right_frame(twin_lim, ylabel=_quantity_label(trace[0]), colour=green)
        canvas.line(twin.x(x[good]), twin.y(trace[1][good]), green, 0.7, alpha=0.8)
        canvas.markers(twin.x(x[good]), twin.y(trace[1][good]), "s", 1.8, green, alpha=0.8)
        entries.append((f"{trace[0][:-4]} (right axis)", {"line": (green, 0.7, "-"), "marker": ("s", 3, green, None)}))
    ax.frame(xlabel=LABELS["distance"], ylabel=_quantity_label(column or "value"),
             title=f"Profile and zoning ({column})")
    return legend(canvas, entries, centre_x=(left + right) / 2, top=y1 + _BELOW, max_width=right - left - 10,
                  size_pt=7, ncol=3)


def _fit_panel(canvas, b, cell):
    """One dated boundary: band, initial profile, data, best fit; returns the legend entries."""
    left, top, right = cell
    curve = b.get("curve") or {}
    dist = curve.get("distance_um")
    x = np.asarray(dist if dist is not None else [], dtype=float)
    element = b.get("element") or "value"
    position = float(b["position_um"])

    def arr(key):
        v = curve.get(key)
        return None if v is None or len(v) != x.size or not x.size else np.asarray(v, dtype=float)

    low, high, init, data, model, sd = (arr(k) for k in ("band_low", "band_high", "initial", "data", "model",
                                                         "data_sd"))
    with_bars = [data] if sd is None or data is None else [data - np.nan_to_num(sd), data + np.nan_to_num(sd)]
    xlim = autoscale(x, [position])
    ylim = autoscale(low, high, init, model, *with_bars) if x.size else (0.0, 1.0)
    box_top = top + _FIT_TOP
    l_margin = Axes.left_margin(ylim, _AXES_H)
    ax = Axes(canvas, (left + l_margin, box_top, right - 18, box_top + _AXES_H), xlim, ylim)
    x0, y0, x1, y1 = ax.box
    ax.grid()
    entries = []
    if x.size:
        if low is not None and high is not None:
            colour = SERIES["band"][0]
            ok = np.isfinite(x) & np.isfinite(low) & np.isfinite(high)
            edges = np.flatnonzero(np.diff(np.concatenate([[0], ok.astype(np.int8), [0]])))
            for a, e in zip(edges[::2], edges[1::2]):
                xs = ax.x(x[a:e])
                canvas.polygon(np.concatenate([xs, xs[::-1]]),
                               np.concatenate([ax.y(low[a:e]), ax.y(high[a:e])[::-1]]), colour, alpha=0.35)
            entries.append((LABELS["band"], {"patch": (colour, 0.35)}))
        if init is not None:
            c, ls, _ = SERIES["initial"]
            canvas.line(ax.x(x), ax.y(init), c, 1.0, dash=ls)
            entries.append((LABELS["initial"], {"line": (c, 1.0, ls)}))
        if data is not None:
            c, _, m = SERIES["data"]
            bars = _error_bars(canvas, ax, x, data, sd, c)
            canvas.markers(ax.x(x), ax.y(data), m, 2.8, c)
            handle = {"marker": (m, 2.8, c, None)}
            if bars:
                handle["bar"] = (c, 0.6)
            entries.append((LABELS["data"] if bars else LABELS["data_plain"], handle))
        if model is not None:
            c, ls, _ = SERIES["model"]
            canvas.line(ax.x(x), ax.y(model), c, 1.6, dash=ls)
            entries.append((LABELS["model"], {"line": (c, 1.6, ls)}))
    else:
        canvas.text((x0 + x1) / 2, (y0 + y1) / 2, "no curve stored", 8, ha="center", va="center")
    px = float(ax.x(position))
    canvas.line([px, px], [y0, y1], COLOURS["grey"], 0.8, dash=":")
    entries.append((LABELS["boundary"], {"line": (COLOURS["grey"], 0.8, ":")}))
    td = b.get("time_days") or {}
    title = time_title(element, position, td, b.get("resolved", True))  # a bound reads as a bound
    ax.frame(xlabel=LABELS["distance"], ylabel=_fit_ylabel(b), title=title)
    return entries


def _fit_ylabel(b) -> str:
    """The fitted quantity with its unit: the profile column the element is read from in the mineral."""
    element = b.get("element") or "value"
    column = None
    if b.get("mineral"):
        from zoneprofile.minerals.registry import value_column

        try:
            column = value_column(element, b["mineral"])
        except Exception:  # noqa: BLE001 - an unknown mineral: the element in ppm, as below
            column = None
    return _quantity_label(column) if column else f"{element} (ppm)"
def _model_series(record, element):
    """``(x, values, sd or None, good, label)`` of an element along the crystal's traverse, or None."""
    column = None
    if record.get("mineral"):
        from zoneprofile.minerals.registry import value_column

        try:
            column = value_column(element, record["mineral"])
        except Exception:  # noqa: BLE001 - an unknown mineral: the element in ppm, as below
            column = None
    for col in [c for c in (column, f"{element}_ppm") if c]:
        for key in ("profile", "trace_profile"):
            prof = record.get(key) or {}
            x, v = prof.get("distance_um"), prof.get(col)
            if x is None or v is None or len(x) != len(v) or not len(x):
                continue
            x, v = np.asarray(x, dtype=float), np.asarray(v, dtype=float)
            qc = prof.get("qc")
            good = (np.array([q == "ok" for q in qc], dtype=bool) if qc is not None and len(qc) == x.size
                    else np.ones(x.size, dtype=bool))
            sd = prof.get(f"{col}_sd")
            sd = np.asarray(sd, dtype=float) if sd is not None and len(sd) == x.size else None
            return x, v, sd, good, _quantity_label(col)
    return None


def _model_panel(canvas, record, element, cell):
    """One element's whole-crystal model: data, the profile as grown (initial), best joint fit, boundaries."""
    left, top, right = cell
    cm = record.get("crystal_model") or {}
    curve = (cm.get("curves") or {}).get(element) or {}
    cx = np.asarray(curve.get("distance_um") or [], dtype=float)

    def arr(key):
        v = curve.get(key)
        return np.asarray(v, dtype=float) if v is not None and len(v) == cx.size and cx.size else None

    model, grown = arr("model"), arr("grown")
    series = _model_series(record, element)
    bounds = sorted((b for b in cm.get("boundaries") or [] if isinstance(b, dict) and b.get("position_um") is not None),
                    key=lambda b: float(b["position_um"]))
    x = v = sd = good = None
    label = f"{element} (ppm)"
    if series is not None:
        x, v, sd, good, label = series
    ylim = autoscale(model, grown, *(() if series is None else (_value_limits(v, sd, good),)))
    xlim = autoscale(cx, [float(b["position_um"]) for b in bounds])
    box_top = top + _FIT_TOP
    ax = Axes(canvas, (left + Axes.left_margin(ylim, _AXES_H), box_top, right - 18, box_top + _AXES_H), xlim, ylim)
    x0, y0, x1, y1 = ax.box
    ax.grid()
    entries = []
    if grown is not None:
        c, ls, _ = SERIES["initial"]
        canvas.line(ax.x(cx), ax.y(grown), c, 1.0, dash=ls)
        entries.append((LABELS["initial"], {"line": (c, 1.0, ls)}))
    if series is not None:
        ok = good & np.isfinite(x) & np.isfinite(v)
        c, _, m = SERIES["data"]
        bars = _error_bars(canvas, ax, x[ok], v[ok], sd[ok] if sd is not None else None, c)
        canvas.markers(ax.x(x[ok]), ax.y(v[ok]), m, 2.8, c)
        handle = {"marker": (m, 2.8, c, None)}
        if bars:
            handle["bar"] = (c, 0.6)
        entries.append((LABELS["data"] if bars else LABELS["data_plain"], handle))
        bad = ~good & np.isfinite(x) & np.isfinite(v) & (v >= ylim[0]) & (v <= ylim[1])
        if bad.any():
            fc = SERIES["flagged"][0]
            canvas.markers(ax.x(x[bad]), ax.y(v[bad]), "o", 4, "#FFFFFF", edge=fc)
            entries.append((LABELS["flagged"], {"marker": ("o", 4, "#FFFFFF", fc)}))
    if model is not None:
        c, ls, _ = SERIES["model"]
        canvas.line(ax.x(cx), ax.y(model), c, 1.6, dash=ls)
        entries.append((LABELS["model"], {"line": (c, 1.6, ls)}))
    for b in bounds:
        px = float(ax.x(float(b["position_um"])))
        canvas.line([px, px], [y0, y1], COLOURS["grey"], 0.8, dash=":")
        canvas.text(px + 2, y0 + 2, str(b.get("id") or ""), 7, va="top", colour="#333333")
    if bounds:
        entries.append((LABELS["boundary"], {"line": (COLOURS["grey"], 0.8, ":")}))
    from zoneprofile.report.timetext import time_statement

    ages = " · ".join(f"{b.get('id')} {time_statement(b.get('age_days') or {})}" for b in bounds)
    ax.frame(xlabel=LABELS["distance"], ylabel=label, title=f"{element}: whole-crystal model\n{ages}")
    return entries


def model_block(record, width="double") -> Canvas:
    """The whole-crystal model's panels (one per element with a stored curve) and one legend, as a block."""
    cm = record.get("crystal_model") or {}
    elements = [e for e in (cm.get("curves") or {}) if (cm["curves"].get(e) or {}).get("model")]
    return _panel_grid(elements, width, lambda canvas, element, cell: _model_panel(canvas, record, element, cell))


def _load_map(m, map_dir):
    if m.get("image") is not None:
        return np.asarray(m["image"], dtype=float)
    rel = m.get("image_png")  # not ``picture_png``: that is a finished picture with its own axes
    if rel and map_dir is not None:
        p = Path(map_dir) / rel
        if p.is_file():
            from PIL import Image

            with Image.open(p) as im:
                return np.asarray(im.convert("RGBA") if im.mode not in ("L", "F", "I", "I;16") else im)
    return None


def _map_panel(canvas, record, cell, map_dir):
    """The map with the traverse and its boundaries, a colour bar with units; returns the bottom."""
    left, top, right = cell
    m = record.get("map") or {}
    img = _load_map(m, map_dir)
    box_top = top + 24
    if img is not None and img.ndim == 3 and img.shape[2] == 1:
        img = img[..., 0]
    if img is None or img.ndim not in (2, 3) or img.size == 0 or (img.ndim == 3 and img.shape[2] < 3):
        note = f"map picture: {m['picture_png']}" if m.get("picture_png") else "map image not found"
        canvas.text((left + right) / 2, box_top + _AXES_H / 2, note, 8, ha="center", va="center")
        return box_top + _AXES_H + _BELOW
    px_um = m.get("pixel_um")
    scale = float(px_um) if px_um else 1.0
    unit = "µm" if px_um else "pixel"
    h, w = img.shape[:2]
    xlim = (-0.5 * scale, (w - 0.5) * scale)
    ylim = (-0.5 * scale, (h - 0.5) * scale)
    grey = img.ndim == 2
    if grey:
        rgba, lo, hi = colour_image(img, MAP_CMAP)
    else:  # an RGB(A) picture: floats in 0..1 or integers in 0..255
        a = np.nan_to_num(img.astype(float))
        if img.dtype.kind != "f":
            a = a / 255.0
        if a.shape[2] < 4:
            a = np.dstack([a[..., :3], np.ones(a.shape[:2])])
        rgba = (np.clip(a[..., :4], 0.0, 1.0) * 255 + 0.5).astype(np.uint8)
    l_margin = Axes.left_margin(ylim, _AXES_H)
    bar_w, bar_pad = 11.0, 10.0
    r_margin = bar_pad + bar_w + colour_bar_width(lo, hi, _AXES_H) + 6 if grey else 14.0
    avail_w = right - left - l_margin - r_margin
    k = min(avail_w / (xlim[1] - xlim[0]), _AXES_H / (ylim[1] - ylim[0]))
    bw, bh = k * (xlim[1] - xlim[0]), k * (ylim[1] - ylim[0])
    bx0 = left + l_margin + (avail_w - bw) / 2
    by0 = box_top + (_AXES_H - bh) / 2
    ax = Axes(canvas, (bx0, by0, bx0 + bw, by0 + bh), xlim, ylim, inverted=True)
    canvas.image(rgba, bx0, by0, bx0 + bw, by0 + bh)
    entries = []
    try:
        x0, y0, x1, y1 = (float(v) * scale for v in m.get("line"))
        line = all(math.isfinite(v) for v in (x0, y0, x1, y1))
    except (TypeError, ValueError):
        line = False
    if line:
        red = COLOURS["vermilion"]
        canvas.line(ax.x([x0, x1]), ax.y([y0, y1]), red, 1.6)
        canvas.markers(ax.x([x0]), ax.y([y0]), "o", 4, red)
        entries.append(("traverse (rim → core)", {"line": (red, 1.6, "-")}))
        length = math.hypot(x1 - x0, y1 - y0)
        pts = []
        for b in m.get("boundaries") or [] if px_um else []:
            try:
                d = float(b["position_um"])  # along the line, from its rim end
            except (KeyError, TypeError, ValueError):
                continue
            if length > 0 and 0 <= d <= length:
                f = d / length
                pts.append((x0 + f * (x1 - x0), y0 + f * (y1 - y0)))
        if pts:
            xs, ys = zip(*pts)
            canvas.markers(ax.x(xs), ax.y(ys), "D", 5, COLOURS["yellow"], edge=COLOURS["black"])
            entries.append(("boundary", {"marker": ("D", 5, COLOURS["yellow"], COLOURS["black"])}))
    ax.frame(xlabel=f"x ({unit})", ylabel=f"y ({unit})", title="Map")
    if grey:
        cal = m.get("calibration") or {}
        column = cal.get("quantity") or cal.get("column") or (record.get("zones") or {}).get("column") or "An"
        cx0 = bx0 + bw + bar_pad
        colour_bar(canvas, (cx0, by0, cx0 + bar_w, by0 + bh), lo, hi, MAP_CMAP, label=_quantity_label(str(column)))
    return legend(canvas, entries, centre_x=(bx0 + bx0 + bw) / 2, top=by0 + bh + _BELOW,
                  max_width=right - left - 10, size_pt=6.5, ncol=2)


def _block(width_px: float, draw) -> Canvas:
    """A canvas ``width_px`` wide whose height is what ``draw(canvas, cell)`` used (it returns its bottom)."""
    canvas = Canvas(width_px, 1)
    bottom = draw(canvas, (_PAD, 0.0, width_px - _PAD))
    canvas.height = int(math.ceil(bottom + 4))
    return canvas


def profile_block(record, width_px: float) -> Canvas:
    """The profile panel of a record (``profile``, ``zones``, dated ``boundaries``) as a block."""
    return _block(width_px, lambda c, cell: _profile_panel(c, record, cell))


def map_block(record, width_px: float, map_dir=None) -> Canvas:
    """The map panel of a record (``map``) as a block."""
    return _block(width_px, lambda c, cell: _map_panel(c, record, cell, map_dir))


def _fit_columns(n: int, width: str) -> int:
    """Fit panels side by side: one per row in a single column, two in a double one."""
    return 1 if width == "single" else max(1, min(n, 2))


def fits_block(boundaries, width="double") -> Canvas:
    """Every dated boundary's panel in a grid, one legend under them all, as a block."""
    return _panel_grid(boundaries, width, _fit_panel)


def _panel_grid(items, width, draw_panel) -> Canvas:
    """One panel per item in a grid (``draw_panel(canvas, item, cell)`` returns its legend entries), one legend
    under them all; the fit panels and the whole-crystal model's panels are laid out alike."""
    width_px = figure_width_px(width)
    ncols = _fit_columns(len(items), width)
    canvas = Canvas(width_px, 1)
    inner = width_px - 2 * _PAD
    col_w = inner / ncols
    handles = {}
    bottom = 0.0
    for k, item in enumerate(items):
        r, c = divmod(k, ncols)
        row_top = r * (_FIT_TOP + _AXES_H + _BELOW + _FIT_GAP)
        for label, h in draw_panel(canvas, item, (_PAD + c * col_w, row_top, _PAD + (c + 1) * col_w)):
            handles.setdefault(label, h)
        bottom = row_top + _FIT_TOP + _AXES_H + _BELOW
    if handles:
        bottom = legend(canvas, list(handles.items()), centre_x=width_px / 2, top=bottom + 8, max_width=inner,
                        size_pt=7.5)
    canvas.height = int(math.ceil(bottom + 4))
    return canvas


def _dated(record):
    return [b for b in (record.get("boundaries") or []) if b.get("curve") and b.get("position_um") is not None]


def crystal_canvas(record, *, map_dir=None, width="double") -> Canvas:
    """Lay out and draw one crystal's figure on a :class:`~zoneprofile.report._canvas.Canvas`.

    Blocks from top to bottom: the profile (with the map beside it in a
    double-column figure, under it in a single-column one), then the fit
    panels (:func:`fits_block`).
    """
    width_px = figure_width_px(width)
    fits = _dated(record)
    has_map = bool(record.get("map"))
    canvas = Canvas(width_px, 1)
    title = f"{record.get('sample', '')} / {record.get('crystal', '')} ({record.get('mineral', '')})"
    canvas.text(_PAD, 12, title, 10, va="top")
    y = _HEADER
    if has_map and width == "double":
        split = round(width_px * 0.58)
        prof = profile_block(record, split)
        mp = map_block(record, width_px - split, map_dir)
        canvas.place(prof, 0, y, name="profile")
        canvas.place(mp, split, y, name="map")
        y += max(prof.height, mp.height)
    else:
        prof = profile_block(record, width_px)
        canvas.place(prof, 0, y, name="profile")
        y += prof.height
        if has_map:
            mp = map_block(record, width_px, map_dir)
            canvas.place(mp, 0, y + 8, name="map")
            y += 8 + mp.height
    if fits:
        block = fits_block(fits, width)
        canvas.place(block, 0, y + 14, name="fits")
        y += 14 + block.height
    elif not record.get("error") and ((record.get("crystal_model") or {}).get("curves")):
        block = model_block(record, width)  # dated together by the whole-crystal model
        if block.height > 5:
            canvas.place(block, 0, y + 14, name="model")
            y += 14 + block.height
    canvas.height = int(math.ceil(y + _PAD))
    return canvas


# --------------------------------------------------------------------------- one item (the --plot figures)
def boundary_entry(fit, *, value_sd=None, distance_um=None) -> dict:
    """The part of a crystal record that draws one dated boundary, made from a fit result.

    ``fit`` is a :class:`~zoneprofile.diffusion.FitResult` or its ``to_dict()``
    (a FIT.json ``fits[]`` entry). The curves are merged with the fitted points
    by the code a campaign uses (:mod:`zoneprofile.report._curves`), so ``fit --plot`` draws exactly what the
    report draws for that boundary. ``value_sd`` (1 sd per point, at
    ``distance_um``) adds error bars. Every use of the fit result's fields is
    here (one place to follow a renamed field).
    """
    from zoneprofile.report._curves import merged_curve

    d = fit.to_dict() if hasattr(fit, "to_dict") else dict(fit)
    points = dict(d.get("points") or {})
    if value_sd is not None and distance_um is not None and points.get("distance_um") is not None:
        xs = np.asarray(distance_um, dtype=float)
        sds = np.asarray(value_sd, dtype=float)
        px = np.asarray(points["distance_um"], dtype=float)
        k = np.clip(np.searchsorted(xs, px), 0, max(xs.size - 1, 0))
        points["sd"] = np.where(np.isclose(xs[k], px, rtol=0, atol=1e-9), sds[k], np.nan).tolist()
    return {"element": d.get("element"), "mineral": d.get("mineral"), "position_um": d.get("position_um"),
            "time_days": d.get("time_days"), "resolved": d.get("resolved", True),
            "curve": merged_curve(d.get("curve") or {}, points)}


def fit_canvas(boundaries, *, width="double") -> Canvas:
    """The ``fit --plot`` figure: the report's fit block for these boundary entries (:func:`boundary_entry`)."""
    block = fits_block(list(boundaries), width)
    canvas = Canvas(block.exact_width, block.height + _PAD)
    canvas.place(block, 0, _PAD / 2, name="fits")
    return canvas


def zoning_record(result, *, value_sd=None, qc=None, distance_um=None, value=None) -> dict:
    """The record part (``profile`` and ``zones``) of a zoning result, as a campaign stores it.

    ``distance_um``/``value``/``qc`` may give every point read, flagged ones
    included (then drawn hollow and grey); by default the points analysed.
    """
    column = result.column
    x = np.asarray(result.distance_um if distance_um is None else distance_um, dtype=float)
    y = np.asarray(result.value if value is None else value, dtype=float)
    prof = {"distance_um": x.tolist(), column: y.tolist(), "qc": list(qc) if qc is not None else ["ok"] * x.size}
    if value_sd is not None:
        prof[f"{column}_sd"] = np.asarray(value_sd, dtype=float).tolist()
    return {"profile": prof, "zones": result.to_dict(), "boundaries": []}


def zoning_canvas(record, *, width="double", title=None) -> Canvas:
    """The ``zones --plot`` figure: the report's profile block of the record (``title`` above it)."""
    block = profile_block(record, figure_width_px(width))
    top = _HEADER if title else _PAD
    canvas = Canvas(block.exact_width, block.height + top + 6)
    if title:
        canvas.text(_PAD, 12, str(title), 10, va="top")
    canvas.place(block, 0, top, name="profile")
    return canvas


def map_canvas(record, *, width="double", map_dir=None) -> Canvas:
    """The ``map --plot`` figure: the report's profile and map blocks of the record."""
    width_px = figure_width_px(width)
    if width == "double":
        split = round(width_px * 0.58)
        prof, mp = profile_block(record, split), map_block(record, width_px - split, map_dir)
        canvas = Canvas(width_px, max(prof.height, mp.height) + 2 * _PAD)
        canvas.place(prof, 0, _PAD, name="profile")
        canvas.place(mp, split, _PAD, name="map")
        return canvas
    prof, mp = profile_block(record, width_px), map_block(record, width_px, map_dir)
    canvas = Canvas(width_px, prof.height + mp.height + 2 * _PAD + 8)
    canvas.place(prof, 0, _PAD, name="profile")
    canvas.place(mp, 0, _PAD + prof.height + 8, name="map")
    return canvas


def canvas_bytes(canvas: Canvas, fmt: str) -> bytes:
    """One drawing in one format: PNG at the print resolution, SVG and PDF as vectors with text as text."""
    from zoneprofile._limits import FIGURE_PNG_DPI

    fmt = _check_formats([fmt])[0]
    if fmt == "png":
        return canvas.png(dpi=FIGURE_PNG_DPI)
    return getattr(canvas, fmt)()


def write_figure(canvas: Canvas, path) -> Path:
    """Write a drawing to ``path``, the format from its extension (.png, .svg, .pdf), atomically."""
    path = Path(path)
    return write_bytes(path, canvas_bytes(canvas, path.suffix.lower().lstrip(".")))


def _check_formats(formats) -> list[str]:
    out = []
    for fmt in formats:
        fmt = str(fmt).lower().lstrip(".")
        if fmt not in FIGURE_FORMATS:
            from zoneprofile._validation import InputError

            message = f"unknown figure format '{fmt}'; choose from {', '.join(FIGURE_FORMATS)}"
            raise InputError(message)
        if fmt not in out:
            out.append(fmt)
    return out


def crystal_figure_bytes(record, formats=("png",), *, map_dir=None, width="double") -> dict:
    """One crystal's figure as ``{format: bytes}`` (what :func:`render_crystal_figure` writes)."""
    fmts = _check_formats(formats)
    canvas = crystal_canvas(record, map_dir=map_dir, width=width)
    return {fmt: canvas_bytes(canvas, fmt) for fmt in fmts}


def render_crystal_figure(record, path, *, formats=("png",), map_dir=None, width="double") -> list[Path]:
    """Draw one crystal: profile with zones, each boundary fit, the map if any.

    Parameters
    ----------
    record : dict
        A crystal record (``docs/report.md``).
    path : path-like
        Output file; its suffix is replaced by each of ``formats``.
    formats : sequence of {"png", "svg", "pdf"}
    width : {"single", "double"}
        Print width: one journal column (90 mm) or two (180 mm).
    map_dir : path-like, optional
        Folder that ``record["map"]["image_png"]`` is relative to (the output
        folder). Maps given as an ``image`` array need none.

    Returns
    -------
    list of Path
        The files written.
    """
    path = Path(path)
    base = path.with_suffix("") if path.suffix.lower().lstrip(".") in FIGURE_FORMATS else path
    drawn = crystal_figure_bytes(record, formats, map_dir=map_dir, width=width)
    return [write_bytes(base.with_suffix("." + fmt), data) for fmt, data in drawn.items()]


# --------------------------------------------------------------------------- population
# The population figures (two per dated element) are drawn on the same canvas:
# PNG + SVG of a 200-crystal campaign in a fraction of the time matplotlib took,
# and without importing matplotlib at all unless a PDF is asked for.
_POP_AXES_H = 250.0  # plot box height of the chronology panels (pixels)
_SAMPLE_STYLES = (("--", COLOURS["vermilion"]), (":", COLOURS["green"]), ("-.", COLOURS["purple"]),
                  ("-", COLOURS["black"]))
_EVENT_MARKERS = ("o", "s", "^", "D", "v", "P", "X")
_EVENT_COLOURS = (COLOURS["blue"], COLOURS["vermilion"], COLOURS["green"], COLOURS["purple"], COLOURS["orange"],
                  COLOURS["sky"], COLOURS["black"])


def _log_limits(*arrays, margin=0.05, fallback=(1.0, 1000.0)):
    """x limits of a log axis over every positive finite value, widened by ``margin`` of the log span."""
    lo, hi = math.inf, -math.inf
    for a in arrays:
        if a is None:
            continue
        v = np.asarray(a, dtype=float).ravel()
        v = v[np.isfinite(v) & (v > 0)]
        if v.size:
            lo, hi = min(lo, float(v.min())), max(hi, float(v.max()))
    if not math.isfinite(lo):
        return fallback
    a, b = math.log10(lo), math.log10(hi)
    if b - a < 0.05:  # one value, or nearly: a factor of ~1.5 either side
        a, b = a - 0.2, b + 0.2
    pad = margin * (b - a)
    return 10.0 ** (a - pad), 10.0 ** (b + pad)


def _event_fill(events, event_id) -> str:
    """The shade of an event's 95% range: by its place among all events of the element."""
    ids = [e.get("id") for e in events]
    k = ids.index(event_id) if event_id in ids else len(ids)
    return EVENT_FILLS[k % len(EVENT_FILLS)]


def _event_spans(ax, events, every=None):
    """Each event's 95% time range as a light band (drawn first, under the grid and the data).

    Returns the legend entries of the bands (one per event drawn). ``every``
    is the element's full event list (the shade follows an event's place in it).
    """
    entries = []
    for e in events:
        lo, hi = e.get("p2_5_days"), e.get("p97_5_days")
        if not lo or not hi or lo <= 0:
            continue
        fill = _event_fill(every if every is not None else events, e.get("id"))
        ax.vspan(float(lo), float(hi), fill)
        entries.append((f"{e.get('id')}: 95% range", {"patch": (fill, 1.0)}))
    return entries


def _event_list(events):
    return [e for e in events if e.get("p2_5_days") and e.get("p97_5_days") and e["p2_5_days"] > 0]


def _ecdf_panel(canvas, el_key, block, population, cell):
    """Empirical CDF on a log time axis: DKW band, draw envelope, per-sample curves, upper bounds."""
    left, top, right = cell
    ecdf = (block.get("campaign") or {}).get("ecdf")
    samples = block.get("samples") or {}
    unres = [u for u in population.get("unresolved") or []
             if _key(u.get("element")) == el_key and u.get("upper_bound_days")]
    has = bool(ecdf and ecdf.get("n"))
    xs_all = []
    if has:
        x = np.asarray(ecdf["x"], dtype=float)
        xs_all += [x * 0.7, x * 1.4]
        env = ecdf.get("draw_envelope")
        if env:
            xs_all.append(env.get("time_days"))
    bounds = np.array([float(u["upper_bound_days"]) for u in unres])
    xlim = _log_limits(*xs_all, bounds)
    ylim = (-0.02, 1.02)
    box_top = top + 24
    l_margin = Axes.left_margin(ylim, _POP_AXES_H)
    ax = Axes(canvas, (left + l_margin, box_top, right - 18, box_top + _POP_AXES_H), xlim, ylim, xlog=True)
    x0, y0, x1, y1 = ax.box
    ax.grid()
    entries = []

    def ends(v, start, end):
        return np.concatenate([[start], np.asarray(v, dtype=float), [end]])

    if has:
        env = ecdf.get("draw_envelope")
        if env and env.get("time_days"):
            t = ax.x(env["time_days"])
            canvas.polygon(np.concatenate([t, t[::-1]]),
                           np.concatenate([ax.y(env["low"]), ax.y(env["high"])[::-1]]), COLOURS["orange"], alpha=0.3)
            entries.append(("spread from time draws (95%)", {"patch": (COLOURS["orange"], 0.3)}))
        xs = ends(x, x[0] * 0.7, x[-1] * 1.4)
        sx, lo = step_xy(xs, ends(ecdf["lower"], 0.0, ecdf["lower"][-1]))
        _, hi = step_xy(xs, ends(ecdf["upper"], min(ecdf["halfwidth"], 1.0), 1.0))
        px = ax.x(sx)
        dkw = SERIES["dkw"][0]
        # the DKW band as its two limits (thin lines), not a second fill over the draw envelope: the
        # cumulative panel stays readable with several sample curves on it
        canvas.line(px, ax.y(lo), dkw, 0.9)
        canvas.line(px, ax.y(hi), dkw, 0.9)
        entries.append((f"DKW band limits ({100 * ecdf['confidence']:.0f}%)", {"line": (dkw, 0.9, "-")}))
        c = SERIES["ecdf"][0]
        sx, sy = step_xy(xs, ends(ecdf["cdf"], 0.0, 1.0))
        canvas.line(ax.x(sx), ax.y(sy), c, 1.8)
        entries.append((f"all samples (n = {ecdf['n']})", {"line": (c, 1.8, "-")}))
        if len(samples) > 1:
            for k, (name, smp) in enumerate(samples.items()):
                se = smp.get("ecdf")
                if not se or not se.get("n"):
                    continue
                ls, colour = _SAMPLE_STYLES[k % len(_SAMPLE_STYLES)]
                sxv = np.asarray(se["x"], dtype=float)
                qx, qy = step_xy(ends(sxv, sxv[0] * 0.7, sxv[-1] * 1.4), ends(se["cdf"], 0.0, 1.0))
                canvas.line(ax.x(qx), ax.y(qy), colour, 1.1, dash=ls)
                entries.append((f"{name} (n = {se['n']})", {"line": (colour, 1.1, ls)}))
    else:
        canvas.text((x0 + x1) / 2, (y0 + y1) / 2, "no resolved boundary", 8, ha="center", va="center")
    if bounds.size:
        c, _, m = SERIES["unresolved"]
        canvas.markers(ax.x(bounds), ax.y(np.full(bounds.size, 0.02)), m, 6, c)
        entries.append(("upper bound (not in ECDF)", {"marker": (m, 6, c, None)}))
    ax.frame(xlabel="time since boundary formed (days, log scale)", ylabel="fraction of dated boundaries",
             title="Empirical CDF of boundary times")
    return legend(canvas, entries, centre_x=(x0 + x1) / 2, top=y1 + _BELOW, max_width=right - left - 10,
                  size_pt=7, ncol=2)


def _kde_panel(canvas, el_key, block, population, cell):
    """Kernel density of log10 time on a log time axis: bootstrap band, medians as a rug, events."""
    left, top, right = cell
    kde = (block.get("campaign") or {}).get("kde")
    events = _event_list(block.get("events") or [])
    meds = np.array([float(b["median_days"]) for b in population.get("boundaries") or []
                     if _key(b.get("element")) == el_key and b.get("median_days")], dtype=float)
    if kde:
        t = 10.0 ** np.asarray(kde["log10_time_days"], dtype=float)
        dens = np.asarray(kde["density_per_log10_day"], dtype=float)
        band_lo = np.asarray(kde["band_low"], dtype=float)
        band_hi = np.asarray(kde["band_high"], dtype=float)
        ymax = float(np.nanmax(np.concatenate([band_hi, dens]))) or 1.0
        xlim = _log_limits(t, margin=0.02)
    else:
        ymax = 1.0
        xlim = _log_limits([e["p2_5_days"] for e in events], [e["p97_5_days"] for e in events], meds)
    ylim = (-0.1 * ymax, 1.06 * ymax)
    box_top = top + 24
    l_margin = Axes.left_margin(ylim, _POP_AXES_H)
    ax = Axes(canvas, (left + l_margin, box_top, right - 18, box_top + _POP_AXES_H), xlim, ylim, xlog=True)
    x0, y0, x1, y1 = ax.box
    spans = _event_spans(ax, events)
    ax.grid()
    entries = []
    if kde:
        c = SERIES["kde"][0]
        px = ax.x(t)
        canvas.polygon(np.concatenate([px, px[::-1]]), np.concatenate([ax.y(band_hi), ax.y(band_lo)[::-1]]), c,
                       alpha=0.25)
        entries.append(("bootstrap over crystals (95%)", {"patch": (c, 0.25)}))
        canvas.line(px, ax.y(dens), c, 1.8)
        entries.append((f"kernel density (h = {kde['bandwidth_log10']:.2f} log10 d)", {"line": (c, 1.8, "-")}))
    else:
        canvas.text((x0 + x1) / 2, (y0 + y1) / 2, "no resolved boundary", 8, ha="center", va="center")
    if meds.size:
        mx = ax.x(meds)
        mid = float(ax.y(-0.05 * ymax))
        half = 4.5 * PT
        canvas.segments(mx, mid - half, mx, mid + half, COLOURS["black"], 1.0)
        entries.append(("boundary medians", {"tick": (COLOURS["black"], 1.0)}))
    for e in events:
        if e.get("median_days"):
            px = float(ax.x(float(e["median_days"])))
            if x0 <= px <= x1:
                canvas.line([px, px], [y0, y1], COLOURS["black"], 0.8, dash="--")
                canvas.text(px + 3, y0 + 3, str(e["id"]), 7, va="top")
    entries += spans  # every shading has its legend entry
    ax.frame(xlabel="time since boundary formed (days, log scale)", ylabel="density (per log10 day)",
             title="Kernel density of log10 time")
    return legend(canvas, entries, centre_x=(x0 + x1) / 2, top=y1 + _BELOW, max_width=right - left - 10,
                  size_pt=7, ncol=2)


def chronology_canvas(el_key, block, population, *, width="double") -> Canvas:
    """The chronology figure of one element: ECDF (left) and kernel density (right), both on log time."""
    width = figure_width_px("double")
    canvas = Canvas(width, 1)
    canvas.text(0.02 * width, 14, f"Recharge chronology: {block.get('element') or 'unknown element'}", 11, va="top")
    mid = width / 2
    bottom = max(_ecdf_panel(canvas, el_key, block, population, (_PAD, _HEADER, mid)),
                 _kde_panel(canvas, el_key, block, population, (mid, _HEADER, width - _PAD)))
    canvas.height = int(math.ceil(bottom + _PAD))
    return canvas


def _natural(text) -> tuple:
    """Sort key that orders ``c2`` before ``c10``."""
    return tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in re.split(r"(\d+)", str(text)) if p)


def events_canvas(el_key, block, population, *, width="double") -> Canvas:
    """One row per crystal: each dated boundary's median and 95% range, by event; upper bounds; event bands."""
    rows = [b for b in population.get("boundaries") or [] if _key(b.get("element")) == el_key]
    unres = [u for u in population.get("unresolved") or [] if _key(u.get("element")) == el_key]
    keys = sorted({(r["sample"], r["crystal"]) for r in rows + unres},
                  key=lambda k: (_natural(k[0]), _natural(k[1])))
    n = max(len(keys), 1)
    events = block.get("events") or []
    spans = _event_list(events)
    ev_index = {e["id"]: k for k, e in enumerate(events)}
    groups = {}
    for r in rows:
        groups.setdefault(r.get("event"), []).append(r)
    bounds = [u for u in unres if u.get("upper_bound_days")]
    # legend entries first: their width sets the right margin
    entries = []
    styles = {}
    for event in sorted(groups, key=lambda e: (ev_index.get(e, len(events)), str(e))):
        k = ev_index.get(event, len(ev_index))
        styles[event] = (_EVENT_MARKERS[k % 7], _EVENT_COLOURS[k % 7])
        m, c = styles[event]
        handle = {"line": (c, 1.0, "-"), "caps": (c, 1.0), "marker": (m, 5, c, None)}
        if event is not None and any(e.get("id") == event for e in spans):
            handle["patch"] = (_event_fill(events, event), 1.0)  # the event's shaded 95% range
        entries.append((str(event) if event is not None else "no event", handle))
    if bounds:
        c, _, m = SERIES["unresolved"]
        entries.append(("upper bound", {"marker": (m, 7, c, None)}))
    size = round(7 * PT)
    legend_w = max((2.8 * size + text_width(label, 7) for label, _ in entries), default=0.0)
    legend_w = max(legend_w, text_width("event (band: 95% range)", 8))
    width = figure_width_px(width)
    pitch = min(0.24 * DPI, max(13.0, (40.0 * DPI - 120.0) / n))  # 0.24 in a row; never below the 7 pt text
    labels = [f"{smp} / {cr}" for smp, cr in keys]
    label_w = max((text_width(t, 7) for t in labels), default=0.0)
    tick = 3.5 * PT
    box_left = _PAD + 9 * PT + 10 + label_w + tick + 3
    box_right = width - _PAD - (legend_w + 24 if entries else 10)
    if box_right - box_left < 0.35 * width:  # very long names: widen the figure rather than squash the plot
        width += 0.35 * width - (box_right - box_left)
        box_right = width - _PAD - (legend_w + 24 if entries else 10)
    box_top = _PAD + 30
    box_bottom = box_top + max(pitch * (n + 0.4), text_width("sample / crystal", 9) + 12)
    canvas = Canvas(width, box_bottom + _BELOW + _PAD)
    vals = [[r.get(k) for r in rows] for k in ("median_days", "p2_5_days", "p97_5_days")]
    xlim = _log_limits(*vals, [u["upper_bound_days"] for u in bounds], [e["p2_5_days"] for e in spans],
                       [e["p97_5_days"] for e in spans])
    ax = Axes(canvas, (box_left, box_top, box_right, box_bottom), xlim, (-0.7, n - 0.3), inverted=True, xlog=True)
    ax.set_ticks("y", np.arange(len(keys)), labels, size_pt=7)
    _event_spans(ax, spans, events)
    ax.grid()
    ypos = {k: i for i, k in enumerate(keys)}
    cap = 2.0 * PT
    for event, members in groups.items():
        m, c = styles[event]
        med = ax.x([r["median_days"] for r in members])
        lo = ax.x([r["p2_5_days"] for r in members])
        hi = ax.x([r["p97_5_days"] for r in members])
        y = ax.y([ypos[(r["sample"], r["crystal"])] for r in members])
        canvas.segments(lo, y, hi, y, c, 1.0)
        canvas.segments(np.concatenate([lo, hi]), np.concatenate([y, y]) - cap, np.concatenate([lo, hi]),
                        np.concatenate([y, y]) + cap, c, 1.0)
        canvas.markers(med, y, m, 5, c)
    if bounds:
        c, _, m = SERIES["unresolved"]
        canvas.markers(ax.x([u["upper_bound_days"] for u in bounds]),
                       ax.y([ypos[(u["sample"], u["crystal"])] for u in bounds]), m, 7, c)
    ax.frame(xlabel="time since boundary formed (days, log scale; bars: 95%)", ylabel="sample / crystal",
             title=f"Dated boundaries and recharge events: {block.get('element') or 'unknown'}")
    if entries:
        lx = box_right + 16
        canvas.text(lx, box_top, "event (band: 95% range)", 8, va="top")
        legend(canvas, entries, centre_x=0.0, left=lx, top=box_top + 8 * PT + 4, max_width=legend_w, size_pt=7,
               ncol=1)
    return canvas


def _key(element) -> str:
    return "unknown" if element is None else str(element)


def render_population_figures(population, fig_dir, *, formats=("png",), width="double") -> dict:
    """Chronology figures per dated element: ECDF + KDE, and the event strip plot.

    Drawn on the canvas of :mod:`zoneprofile.report._canvas`; matplotlib is
    imported only when ``"pdf"`` is among ``formats``.

    Returns ``{element: {"chronology": [paths], "events": [paths]}}``.
    """
    fmts = _check_formats(formats)
    fig_dir = Path(fig_dir)
    out = {}
    for el_key, block in (population.get("elements") or {}).items():
        if not (block.get("campaign") or {}).get("n_boundaries") and not any(
                _key(u.get("element")) == el_key for u in population.get("unresolved") or []):
            continue
        name = slug(el_key)
        out[el_key] = {}
        for kind, draw in (("chronology", chronology_canvas), ("events", events_canvas)):
            canvas = draw(el_key, block, population, width=width)
            out[el_key][kind] = [write_bytes(fig_dir / f"{kind}-{name}.{fmt}", canvas_bytes(canvas, fmt))
                                 for fmt in fmts]
    return out
