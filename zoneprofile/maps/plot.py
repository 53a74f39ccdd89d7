"""Figure of a map profile (``map --plot``): the report's profile and map panels, drawn by the report's code.

There is one figure system (:mod:`zoneprofile.report.figures`): the map
profile becomes the record parts a campaign stores for a mapped crystal
(``profile`` and ``map``, the calibrated image subsampled as the campaign
subsamples it) and is drawn by the same panel code (docs/report.md,
"Figures"). Colour map: cividis (perceptually uniform, readable with
colour-vision deficiency).
"""

from __future__ import annotations

import numpy as np

__all__ = ["plot_map_profile", "map_record"]


def map_record(profile, info, *, column="An") -> dict:
    """The record parts (``profile``, ``zones`` column, ``map``) the report draws for this map profile.

    ``info`` must come from ``extract_profile(..., return_objects=True)``.
    """
    from zoneprofile.maps._picture import calibrated_image

    image, stride = calibrated_image(info)
    pixel = (info.get("image") or {}).get("pixel_um")
    m = {"calibration": dict(info.get("calibration") or {}, quantity=column),
         "boundaries": list(info.get("boundaries") or []) if pixel else [],
         "pixel_um": pixel * stride if pixel else None}
    if image is not None:
        m["image"] = image
    line = info.get("line")
    if line:
        m["line"] = [float(line[k]) / stride for k in ("x0", "y0", "x1", "y1")]
    prof = {"distance_um": np.asarray(profile["distance_um"], dtype=float).tolist(),
            column: np.asarray(profile[column], dtype=float).tolist(),
            "qc": [str(q) for q in profile["qc"]]}
    if f"{column}_sd" in profile:
        prof[f"{column}_sd"] = np.asarray(profile[f"{column}_sd"], dtype=float).tolist()
    return {"profile": prof, "zones": {"column": column}, "boundaries": [], "map": m}


def plot_map_profile(profile, info, path=None, *, column="An", width="double"):
    """Draw the figure; write it to ``path`` (PNG at 300 dpi, SVG or PDF by extension) if given.

    Returns the :class:`~zoneprofile.report._canvas.Canvas` (its
    ``matplotlib_figure()`` gives a matplotlib Figure of the same drawing).
    """
    from zoneprofile.report.figures import map_canvas, write_figure

    canvas = map_canvas(map_record(profile, info, column=column), width=width)
    if path is not None:
        write_figure(canvas, path)
    return canvas
