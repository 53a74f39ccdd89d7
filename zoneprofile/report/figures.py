"""Figures of the report: one per crystal, two per dated element for the population.

The crystal figure (drawn for every crystal of a campaign, so its cost counts)
is laid out here and drawn on the small canvas of
:mod:`zoneprofile.report._canvas` (SVG, PNG, PDF). The population figures are
drawn on their own matplotlib ``Figure`` (Agg canvas, no pyplot state). Every
requested format is written atomically. Axes always carry units.
"""

from __future__ import annotations

import io
import math
import re
from pathlib import Path

import numpy as np

from zoneprofile._output import write_bytes
from zoneprofile.report._canvas import (
    DPI,
    Axes,
    Canvas,
    autoscale,
    colour_bar,
    colour_bar_width,
    colour_image,
    legend,
)
from zoneprofile.report.style import (
    COLOURS,
    EVENT_FILLS,
    MAP_CMAP,
    SERIES,
    ZONE_FILLS,
    apply_axes_style,
    new_figure,
)

__all__ = [
    "render_crystal_figure",
    "crystal_figure_bytes",
    "render_population_figures",
    "format_days",
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


def format_days(x) -> str:
    """Readable time: ``'21 d'``, ``'1.2 × 10³ d'`` style kept ASCII: ``'1200 d (3.3 yr)'``."""
    if x is None:
        return "n/a"
    x = float(x)
    if not math.isfinite(x):
        return "n/a"
    if abs(x) < 1:
        return f"{x * 24:.2g} h"
    s = f"{x:.3g}" if abs(x) < 1000 else f"{x:.0f}"
    if "e" in s:
        s = f"{x:.0f}"
    out = f"{s} d"
    if abs(x) >= 365.25:
        out += f" ({x / 365.25:.2g} yr)"
    return out


def _t(text) -> str:
    """User text for a matplotlib label: ``$`` would start mathtext, so escape it."""
    return str(text).replace("$", r"\$")


def _quantity_label(column: str) -> str:
    column = str(column)
    if column.endswith("_ppm"):
        return f"{column[:-4]} (ppm)"
    unit = _UNITS.get(column, "")
    return f"{column} ({unit})" if unit else column


def _save(fig, path: Path, formats) -> list[Path]:
    written = []
    base = path.with_suffix("") if path.suffix.lower().lstrip(".") in FIGURE_FORMATS else path
    for fmt in formats:
        fmt = fmt.lower().lstrip(".")
        if fmt not in FIGURE_FORMATS:
            from zoneprofile._validation import InputError

            message = f"unknown figure format '{fmt}'; choose from {', '.join(FIGURE_FORMATS)}"
            raise InputError(message)
        buf = io.BytesIO()
        meta = {"Software": None} if fmt == "png" else ({"Date": None} if fmt in ("svg",) else {})
        if fmt == "pdf":
            meta = {"CreationDate": None, "ModDate": None}
        import matplotlib

        with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "zoneprofile"}):
            fig.savefig(buf, format=fmt, metadata=meta)  # SVG text stays editable text
        written.append(write_bytes(base.with_suffix("." + fmt), buf.getvalue()))
    return written


# --------------------------------------------------------------------------- crystal
# The crystal figure is drawn on the small canvas of ``_canvas`` (not matplotlib
# axes): one figure per crystal, for every crystal of a campaign, so its cost
# counts (docs/performance-report.md). Sizes below are pixels at canvas.DPI.
_HEADER = 46.0  # figure title band
_AXES_H = 215.0  # height of every plot box
_BELOW = 46.0  # x tick labels and x label under a plot box
_PAD = 10.0  # figure edge


