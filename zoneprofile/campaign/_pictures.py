"""Pictures drawn with each crystal: the calibrated map and the crystal's report figure.

They are drawn in the worker that computes the crystal (in parallel) and
travel back as bytes with its record, to be cached beside it.
"""

from __future__ import annotations

import base64
import shutil
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["calibrated_image", "render_map", "render_figures"]

def calibrated_image(info, max_side=700):
    """The map converted to composition, outside the crystal blank, subsampled to ``max_side``.

    Returns ``(image or None, stride)``.
    """
    cal, signal, mask = info.get("_calibration"), info.get("_signal"), info.get("_mask")
    if cal is None or signal is None or not hasattr(cal, "to_composition"):
        return None, 1
    rows, cols = np.shape(signal)
    stride = max(1, int(np.ceil(max(rows, cols) / max_side)))
    sub = np.asarray(signal[::stride, ::stride], dtype=np.float32)
    image = np.asarray(cal.to_composition(sub), dtype=float)
    m = getattr(mask, "mask", None)
    factor = int(getattr(mask, "factor", 1) or 1)
    if m is not None:
        r = np.minimum(np.arange(0, rows, stride) // factor, m.shape[0] - 1)
        c = np.minimum(np.arange(0, cols, stride) // factor, m.shape[1] - 1)
        inside = np.asarray(m)[np.ix_(r, c)]
        image = np.where(inside, image, np.nan)
    return image, stride


def render_map(image, line, pixel_um, label) -> bytes:
    """PNG bytes of the (calibrated) map with the traverse line."""
    import io

    from matplotlib.figure import Figure

    data = np.asarray(image, dtype=float)
    fig = Figure(figsize=(4.2, 3.6), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    im = ax.imshow(data, cmap="cividis", origin="upper", interpolation="nearest")
    x0, y0, x1, y1 = line
    ax.plot([x0, x1], [y0, y1], color="white", lw=1.4)
    ax.plot([x0], [y0], marker="o", color="white", ms=4)
    ax.set_xlabel("column (pixel)")
    ax.set_ylabel("row (pixel)")
    if pixel_um:
        ax.set_title(f"{label}  (pixel {pixel_um:g} µm; dot = rim)", fontsize=8)
    cb = fig.colorbar(im, ax=ax, shrink=0.85)
    cb.set_label(label)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def render_figures(record: dict, formats, *, map_image=None) -> dict:
    """Draw the crystal's report figure here (in the worker); return ``{format: base64 bytes}``.

    Figures are drawn with the crystal, in parallel, and cached with its
    record, so a rerun does not draw unchanged crystals again. ``map_image``
    is ``(calibrated array, stride)``: the map panel shows it, the record
    does not keep it.
    """
    from zoneprofile._output import to_jsonable
    from zoneprofile.report import render_crystal_figure

    rec = to_jsonable({k: v for k, v in record.items() if k != "_figures"})
    folder = Path(tempfile.mkdtemp(prefix="zoneprofile-figure-"))
    try:
        m = rec.get("map")
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
        paths = render_crystal_figure(rec, folder / "crystal.png", formats=tuple(formats), map_dir=folder)
        return {Path(p).suffix.lstrip("."): base64.b64encode(Path(p).read_bytes()).decode("ascii") for p in paths}
    finally:
        shutil.rmtree(folder, ignore_errors=True)
