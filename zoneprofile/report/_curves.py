"""A dated boundary's curves and measured points on one axis, as the figures draw them.

Used where a boundary's record part is made: by a campaign for each fit
(``campaign/_pipeline.py``) and by ``fit --plot``
(:func:`zoneprofile.report.figures.boundary_entry`), so both draw the same.
"""

from __future__ import annotations

import numpy as np

__all__ = ["merged_curve"]


def _finite_list(a) -> list:
    return [v if np.isfinite(v) else None for v in np.asarray(a, dtype=float).tolist()]


def merged_curve(curve: dict, points: dict) -> dict:
    """Model curves and measured points on one axis (the sorted union of both grids).

    Model, initial profile and band are interpolated at the data positions
    (their grid is dense); the data are null between data positions. Plots
    then show the points where they were measured and the curves unbroken.
    """
    gx = np.asarray(curve.get("distance_um") if curve.get("distance_um") is not None else [], dtype=float)
    px = np.asarray(points.get("distance_um") if points.get("distance_um") is not None else [], dtype=float)
    pv = np.asarray(points.get("value") if points.get("value") is not None else [], dtype=float)
    if gx.size == 0:
        return {"distance_um": _finite_list(px), "data": _finite_list(pv)}
    x = np.union1d(gx, px)
    out = {"distance_um": _finite_list(x)}
    inside = (x >= gx.min()) & (x <= gx.max())
    for name in ("model", "initial", "band_low", "band_high"):
        values = curve.get(name)
        if values is None or len(values) != gx.size:
            continue
        y = np.interp(x, gx, np.asarray(values, dtype=float))
        out[name] = _finite_list(np.where(inside, y, np.nan))
    data = np.full(x.size, np.nan)
    if px.size and pv.size == px.size:
        data[np.searchsorted(x, px)] = pv
    out["data"] = _finite_list(data)
    psd = points.get("sd")  # 1 sd per point when known: error bars in the figures
    if psd is not None and len(psd) == px.size and px.size:
        sd = np.full(x.size, np.nan)
        sd[np.searchsorted(x, px)] = np.asarray(psd, dtype=float)
        out["data_sd"] = _finite_list(sd)
    return out