def _profile_data(record):
    prof = record.get("profile") or {}
    zones = record.get("zones") or {}
    column = zones.get("column") or ("An" if "An" in prof else None)
    if column is None:
        for k in prof:
            if k not in ("distance_um", "qc", "point"):
                column = k
                break
    x = np.asarray(prof.get("distance_um") if prof.get("distance_um") is not None else [], dtype=float)
    y = np.asarray(prof.get(column) if column and prof.get(column) is not None else [], dtype=float)
    qc = prof.get("qc")
    qc = list(qc) if qc is not None else ["ok"] * x.size
    good = np.array([q == "ok" for q in qc], dtype=bool) if len(qc) == x.size else np.ones(x.size, bool)
    trace = None
    for b in record.get("boundaries") or []:
        key = f"{b.get('element')}_ppm"
        if key in prof and prof[key] is not None and len(prof[key]) == x.size:
            trace = (key, np.asarray(prof[key], dtype=float))
            break
    return column, x, y, good, trace


def _spans(items):
    out = []
    for z in items or []:
        try:
            out.append((float(z["start_um"]), float(z["end_um"])))
        except (KeyError, TypeError, ValueError):
            continue
    return out


def _profile_panel(canvas, record, cell):
    """Profile with zones, steps, surfaces, dated boundaries and the trace element; returns the bottom."""
    left, top, right = cell
    column, x, y, good, trace = _profile_data(record)
    zones = record.get("zones") or {}
    zone_spans = _spans(zones.get("zones"))
    bands = _spans(zones.get("oscillatory_bands"))
    steps = [s for s in zones.get("steps") or [] if s.get("position_um") is not None]
    surfaces = [r for r in zones.get("resorption_surfaces") or [] if r.get("position_um") is not None]
    dated = [b for b in record.get("boundaries") or [] if b.get("position_um") is not None]
    has_y = x.size > 0 and y.size == x.size
    positions = [float(s["position_um"]) for s in steps] + [float(r["position_um"]) for r in surfaces]
    positions += [float(b["position_um"]) for b in dated]
    xlim = autoscale(x, [v for span in zone_spans + bands for v in span], positions)
    ylim = autoscale(y if has_y else None)
    twin_lim = autoscale(trace[1]) if trace is not None and has_y else None
    box_top = top + 24
    l_margin = Axes.left_margin(ylim, _AXES_H)
    r_margin = Axes.left_margin(twin_lim, _AXES_H) + 4 if twin_lim else 18.0
    ax = Axes(canvas, (left + l_margin, box_top, right - r_margin, box_top + _AXES_H), xlim, ylim)
    x0, y0, x1, y1 = ax.box
    for k, (a, b) in enumerate(zone_spans):
        pa, pb = np.clip(ax.x([a, b]), x0, x1)
        canvas.rect(pa, y0, pb, y1, fill=ZONE_FILLS[k % len(ZONE_FILLS)])
    for a, b in bands:
        pa, pb = np.clip(ax.x([a, b]), x0, x1)
        canvas.rect(pa, y0, pb, y1, hatch=COLOURS["grey"])
    ax.grid()
    entries = []
    if has_y:
        c, ls, m = SERIES["profile"]
        canvas.line(ax.x(x[good]), ax.y(y[good]), c, 0.9)
        canvas.markers(ax.x(x[good]), ax.y(y[good]), m, 2.5, c)
        entries.append((str(column), {"line": (c, 0.9, ls), "marker": (m, 2.5, c, None)}))
        if (~good).any():
            c, _, m = SERIES["flagged"]
            canvas.markers(ax.x(x[~good]), ax.y(y[~good]), m, 5, c)
            entries.append(("flagged point", {"marker": (m, 5, c, None)}))
    seen = set()
    for s in steps:
        kind = s.get("kind")
        role = "step_reverse" if kind == "reverse" else "step_normal"
        c, ls, _ = SERIES[role]
        px = float(ax.x(float(s["position_um"])))
        canvas.line([px, px], [y0, y1], c, 1.4, dash=ls)
        if role not in seen:
            entries.append((f"{kind or 'step'} step", {"line": (c, 1.4, ls)}))
            seen.add(role)
    for k, r in enumerate(surfaces):
        c, ls, _ = SERIES["resorption"]
        px = float(ax.x(float(r["position_um"])))
        canvas.line([px, px], [y0, y1], c, 1.6, dash=ls)
        if k == 0:
            entries.append(("resorption surface", {"line": (c, 1.6, ls)}))
    if dated and has_y and np.isfinite(y).any():
        top_value = float(np.nanmax(y))
        canvas.markers(ax.x([float(b["position_um"]) for b in dated]), ax.y([top_value] * len(dated)), "v", 6,
                       COLOURS["black"])
        entries.append(("dated boundary", {"marker": ("v", 6, COLOURS["black"], None)}))
    green = COLOURS["green"]
    if twin_lim is not None:
        twin = ax.right_frame(twin_lim, ylabel=_quantity_label(trace[0]), colour=green)
        canvas.line(twin.x(x), twin.y(trace[1]), green, 0.7, alpha=0.8)
        canvas.markers(twin.x(x), twin.y(trace[1]), "s", 1.8, green, alpha=0.8)
        entries.append((f"{trace[0][:-4]} (right axis)", {"line": (green, 0.7, "-"), "marker": ("s", 3, green, None)}))
    ax.frame(xlabel="distance from rim (µm)", ylabel=_quantity_label(column or "value"),
             title=f"Profile and zoning ({column})")
    return legend(canvas, entries, centre_x=(x0 + x1) / 2, top=y1 + _BELOW, max_width=right - left - 10,
                  size_pt=7, ncol=3)


