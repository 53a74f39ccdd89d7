"""Pictures drawn with each crystal: the calibrated map and the crystal's report figure.

They are drawn in the worker that computes the crystal (in parallel) and
travel back as bytes with its record, to be cached beside it.
"""

from __future__ import annotations

import base64

import numpy as np

from zoneprofile.maps._picture import calibrated_image  # also drawn by map --plot

__all__ = ["calibrated_image", "render_map", "render_figures"]

def render_map(image, line, pixel_um, label) -> bytes:
    """PNG bytes of the (calibrated) map with the traverse line (dot = rim end), a colour bar and units."""
    from zoneprofile.report._canvas import Axes, Canvas, colour_bar, colour_bar_width, colour_image

    data = np.asarray(image, dtype=float)
    rgba, lo, hi = colour_image(data, "cividis")
    rows, cols = data.shape[:2]
    xlim, ylim = (-0.5, cols - 0.5), (-0.5, rows - 0.5)
    height = 260.0
    k = min(300.0 / (cols or 1), height / (rows or 1))
    bw, bh = k * cols, k * rows
    left = 12 + Axes.left_margin(ylim, bh)
    top = 34.0
    canvas = Canvas(left + bw + 14 + 11 + colour_bar_width(lo, hi, bh) + 10, top + bh + 52)
    ax = Axes(canvas, (left, top, left + bw, top + bh), xlim, ylim, inverted=True)
    canvas.image(rgba, left, top, left + bw, top + bh)
    x0, y0, x1, y1 = line
    # white with a dark rim, so the line reads on bright and dark parts of the map
    for colour, width, size in (("#000000", 2.6, 6.5), ("#FFFFFF", 1.4, 5.0)):
        canvas.line(ax.x([x0, x1]), ax.y([y0, y1]), colour, width)
        canvas.markers(ax.x([x0]), ax.y([y0]), "o", size, colour)
    title = f"{label}  (pixel {pixel_um:g} µm; dot = rim)" if pixel_um else f"{label}  (dot = rim)"
    ax.frame(xlabel="column (pixel)", ylabel="row (pixel)", title=title)
    colour_bar(canvas, (left + bw + 14, top, left + bw + 25, top + bh), lo, hi, "cividis", label=label)
    return canvas.png()


def render_figures(record: dict, formats, *, map_image=None, width="double") -> dict:
    """Draw the crystal's report figure here (in the worker); return ``{format: base64 bytes}``.

    Figures are drawn with the crystal, in parallel, and cached with its
    record, so a rerun does not draw unchanged crystals again. ``map_image``
    is ``(calibrated array, stride)``: the map panel shows it, the record
    does not keep it. Only the parts of the record that the figure shows are
    passed on (no copy of the whole record).
    """
    from zoneprofile.report.figures import crystal_figure_bytes

    rec = {k: record[k] for k in ("sample", "crystal", "mineral", "profile", "zones", "boundaries", "error")}
    rec["crystal_model"] = record.get("crystal_model")  # its boundaries and curves are drawn
    rec["trace_profile"] = record.get("trace_profile")  # the laser traverse the model was fitted to
    m = record["map"]
    if isinstance(m, dict):
        m = {k: v for k, v in m.items() if k != "image_png_base64"}
        if map_image is not None:
            image, stride = map_image
            m["image"] = image
            m["line"] = [v / stride for v in m["line"]]
            pixel = record["parameters"].get("pixel_um")
            m["pixel_um"] = pixel * stride if pixel else None
            if not pixel:
                m["boundaries"] = []
        rec["map"] = m
    drawn = crystal_figure_bytes(rec, tuple(formats), width=width)
    return {fmt: base64.b64encode(data).decode("ascii") for fmt, data in drawn.items()}
