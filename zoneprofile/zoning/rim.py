"""A second look for a thin zone at the rim.

The step detector (:mod:`zoneprofile.zoning.steps`) tests each candidate with
one slope shared by both sides of the jump. A thin zone grown at the rim
shortly before eruption often has steep zoning of its own (it grew from a
melt that was still changing), and the zone inside it another slope; a shared
slope then fits neither side, and a real step of several mol% can fail the
test. Missing such a step is costly: the next boundary inward is then dated
as if the rim zone were part of it, many times too old.

Between the rim and the first step found, this search tests a jump with a
**separate straight line on each side** (the zone's own zoning): at each gap
with at least three points a side, the change of level at the gap is
estimated with its standard error, and the largest ``|Δ|/se`` is kept. The
null model is a continuous line with a hinge at the gap (zoning that only
changes slope), so a change of slope alone does not make a step. The
false-alarm rate ``alpha`` is shared (Bonferroni) among the gaps and the two
variants tried (all points, or the two points next to the gap left out as
lying on the blurred slope). A step found here is reported like any other,
with ``found_by = "rim search"``.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr, stdtr

from zoneprofile.zoning._local import median_spacing, ols
from zoneprofile.zoning.steps import Step

__all__ = ["find_rim_step", "MIN_SIDE_POINTS"]

#: points needed on each side of a jump (a line and its scatter)
MIN_SIDE_POINTS = 3


def _jump_test(x, y, j, skip, lo_um, hi_um, noise_sd):
    """Jump at the gap between points j-1 and j, a separate line on each side."""
    xb = 0.5 * (x[j - 1] + x[j])
    rim = (x >= lo_um) & (x < xb - skip)
    core = (x > xb + skip) & (x <= hi_um)
    rim[j:] = False
    core[:j] = False
    if rim.sum() < MIN_SIDE_POINTS or core.sum() < MIN_SIDE_POINTS:
        return None
    idx = np.flatnonzero(rim | core)
    t = x[idx] - xb
    on_rim = (idx < j).astype(float)
    design = np.column_stack([np.ones_like(t), t * (1.0 - on_rim), t * on_rim, on_rim])
    coef, rss, cov = ols(design, y[idx])
    if cov is None:
        return None
    m = idx.size
    local = float(np.sqrt(rss / max(m - 4, 1)))
    s = max(local, noise_sd)
    se = s * float(np.sqrt(cov[3, 3]))
    z = abs(float(coef[3])) / se
    p = float(2.0 * stdtr(max(m - 4, 1), -z)) if local > noise_sd else float(2.0 * ndtr(-z))
    return {"j": j, "xb": xb, "change": float(coef[3]), "se": se, "z": z, "p": p,
            "core_value": float(coef[0]), "rim_value": float(coef[0] + coef[3]), "scatter": s,
            "lo": float(x[idx[0]]), "hi": float(x[idx[-1]])}


def _rss(x, y, r, lo_um, hi_um):
    """Residual sum of squares of the two-line fit of test ``r`` (all points of its window)."""
    j = r["j"]
    idx = np.flatnonzero((x >= lo_um) & (x <= hi_um))
    t = x[idx] - r["xb"]
    on_rim = (idx < j).astype(float)
    design = np.column_stack([np.ones_like(t), t * (1.0 - on_rim), t * on_rim, on_rim])
    return ols(design, y[idx])[1]


def find_rim_step(x, y, noise_sd, steps, *, alpha=0.01, min_change=None, max_points=None):
    """The most significant step between the rim and the first known step, or None.

    Parameters
    ----------
    x, y : ndarray
        Distances from the rim (µm, increasing) and values.
    noise_sd : float
        Analytical 1-sigma noise of ``y``.
    steps : list of Step
        Steps already found; the search stops short of the first one (its
        slope and one spacing beyond), and is not made without one.
    alpha : float
        False-alarm rate of the whole search.
    min_change : float, optional
        Smallest change reported (default 3 × noise).

    Returns
    -------
    Step or None
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if not steps or x.size < 2 * MIN_SIDE_POINTS:
        return None
    spacing = median_spacing(x)
    first = min(steps, key=lambda s: s.position_um)
    hi_um = first.position_um - 0.5 * first.width_um - spacing
    lo_um = float(x[0])
    if min_change is None:
        min_change = 3.0 * noise_sd
    gaps = [j for j in range(1, x.size) if lo_um < 0.5 * (x[j - 1] + x[j]) < hi_um]
    tests = []
    for j in gaps:
        for skip in (0.0, spacing):
            r = _jump_test(x, y, j, skip, lo_um, hi_um, noise_sd)
            if r is not None:
                tests.append(r)
    if not tests:
        return None
    best = max(tests, key=lambda r: r["z"])
    if best["p"] > alpha / len(tests) or abs(best["change"]) < min_change:
        return None
    # the position: the gap next to the best test where the two lines fit best with all points
    # (leaving out points moves the largest |Δ|/se to a gap beside the blurred slope)
    near = [r for j in (best["j"] - 1, best["j"], best["j"] + 1) if j in gaps
            for r in [_jump_test(x, y, j, 0.0, lo_um, hi_um, noise_sd)] if r is not None]
    if near:
        pick = near[int(np.argmin([_rss(x, y, r, lo_um, hi_um) for r in near]))]
        if np.sign(pick["change"]) == np.sign(best["change"]):
            best = dict(best, j=pick["j"], xb=pick["xb"], core_value=pick["core_value"],
                        rim_value=pick["rim_value"], change=pick["change"])
    k = best["j"]
    gap = float(x[k] - x[k - 1])
    delta = best["change"]
    return Step(
        position_um=float(best["xb"]), position_sd_um=gap / np.sqrt(12.0),
        before=best["core_value"], after=best["rim_value"], change=delta, change_se=best["se"],
        kind="reverse" if delta > 0 else "normal", width_um=0.0, width_resolved=False, sharpness="sharp",
        z_score=float(best["z"]), gap_index=int(k), window_um=(best["lo"], best["hi"]),
        extra={"found_by": "rim search"})