def _fit_panel(canvas, b, cell):
    """One dated boundary: band, initial step, data, best fit; returns the legend entries."""
    left, top, right = cell
    curve = b.get("curve") or {}
    dist = curve.get("distance_um")
    x = np.asarray(dist if dist is not None else [], dtype=float)
    element = b.get("element") or "value"
    position = float(b["position_um"])

    def arr(key):
        v = curve.get(key)
        return None if v is None or len(v) != x.size or not x.size else np.asarray(v, dtype=float)

    low, high, init, data, model = (arr(k) for k in ("band_low", "band_high", "initial", "data", "model"))
    xlim = autoscale(x, [position])
    ylim = autoscale(low, high, init, data, model) if x.size else (0.0, 1.0)
    box_top = top + 42
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
            entries.append(("95% model band", {"patch": (colour, 0.35)}))
        if init is not None:
            c, ls, _ = SERIES["initial"]
            canvas.line(ax.x(x), ax.y(init), c, 1.0, dash=ls)
            entries.append(("initial step", {"line": (c, 1.0, ls)}))
        if data is not None:
            c, _, m = SERIES["data"]
            canvas.markers(ax.x(x), ax.y(data), m, 2.8, c)
            entries.append(("data", {"marker": (m, 2.8, c, None)}))
        if model is not None:
            c, ls, _ = SERIES["model"]
            canvas.line(ax.x(x), ax.y(model), c, 1.6, dash=ls)
            entries.append(("best fit", {"line": (c, 1.6, ls)}))
    else:
        canvas.text((x0 + x1) / 2, (y0 + y1) / 2, "no curve stored", 8, ha="center", va="center")
    px = float(ax.x(position))
    canvas.line([px, px], [y0, y1], COLOURS["grey"], 0.8, dash=":")
    td = b.get("time_days") or {}
    tag = "≤ " if not b.get("resolved", True) else ""
    title = (f"{element} at {position:.0f} µm: {tag}{format_days(td.get('median'))}\n"
             f"95%: {format_days(td.get('p2_5'))} – {format_days(td.get('p97_5'))}")
    ax.frame(xlabel="distance from rim (µm)", ylabel=f"{element} (ppm)", title=title)
    return entries


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


