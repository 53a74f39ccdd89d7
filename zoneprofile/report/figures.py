"""Figures of the report: one per crystal, two per dated element for the population.

Each function draws on its own matplotlib ``Figure`` (Agg canvas, no pyplot
state) and writes every requested format atomically. Axes always carry units.
"""

from __future__ import annotations

import io
import math
import re
from pathlib import Path

import numpy as np

from zoneprofile._output import write_bytes
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
    column = _t(column)
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
def _profile_panel(ax, record):
    prof = record.get("profile") or {}
    zones = record.get("zones") or {}
    column = zones.get("column") or ("An" if "An" in prof else None)
    if column is None:
        for k in prof:
            if k not in ("distance_um", "qc", "point"):
                column = k
                break
    x = np.asarray(prof.get("distance_um") or [], dtype=float)
    y = np.asarray(prof.get(column) or [], dtype=float) if column else np.empty(0)
    qc = list(prof.get("qc") or ["ok"] * x.size)
    for k, z in enumerate(zones.get("zones") or []):
        try:
            ax.axvspan(float(z["start_um"]), float(z["end_um"]), color=ZONE_FILLS[k % len(ZONE_FILLS)],
                       lw=0, zorder=0)
        except (KeyError, TypeError, ValueError):
            continue
    for b in zones.get("oscillatory_bands") or []:
        try:
            ax.axvspan(float(b["start_um"]), float(b["end_um"]), facecolor="none", edgecolor=COLOURS["grey"],
                       hatch="///", lw=0, zorder=0.5)
        except (KeyError, TypeError, ValueError):
            continue
    if x.size and y.size == x.size:
        good = np.array([q == "ok" for q in qc]) if len(qc) == x.size else np.ones(x.size, bool)
        c, ls, m = SERIES["profile"]
        ax.plot(x[good], y[good], color=c, ls=ls, marker=m, ms=2.5, lw=0.9, label=_t(column))
        if (~good).any():
            c, ls, m = SERIES["flagged"]
            ax.plot(x[~good], y[~good], color=c, ls="none", marker=m, ms=5, label="flagged point")
    seen = set()
    for s in zones.get("steps") or []:
        kind = s.get("kind")
        role = "step_reverse" if kind == "reverse" else "step_normal"
        c, ls, _ = SERIES[role]
        label = f"{kind or 'step'} step" if role not in seen else None
        seen.add(role)
        ax.axvline(float(s["position_um"]), color=c, ls=ls, lw=1.4, label=label)
    for k, r in enumerate(zones.get("resorption_surfaces") or []):
        c, ls, _ = SERIES["resorption"]
        ax.axvline(float(r["position_um"]), color=c, ls=ls, lw=1.6, label="resorption surface" if k == 0 else None)
    dated = record.get("boundaries") or []
    if dated and y.size:
        top = np.nanmax(y) if np.isfinite(y).any() else 1.0
        for k, b in enumerate(dated):
            ax.plot([float(b["position_um"])], [top], marker="v", color=COLOURS["black"], ms=6, ls="none",
                    label="dated boundary" if k == 0 else None)
    trace = None
    for b in dated:
        key = f"{b.get('element')}_ppm"
        if key in prof and len(prof[key]) == x.size:
            trace = key
            break
    if trace is not None:
        ax2 = ax.twinx()
        tv = np.asarray(prof[trace], dtype=float)
        ax2.plot(x, tv, color=COLOURS["green"], ls="-", marker="s", ms=1.8, lw=0.7, alpha=0.8)
        ax2.set_ylabel(_quantity_label(trace), fontsize=9, color=COLOURS["green"])
        ax2.tick_params(labelsize=8, colors=COLOURS["green"])
        ax2.spines["top"].set_visible(False)
        ax.plot([], [], color=COLOURS["green"], marker="s", ms=3, lw=0.7, label=f"{_t(trace[:-4])} (right axis)")
    apply_axes_style(ax, xlabel="distance from rim (µm)", ylabel=_quantity_label(column or "value"),
                     title=_t(f"Profile and zoning ({column})"))
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.24), ncol=3, frameon=False)


def _fit_panel(ax, b):
    curve = b.get("curve") or {}
    x = np.asarray(curve.get("distance_um") or [], dtype=float)
    element = b.get("element") or "value"
    if x.size:
        def arr(key):
            v = curve.get(key)
            return None if v is None or len(v) != x.size else np.asarray(v, dtype=float)

        low, high = arr("band_low"), arr("band_high")
        if low is not None and high is not None:
            ax.fill_between(x, low, high, color=SERIES["band"][0], alpha=0.35, lw=0, label="95% model band")
        init = arr("initial")
        if init is not None:
            c, ls, _ = SERIES["initial"]
            ax.plot(x, init, color=c, ls=ls, lw=1.0, label="initial step")
        data = arr("data")
        if data is not None:
            c, ls, m = SERIES["data"]
            ax.plot(x, data, color=c, ls=ls, marker=m, ms=2.8, label="data")
        model = arr("model")
        if model is not None:
            c, ls, _ = SERIES["model"]
            ax.plot(x, model, color=c, ls=ls, lw=1.6, label="best fit")
    else:
        ax.text(0.5, 0.5, "no curve stored", transform=ax.transAxes, ha="center", va="center", fontsize=8)
    ax.axvline(float(b["position_um"]), color=COLOURS["grey"], lw=0.8, ls=":")
    td = b.get("time_days") or {}
    tag = "≤ " if not b.get("resolved", True) else ""
    title = (f"{element} at {float(b['position_um']):.0f} µm: {tag}{format_days(td.get('median'))}\n"
             f"95%: {format_days(td.get('p2_5'))} – {format_days(td.get('p97_5'))}")
    apply_axes_style(ax, xlabel="distance from rim (µm)", ylabel=_t(f"{element} (ppm)"), title=_t(title))


