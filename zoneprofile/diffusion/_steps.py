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


def _other_steps(x, y, b0, min_step, *, side_points=3):
    """Positions of significant steps other than the one at ``b0``.

    A step is significant when its size (difference of the means of
    ``side_points`` points on either side) exceeds both ``min_step`` and four
    times the point-to-point scatter, and at least a quarter of the largest step.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if x.size < 2 * side_points + 2:
        return []
    noise = _noise_sd(y)
    cands = find_boundaries(x, y, count=8, side_points=side_points)
    sizes = []
    for c in cands:
        lo, hi = _side_means(x, y, c, side_points)
        sizes.append(abs(hi - lo))
    if not sizes:
        return []
    biggest = max(sizes)
    spacing = float(np.median(np.diff(x)))
    tol = max(3.0 * noise, 0.1 * biggest)
    out = []
    for c, size in zip(cands, sizes):
        if size < max(min_step, 4.0 * noise, 0.25 * biggest) or abs(c - b0) <= 3 * spacing:
            continue
        # a separate zone boundary has a plateau between it and b0 (three points
        # within the noise); points on the flank of one diffused step do not
        between = y[(x > min(b0, c)) & (x < max(b0, c))]
        runs = [np.ptp(between[i:i + 3]) for i in range(max(between.size - 2, 0))]
        if runs and min(runs) <= tol:
            out.append(float(c))
    return out


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