def crystal_canvas(record, *, map_dir=None) -> Canvas:
    """Lay out and draw one crystal's figure on a :class:`~zoneprofile.report._canvas.Canvas`."""
    fits = [b for b in (record.get("boundaries") or []) if b.get("curve") and b.get("position_um") is not None]
    has_map = bool(record.get("map"))
    ncols = max(max(1, min(len(fits), 3)), 2 if has_map else 1)
    width = DPI * (3.5 * ncols + 0.7)
    canvas = Canvas(width, 1)
    title = f"{record.get('sample', '')} / {record.get('crystal', '')} ({record.get('mineral', '')})"
    canvas.text(0.02 * width, 14, title, 11, va="top")
    inner = width - 2 * _PAD
    col_w = inner / ncols
    split = _PAD + col_w * (ncols - 1) if has_map else width - _PAD
    bottom = _profile_panel(canvas, record, (_PAD, _HEADER, split))
    if has_map:
        bottom = max(bottom, _map_panel(canvas, record, (split, _HEADER, width - _PAD), map_dir))
    handles = {}
    top = bottom + 18
    for k, b in enumerate(fits):
        r, c = divmod(k, 3)
        row_top = top + r * (42 + _AXES_H + _BELOW + 16)
        for label, h in _fit_panel(canvas, b, (_PAD + c * col_w, row_top, _PAD + (c + 1) * col_w)):
            handles.setdefault(label, h)
        bottom = row_top + 42 + _AXES_H + _BELOW
    if handles:  # one legend for all fit panels
        bottom = legend(canvas, list(handles.items()), centre_x=width / 2, top=bottom + 8, max_width=inner,
                        size_pt=7.5)
    canvas.height = int(math.ceil(bottom + _PAD))
    return canvas


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


def crystal_figure_bytes(record, formats=("png",), *, map_dir=None) -> dict:
    """One crystal's figure as ``{format: bytes}`` (what :func:`render_crystal_figure` writes)."""
    fmts = _check_formats(formats)
    canvas = crystal_canvas(record, map_dir=map_dir)
    return {fmt: getattr(canvas, fmt)() for fmt in fmts}


