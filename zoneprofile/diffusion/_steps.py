"""Finding steps in a profile: where a boundary is, how big it is, where its zones end.

Private helpers of :mod:`zoneprofile.diffusion.fitting`; :func:`find_boundaries`
is public through ``zoneprofile.diffusion``.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["find_boundaries"]


def _noise_sd(y):
    """Robust point-to-point scatter: MAD of first differences / (0.6745·√2)."""
    d = np.diff(y)
    if d.size < 2:
        return 0.0
    return float(np.median(np.abs(d - np.median(d))) / 0.6745 / math.sqrt(2.0))


def find_boundaries(distance_um, value, *, count=1, side_points=3):
    """Positions (µm) of the ``count`` largest steps of a profile.

    The step size at each gap between neighbouring points is the difference of
    the means of ``side_points`` points on either side; the largest, at least
    ``2·side_points`` points apart, win. Positions are gap midpoints.
    """
    x = np.asarray(distance_um, float)
    y = np.asarray(value, float)
    k = int(side_points)
    n = x.size
    if n < 2 * k:
        return []
    score = np.zeros(n - 1)
    for g in range(n - 1):
        lo = y[max(0, g - k + 1): g + 1]
        hi = y[g + 1: g + 1 + k]
        score[g] = abs(hi.mean() - lo.mean())
    out = []
    order = np.argsort(score)[::-1]
    taken = []
    for g in order:
        if all(abs(g - t) >= 2 * k for t in taken):
            taken.append(g)
            out.append(0.5 * (x[g] + x[g + 1]))
        if len(out) >= count:
            break
    return sorted(out)


def _running_mean(y, k):
    """Centred running mean over ``k`` points (shorter at the ends)."""
    y = np.asarray(y, float)
    c = np.concatenate([[0.0], np.cumsum(y)])
    h = k // 2
    i = np.arange(y.size)
    lo = np.clip(i - h, 0, y.size)
    hi = np.clip(i + h + 1, 0, y.size)
    return (c[hi] - c[lo]) / (hi - lo)


def _side_means(x, y, b, k=3):
    left = y[x < b][-k:]
    right = y[x > b][:k]
    return float(left.mean()), float(right.mean())

