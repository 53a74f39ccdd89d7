"""Zone stratigraphy: the ordered list of zones from core to rim."""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile.zoning.trends import zone_trend

__all__ = ["build_zones", "zones_table", "ZONE_COLUMNS"]

#: columns of the paste-ready zone table, in order
ZONE_COLUMNS = ("zone", "start_um", "end_um", "n_points", "mean", "sd", "trend_per_um", "trend_se", "kind",
                "species", "boundary_inner", "boundary_outer")


def build_zones(distance_um, value, noise_sd, boundaries, *, exclude_um=()):
    """Zones between boundaries, ordered core → rim.

    Parameters
    ----------
    distance_um, value : array_like
        The profile (distance from the rim, µm).
    noise_sd : float
        Analytical noise.
    boundaries : sequence of float
        Step positions (µm).
    exclude_um : sequence of (low, high)
        Stretches left out of the zone statistics (the slopes of gradational
        steps).

    Returns
    -------
    list of dict
        ``zone`` (1 = innermost), ``start_um`` < ``end_um`` (the zone spans
        these distances from the rim; ``end_um`` is its core side),
        ``n_points``, ``mean``, ``sd``, ``trend_per_um`` (per µm toward the rim),
        ``trend_se``, ``kind``, ``indices`` (point indices).
    """
    x = np.asarray(distance_um, dtype=float)
    y = np.asarray(value, dtype=float)
    edges = [float(x[0])] + sorted(float(b) for b in boundaries) + [float(x[-1])]
    keep = np.ones(x.size, dtype=bool)
    for a, b in exclude_um:
        keep &= ~((x > a) & (x < b))
    zones = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        inside = (x >= lo) & (x <= hi) & keep
        idx = np.flatnonzero(inside)
        stats = zone_trend(x[idx], y[idx], noise_sd)
        zones.append({"start_um": lo, "end_um": hi, **stats, "indices": idx})
    zones.reverse()  # core first
    for i, z in enumerate(zones, start=1):
        z["zone"] = i
    return zones


def zones_table(zones) -> pd.DataFrame:
    """The zones as a paste-ready table (one row per zone, core first)."""
    rows = []
    for z in zones:
        rows.append({c: z.get(c) for c in ZONE_COLUMNS} | {k: v for k, v in z.items()
                                                          if k.startswith("melt_") or k.startswith("mixing")})
    table = pd.DataFrame(rows)
    digits = {"start_um": 2, "end_um": 2, "boundary_inner": 2, "boundary_outer": 2, "mean": 3, "sd": 3,
              "trend_per_um": 5, "trend_se": 5}
    for col in table.columns:
        if col in digits:
            table[col] = pd.to_numeric(table[col], errors="coerce").round(digits[col])
        elif col.startswith("melt_") or col.startswith("mixing"):
            table[col] = pd.to_numeric(table[col], errors="coerce").round(4)
    return table