def render_crystal_figure(record, path, *, formats=("png",), map_dir=None) -> list[Path]:
    """Draw one crystal: profile with zones, each boundary fit, the map if any.

    Parameters
    ----------
    record : dict
        A crystal record (``docs/report.md``).
    path : path-like
        Output file; its suffix is replaced by each of ``formats``.
    formats : sequence of {"png", "svg", "pdf"}
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
    drawn = crystal_figure_bytes(record, formats, map_dir=map_dir)
    return [write_bytes(base.with_suffix("." + fmt), data) for fmt, data in drawn.items()]


# --------------------------------------------------------------------------- population
def _event_spans(ax, events, *, log=False):
    for k, e in enumerate(events):
        lo, hi = e.get("p2_5_days"), e.get("p97_5_days")
        if not lo or not hi or lo <= 0:
            continue
        a, b = (math.log10(lo), math.log10(hi)) if log else (lo, hi)
        ax.axvspan(a, b, color=EVENT_FILLS[k % len(EVENT_FILLS)], lw=0, zorder=0)


def _chronology_figure(el_key, block, population):
    camp = block["campaign"]
    fig = new_figure(10.0, 4.3)
    ax1 = fig.add_subplot(1, 2, 1)
    ax2 = fig.add_subplot(1, 2, 2)
    fig.subplots_adjust(left=0.07, right=0.98, top=0.85, bottom=0.3, wspace=0.25)
    ecdf = camp.get("ecdf")
    events = block.get("events") or []
    if ecdf and ecdf.get("n"):
        x = np.asarray(ecdf["x"])
        env = ecdf.get("draw_envelope")
        if env:
            ax1.fill_between(env["time_days"], env["low"], env["high"], step=None, color=COLOURS["orange"],
                             alpha=0.3, lw=0, label="spread from time draws (95%)")
        xs = np.concatenate([[x[0] * 0.7], x, [x[-1] * 1.4]])
        def steps(v, start, end):
            return np.concatenate([[start], v, [end]])
        ax1.fill_between(xs, steps(np.asarray(ecdf["lower"]), 0.0, ecdf["lower"][-1]),
                         steps(np.asarray(ecdf["upper"]), min(ecdf["halfwidth"], 1.0), 1.0), step="post",
                         color=SERIES["dkw"][0], alpha=0.35, lw=0,
                         label=f"DKW band ({100 * ecdf['confidence']:.0f}%)")
        ax1.step(xs, steps(np.asarray(ecdf["cdf"]), 0.0, 1.0), where="post", color=SERIES["ecdf"][0], lw=1.8,
                 label=f"all samples (n = {ecdf['n']})")
        styles = ["--", ":", "-.", (0, (5, 1, 1, 1))]
        colours = [COLOURS["vermilion"], COLOURS["green"], COLOURS["purple"], COLOURS["black"]]
        samples = block.get("samples") or {}
        if len(samples) > 1:
            for k, (name, s) in enumerate(samples.items()):
                se = s.get("ecdf")
                if not se or not se.get("n"):
                    continue
                sx = np.asarray(se["x"])
                ax1.step(np.concatenate([[sx[0] * 0.7], sx, [sx[-1] * 1.4]]),
                         steps(np.asarray(se["cdf"]), 0.0, 1.0), where="post",
                         color=colours[k % 4], ls=styles[k % 4], lw=1.1, label=_t(f"{name} (n = {se['n']})"))
        ax1.set_xscale("log")
    unres = [u for u in population.get("unresolved") or [] if _key(u.get("element")) == el_key]
    for k, u in enumerate(unres):
        if u.get("upper_bound_days"):
            c, _, m = SERIES["unresolved"]
            ax1.plot([u["upper_bound_days"]], [0.02], marker=m, color=c, ls="none", ms=6,
                     label="upper bound (not in ECDF)" if k == 0 else None)
    ax1.set_ylim(-0.02, 1.02)
    apply_axes_style(ax1, xlabel="time since boundary formed (days, log scale)",
                     ylabel="fraction of dated boundaries", title="Empirical CDF of boundary times")
    if ax1.get_legend_handles_labels()[0]:
        ax1.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.24), ncol=2, frameon=False)

    kde = camp.get("kde")
    _event_spans(ax2, events, log=True)
    if kde:
        g = np.asarray(kde["log10_time_days"])
        ax2.fill_between(g, kde["band_low"], kde["band_high"], color=SERIES["kde"][0], alpha=0.25, lw=0,
                         label="bootstrap band (95%)")
        ax2.plot(g, kde["density_per_log10_day"], color=SERIES["kde"][0], lw=1.8,
                 label=f"kernel density (h = {kde['bandwidth_log10']:.2f})")
        meds = [math.log10(b["median_days"]) for b in population.get("boundaries") or []
                if _key(b.get("element")) == el_key]
        ymax = max(max(kde["band_high"]), max(kde["density_per_log10_day"])) or 1.0
        ax2.plot(meds, [-0.04 * ymax] * len(meds), "|", color=COLOURS["black"], ms=9, label="boundary medians")
    for k, e in enumerate(events):
        if e.get("median_days"):
            ax2.axvline(math.log10(e["median_days"]), color=COLOURS["black"], ls="--", lw=0.8)
            ax2.text(math.log10(e["median_days"]), 1.0, _t(f" {e['id']}"), transform=ax2.get_xaxis_transform(),
                     fontsize=7, va="top")
    apply_axes_style(ax2, xlabel="log10(time since boundary formed / days)", ylabel="density (per log10 day)",
                     title="Kernel density of log10 time")
    if ax2.get_legend_handles_labels()[0]:
        ax2.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.24), ncol=2, frameon=False)
    fig.suptitle(_t(f"Recharge chronology: {block.get('element') or 'unknown element'}"), fontsize=11, x=0.02,
                 ha="left")
    return fig


def _events_figure(el_key, block, population):
    rows = [b for b in population.get("boundaries") or [] if _key(b.get("element")) == el_key]
    unres = [u for u in population.get("unresolved") or [] if _key(u.get("element")) == el_key]
    keys = sorted({(r["sample"], r["crystal"]) for r in rows + unres})
    n = max(len(keys), 1)
    height = min(1.4 + 0.24 * n, 40.0)
    fig = new_figure(8.0, height)
    ax = fig.add_subplot(1, 1, 1)
    fig.subplots_adjust(left=0.25, right=0.8, top=1 - 0.55 / height, bottom=0.6 / height)
    events = block.get("events") or []
    _event_spans(ax, events)
    ypos = {k: i for i, k in enumerate(keys)}
    markers = ["o", "s", "^", "D", "v", "P", "X"]
    colours = [COLOURS["blue"], COLOURS["vermilion"], COLOURS["green"], COLOURS["purple"], COLOURS["orange"],
               COLOURS["sky"], COLOURS["black"]]
    ev_index = {e["id"]: k for k, e in enumerate(events)}
    groups = {}  # one errorbar call per event (one per row is ~50x slower to build and draw)
    for r in rows:
        groups.setdefault(r.get("event"), []).append(r)
    for event, members in groups.items():
        k = ev_index.get(event, 0)
        med = np.array([r["median_days"] for r in members], dtype=float)
        lo = np.array([r["p2_5_days"] for r in members], dtype=float)
        hi = np.array([r["p97_5_days"] for r in members], dtype=float)
        y = [ypos[(r["sample"], r["crystal"])] for r in members]
        ax.errorbar(med, y, xerr=[med - lo, hi - med], fmt=markers[k % 7], color=colours[k % 7], ms=5,
                    capsize=2, lw=1.0, label=_t(event))
    bounds = [(u["upper_bound_days"], ypos[(u["sample"], u["crystal"])]) for u in unres if u.get("upper_bound_days")]
    if bounds:
        c, _, m = SERIES["unresolved"]
        ax.plot(*zip(*bounds), marker=m, color=c, ls="none", ms=7, label="upper bound")
    ax.set_yticks(range(len(keys)))
    ax.set_yticklabels([_t(f"{s} / {c}") for s, c in keys], fontsize=7)
    ax.set_ylim(-0.7, len(keys) - 0.3)
    ax.invert_yaxis()
    if rows or unres:
        ax.set_xscale("log")
    apply_axes_style(ax, xlabel="time since boundary formed (days, log scale; bars: 95%)",
                     ylabel="sample / crystal",
                     title=_t(f"Dated boundaries and recharge events: {block.get('element') or 'unknown'}"))
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, title="event")
    return fig


def _key(element) -> str:
    return "unknown" if element is None else str(element)


def render_population_figures(population, fig_dir, *, formats=("png",)) -> dict:
    """Chronology figures per dated element: ECDF + KDE, and the event strip plot.

    Returns ``{element: {"chronology": [paths], "events": [paths]}}``.
    """
    fig_dir = Path(fig_dir)
    out = {}
    for el_key, block in (population.get("elements") or {}).items():
        if not (block.get("campaign") or {}).get("n_boundaries") and not any(
                _key(u.get("element")) == el_key for u in population.get("unresolved") or []):
            continue
        name = slug(el_key)
        f1 = _chronology_figure(el_key, block, population)
        p1 = _save(f1, fig_dir / f"chronology-{name}.png", formats)
        f2 = _events_figure(el_key, block, population)
        p2 = _save(f2, fig_dir / f"events-{name}.png", formats)
        out[el_key] = {"chronology": p1, "events": p2}
    return out
