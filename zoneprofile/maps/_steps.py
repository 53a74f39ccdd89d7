"""Locating composition steps on a map profile (where the boundary geometry is measured).

Not the zoning analysis (that is ``zoneprofile.zoning``): a small detector that
finds the boundaries a line crosses so their orientation can be measured.
Candidates are peaks of the derivative-of-Gaussian response; a candidate is
kept when the medians of the plateaux either side differ by more than
``min_t`` times their standard error. The position is where the smoothed
profile crosses the mid-level between the plateaux.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage as ndi

__all__ = ["find_steps", "robust_noise_sd"]


def robust_noise_sd(values) -> float:
    """Point-to-point noise sd from the MAD of first differences (common practice)."""
    d = np.diff(np.asarray(values, float))
    if d.size < 3:
        return float("nan")
    return float(1.4826 * np.median(np.abs(d - np.median(d))) / np.sqrt(2.0))


def _peaks(y, min_distance):
    """Local maxima of ``y``, the higher one kept when two lie closer than ``min_distance``."""
    idx = np.flatnonzero((y[1:-1] > y[:-2]) & (y[1:-1] >= y[2:])) + 1
    kept = []
    for i in idx[np.argsort(-y[idx], kind="stable")]:
        if all(abs(i - k) >= min_distance for k in kept):
            kept.append(int(i))
    return np.array(sorted(kept), dtype=int)


def _crossing(x, y, level, lo, hi, near):
    """Position where ``y`` crosses ``level`` within [lo, hi], closest to index ``near``."""
    seg = y[lo:hi + 1] - level
    idx = np.flatnonzero(seg[:-1] * seg[1:] <= 0)
    if idx.size == 0:
        return float(x[near])
    j = lo + int(idx[np.argmin(np.abs(lo + idx - near))])
    y0, y1 = y[j] - level, y[j + 1] - level
    f = 0.0 if y1 == y0 else y0 / (y0 - y1)
    return float(x[j] + f * (x[j + 1] - x[j]))


def find_steps(distance, value, *, sigma_samples=2.0, min_t=6.0, min_step=0.0, plateau=8):
    """Find steps in a profile.

    Returns
    -------
    list of dict
        ``position, before, after, change, width, index, t`` (distances in the
        units of ``distance``; ``width`` is the 1-sigma width of an erf-shaped
        step from its 25-75 % span).
    """
    x = np.asarray(distance, float)
    y = np.asarray(value, float)
    n = y.size
    if n < 2 * plateau + 4:
        return []
    noise = robust_noise_sd(y)
    if not noise > 0:
        noise = max(1e-9, float(np.std(y)) * 1e-3)
    smooth = ndi.gaussian_filter1d(y, sigma_samples, mode="nearest")
    grad = np.abs(ndi.gaussian_filter1d(y, sigma_samples, order=1, mode="nearest"))
    peaks = _peaks(grad, max(2, int(3 * sigma_samples)))
    steps = []
    for p in peaks:
        g = grad[p]
        left = p
        while left > 0 and grad[left] > 0.2 * g:
            left -= 1
        right = p
        while right < n - 1 and grad[right] > 0.2 * g:
            right += 1
        a0, b1 = max(0, left - plateau), min(n, right + 1 + plateau)
        if left - a0 < 3 or b1 - (right + 1) < 3:
            continue
        before = float(np.median(y[a0:left + 1]))
        after = float(np.median(y[right:b1]))
        change = after - before
        se = noise * 1.2533 * np.sqrt(1.0 / (left + 1 - a0) + 1.0 / (b1 - right))
        t = abs(change) / se
        if t < min_t or abs(change) < min_step:
            continue
        mid = 0.5 * (before + after)
        pos = _crossing(x, smooth, mid, left, right, p)
        q25 = _crossing(x, smooth, before + 0.25 * change, left, right, p)
        q75 = _crossing(x, smooth, before + 0.75 * change, left, right, p)
        width = abs(q75 - q25) / 1.349
        steps.append({"position": pos, "before": before, "after": after, "change": change,
                      "width": width, "index": int(p), "t": float(t)})
    # overlapping candidates describing one step: keep the strongest
    steps.sort(key=lambda s: -abs(s["change"]) * s["t"])
    kept = []
    for s in steps:
        if all(abs(s["position"] - k["position"]) > 2 * max(s["width"], k["width"], 1e-9) or
               np.sign(s["change"]) != np.sign(k["change"]) for k in kept):
            kept.append(s)
    kept.sort(key=lambda s: s["position"])
    return kept
