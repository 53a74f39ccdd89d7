"""Continuous zoning: the trend of composition within one zone."""

from __future__ import annotations

import numpy as np

from zoneprofile.zoning._local import ols

__all__ = ["zone_trend"]


def zone_trend(distance_um, value, noise_sd, *, z_min=3.0, min_total=None) -> dict:
    """Linear trend of one zone and whether it is flat, normal or reverse.

    Parameters
    ----------
    distance_um, value : array_like
        The zone's points (distance from the rim, µm).
    noise_sd : float
        Analytical noise (the scatter used is never below it).
    z_min : float
        Smallest ``|slope|/se`` for a trend to count (common practice: 3 sigma).
    min_total : float, optional
        Smallest change over the whole zone for a trend to count (default
        ``2 · noise_sd``): a statistically clear but tiny drift is still flat.

    Returns
    -------
    dict
        ``mean``, ``sd``, ``trend_per_um`` (change per µm moving toward the rim,
        so normal zoning is negative), ``trend_se``, ``kind`` ("flat",
        "normal" or "reverse"), ``n_points``.

    Notes
    -----
    Least-squares line ``y = a + b·x`` with x the distance from the rim; the
    trend toward the rim is ``-b``. Normal zoning (An falling toward the rim)
    therefore has a negative ``trend_per_um``.
    """
    x = np.asarray(distance_um, dtype=float)
    y = np.asarray(value, dtype=float)
    n = x.size
    out = {"n_points": int(n), "mean": float(np.mean(y)) if n else float("nan"),
           "sd": float(np.std(y, ddof=1)) if n > 1 else float("nan"),
           "trend_per_um": float("nan"), "trend_se": float("nan"), "kind": "flat"}
    if n < 3 or np.ptp(x) <= 0:
        return out
    coef, rss, cov = ols(np.column_stack([np.ones(n), x - x.mean()]), y)
    if cov is None:
        return out
    scatter = max(np.sqrt(rss / max(n - 2, 1)), noise_sd)
    se = scatter * np.sqrt(cov[1, 1])
    slope_to_rim = -float(coef[1])
    out["trend_per_um"] = slope_to_rim
    out["trend_se"] = float(se)
    total = abs(slope_to_rim) * float(np.ptp(x))
    floor = 2.0 * noise_sd if min_total is None else float(min_total)
    if se > 0 and abs(slope_to_rim) / se >= z_min and total >= floor:
        out["kind"] = "reverse" if slope_to_rim > 0 else "normal"
    return out