def _load_map(m, map_dir):
    if m.get("image") is not None:
        return np.asarray(m["image"], dtype=float)
    rel = m.get("image_png") or m.get("picture_png")
    if rel and map_dir is not None:
        p = Path(map_dir) / rel
        if p.is_file():
            from matplotlib.image import imread

            return imread(str(p))
    return None


def _map_panel(ax, record, map_dir):
    m = record.get("map") or {}
    img = _load_map(m, map_dir)
    if img is None:
        ax.text(0.5, 0.5, "map image not found", transform=ax.transAxes, ha="center", va="center", fontsize=8)
        ax.set_axis_off()
        return
    px = m.get("pixel_um")
    scale = float(px) if px else 1.0
    unit = "µm" if px else "pixel"
    h, w = img.shape[:2]
    shown = ax.imshow(img, cmap=MAP_CMAP if img.ndim == 2 else None, origin="upper",
                      extent=(-0.5 * scale, (w - 0.5) * scale, (h - 0.5) * scale, -0.5 * scale),
                      interpolation="nearest")
    line = m.get("line")
    if line and len(line) == 4:
        x0, y0, x1, y1 = (float(v) * scale for v in line)
        ax.plot([x0, x1], [y0, y1], color=COLOURS["vermilion"], lw=1.6, label="traverse (rim → core)")
        ax.plot([x0], [y0], marker="o", color=COLOURS["vermilion"], ms=4)
        length = math.hypot(x1 - x0, y1 - y0)
        for k, b in enumerate(m.get("boundaries") or [] if px else []):
            try:
                d = float(b["position_um"])  # along the line, from its rim end
            except (KeyError, TypeError, ValueError):
                continue
            if length > 0 and 0 <= d <= length:
                f = d / length
                ax.plot([x0 + f * (x1 - x0)], [y0 + f * (y1 - y0)], marker="D", color=COLOURS["yellow"],
                        mec=COLOURS["black"], ms=5, ls="none", label="boundary" if k == 0 else None)
        ax.legend(fontsize=6.5, loc="upper center", bbox_to_anchor=(0.5, -0.24), ncol=2, frameon=False)
    if img.ndim == 2:
        cb = ax.figure.colorbar(shown, ax=ax, fraction=0.046, pad=0.03)
        cal = m.get("calibration") or {}
        column = cal.get("quantity") or cal.get("column") or (record.get("zones") or {}).get("column") or "An"
        cb.set_label(_quantity_label(str(column)), fontsize=8)
        cb.ax.tick_params(labelsize=7)
    apply_axes_style(ax, xlabel=f"x ({unit})", ylabel=f"y ({unit})", title="Map")
    ax.grid(False)


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
    fits = [b for b in (record.get("boundaries") or []) if b.get("curve")]
    has_map = bool(record.get("map"))
    n_fit_cols = max(1, min(len(fits), 3))
    n_fit_rows = math.ceil(len(fits) / 3) if fits else 0
    ncols = max(n_fit_cols, 2 if has_map else 1)
    nrows = 1 + n_fit_rows
    height = 3.5 * nrows + 0.5
    fig = new_figure(3.5 * ncols + 0.7, height)
    gs = fig.add_gridspec(nrows, ncols * 2, hspace=0.8, wspace=1.3, left=0.09, right=0.9,
                          top=1 - 0.75 / height, bottom=(0.95 if fits else 0.6) / height)
    if has_map:
        top = gs[0, :].subgridspec(1, 2, width_ratios=[ncols - 1, 1], wspace=0.55)
        ax_prof = fig.add_subplot(top[0, 0])
        ax_map = fig.add_subplot(top[0, 1])
        _map_panel(ax_map, record, map_dir)
    else:
        ax_prof = fig.add_subplot(gs[0, :])
    _profile_panel(ax_prof, record)
    handles = {}
    for k, b in enumerate(fits):
        r, c = divmod(k, 3)
        ax = fig.add_subplot(gs[1 + r, 2 * c: 2 * c + 2])
        _fit_panel(ax, b)
        for h, lab in zip(*ax.get_legend_handles_labels()):
            handles.setdefault(lab, h)
    if handles:  # one legend for all fit panels (a legend per panel doubles the drawing time)
        fig.legend(list(handles.values()), list(handles.keys()), loc="lower center", ncol=len(handles),
                   fontsize=7.5, frameon=False, bbox_to_anchor=(0.5, 0.0))
    fig.suptitle(_t(f"{record.get('sample', '')} / {record.get('crystal', '')} ({record.get('mineral', '')})"),
                 fontsize=11, x=0.02, ha="left")
    return _save(fig, Path(path), formats)


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
    labelled = set()
    for r in rows:
        k = ev_index.get(r.get("event"), 0)
        y = ypos[(r["sample"], r["crystal"])]
        med, lo, hi = r["median_days"], r["p2_5_days"], r["p97_5_days"]
        lab = _t(r.get("event")) if r.get("event") not in labelled else None
        labelled.add(r.get("event"))
        ax.errorbar([med], [y], xerr=[[med - lo], [hi - med]], fmt=markers[k % 7], color=colours[k % 7], ms=5,
                    capsize=2, lw=1.0, label=lab)
    for j, u in enumerate(unres):
        if u.get("upper_bound_days"):
            c, _, m = SERIES["unresolved"]
            ax.plot([u["upper_bound_days"]], [ypos[(u["sample"], u["crystal"])]], marker=m, color=c, ls="none",
                    ms=7, label="upper bound" if j == 0 else None)
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
