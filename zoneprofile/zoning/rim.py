"""A second look for a thin zone at the rim.

The step detector (:mod:`zoneprofile.zoning.steps`) tests each candidate with
one slope shared by both sides of the jump. A thin zone grown at the rim
shortly before eruption often has steep zoning of its own (it grew from a
melt that was still changing), and the zone inside it another slope; a shared
slope then fits neither side, and a real step of several mol% can fail the
test. Missing such a step is costly: the next boundary inward is then dated
as if the rim zone were part of it, many times too old.

Between the rim and the first step found, this search compares two models of
all points there, each with its break at the gap that fits it best:

- **jump**: a separate straight line on each side of a gap with a change of
  level at the gap (the zone's own zoning; 4 parameters);
- **no jump**: the better of a continuous line with a hinge at a gap (zoning
  that only changes slope; 3 parameters) and a cubic (smooth zoning).

The jump is kept when the drop of the residual sum of squares, in units of
the noise variance (the larger of the analytical noise and the jump model's
own scatter), exceeds the χ²₁ quantile of ``alpha`` shared (Bonferroni) among
the gaps tried, and the change is at least ``min_change``. A step found here
is reported like any other, with ``found_by = "rim search"``.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import chi2

from zoneprofile.zoning._local import median_spacing, ols
from zoneprofile.zoning.steps import Step

__all__ = ["find_rim_step", "MIN_SIDE_POINTS"]

#: points needed on each side of a jump (a line and its scatter)
MIN_SIDE_POINTS = 3


def _fit_at(t, y, on_rim, jump):
    cols = [np.ones_like(t), t * (1.0 - on_rim), t * on_rim] if jump else [np.ones_like(t), t, t * on_rim]
    if jump:
        cols.append(on_rim)
    return ols(np.column_stack(cols), y)


def _scan(xs, ys):
    """Residual sums of squares of the jump and hinge models at every gap, by running sums.

    Returns ``(j, rss_jump, rss_hinge)`` for the split indices ``j`` (points
    ``< j`` on the rim side). Each model is the least-squares fit that
    :func:`_fit_at` makes at one gap; here all gaps at once, in O(n) rather
    than one fit per gap (O(n²): minutes for 10⁵ points). A singular design
    gives NaN. Coordinates are centred and scaled first, so the running sums
    lose no more precision than the fits they replace.
    """
    m = xs.size
    js = np.arange(MIN_SIDE_POINTS, m - MIN_SIDE_POINTS + 1)
    if js.size == 0:
        return js, np.empty(0), np.empty(0)
    scale = max(float(np.ptp(xs)), 1e-12)
    u = (xs - xs.mean()) / scale
    v = ys - ys.mean()
    c = {k: np.concatenate([[0.0], np.cumsum(a)]) for k, a in
         {"n": np.ones(m), "u": u, "uu": u * u, "v": v, "uv": u * v, "vv": v * v}.items()}
    tot = {k: a[-1] for k, a in c.items()}
    left = {k: a[js] for k, a in c.items()}
    right = {k: tot[k] - left[k] for k in c}

    def line_rss(s):  # one straight line through a side: n, Σu, Σu², Σv, Σuv, Σv²
        with np.errstate(invalid="ignore", divide="ignore"):
            suu = s["uu"] - s["u"] ** 2 / s["n"]
            suv = s["uv"] - s["u"] * s["v"] / s["n"]
            svv = s["vv"] - s["v"] ** 2 / s["n"]
            out = svv - suv ** 2 / suu
        return np.where(suu > 1e-12 * s["n"], np.maximum(out, 0.0), np.nan)

    rss_jump = line_rss(left) + line_rss(right)
    # hinge: v = a + b·u + c·(u − ub)·[rim side], continuous at the gap ub
    ub = 0.5 * (u[js - 1] + u[js])
    l1 = left["u"] - left["n"] * ub                      # Σ_left (u − ub)
    l2 = left["uu"] - ub * left["u"]                     # Σ_left u (u − ub)
    l3 = left["uu"] - 2.0 * ub * left["u"] + left["n"] * ub ** 2   # Σ_left (u − ub)²
    a = np.empty((js.size, 3, 3))
    a[:, 0, 0], a[:, 0, 1], a[:, 0, 2] = tot["n"], tot["u"], l1
    a[:, 1, 0], a[:, 1, 1], a[:, 1, 2] = tot["u"], tot["uu"], l2
    a[:, 2, 0], a[:, 2, 1], a[:, 2, 2] = l1, l2, l3
    b = np.stack([np.full(js.size, tot["v"]), np.full(js.size, tot["uv"]), left["uv"] - ub * left["v"]], axis=1)
    diag = np.einsum("kii->ki", a)
    with np.errstate(invalid="ignore", divide="ignore"):
        good = np.all(diag > 0, axis=1) & (np.linalg.det(a) / np.prod(diag, axis=1) >= 1e-12)
    coef = np.full((js.size, 3), np.nan)
    if np.any(good):
        coef[good] = np.linalg.solve(a[good], b[good][..., None])[..., 0]
    rss_hinge = np.maximum(tot["vv"] - np.einsum("ki,ki->k", coef, b), 0.0)
    rss_hinge[~good] = np.nan
    return js, rss_jump, rss_hinge


def find_rim_step(x, y, noise_sd, steps, *, alpha=0.01, min_change=None, notes=None, alpha_note=0.2):
    """The step between the rim and the first known step, or None.

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
    notes : list, optional
        When given, a plain warning is appended for a jump that passes the looser
        ``alpha_note`` but not ``alpha`` (a possible step, not accepted: said, not omitted
        silently).

    Returns
    -------
    Step or None
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if not steps or x.size < 2 * MIN_SIDE_POINTS:
        return None
    if min_change is None:
        min_change = 3.0 * noise_sd
    spacing = median_spacing(x)
    first = min(steps, key=lambda s: s.position_um)
    hi_um = first.position_um - 0.5 * first.width_um - spacing
    idx = np.flatnonzero(x <= hi_um)
    if idx.size < 2 * MIN_SIDE_POINTS + 1:
        return None
    xs, ys = x[idx], y[idx]
    gaps = range(MIN_SIDE_POINTS, xs.size - MIN_SIDE_POINTS + 1)
    js, rss_jump, rss_hinge = _scan(xs, ys)
    if js.size == 0 or not np.any(np.isfinite(rss_jump)):
        return None
    best_hinge = float(np.nanmin(rss_hinge)) if np.any(np.isfinite(rss_hinge)) else np.inf
    # the best gap's jump model again by plain least squares, for its coefficients and covariance
    j = int(js[np.nanargmin(rss_jump)])
    xb = 0.5 * (xs[j - 1] + xs[j])
    coef, rss_j, cov = _fit_at(xs - xb, ys, (np.arange(xs.size) < j).astype(float), True)
    best_jump = None if cov is None else (j, rss_j, coef, cov, xb)
    if best_jump is None:
        return None
    u = (xs - xs.mean()) / max(float(np.ptp(xs)), 1e-9)
    _, rss_cubic, cov_c = ols(np.column_stack([np.ones_like(u), u, u**2, u**3]), ys)
    rss_null = min(best_hinge, rss_cubic if cov_c is not None else np.inf)
    j, rss, coef, cov, xb = best_jump
    m = xs.size
    s2 = max(rss / max(m - 4, 1), noise_sd**2)
    stat = (rss_null - rss) / s2
    delta = float(coef[3])
    if not np.isfinite(stat) or stat < chi2.isf(alpha / len(gaps), 1) or abs(delta) < min_change:
        if notes is not None and np.isfinite(stat) and stat >= chi2.isf(alpha_note / len(gaps), 1) \
                and abs(delta) >= min_change:
            notes.append(f"possible step at {xb:.1f} µm below the rim ({delta:+.2g}) not accepted: its evidence "
                         f"(Δχ² {stat:.1f}) is below the {chi2.isf(alpha / len(gaps), 1):.1f} needed; if it is real, "
                         "the next boundary inward is dated too old (list it with boundaries = [...] to date it)")
        return None
    se = float(np.sqrt(s2 * cov[3, 3]))
    gap = float(xs[j] - xs[j - 1])
    return Step(
        position_um=float(xb), position_sd_um=gap / np.sqrt(12.0),
        before=float(coef[0]), after=float(coef[0] + delta), change=delta, change_se=se,
        kind="reverse" if delta > 0 else "normal", width_um=0.0, width_resolved=False, sharpness="sharp",
        z_score=abs(delta) / se, gap_index=int(idx[j]), window_um=(float(xs[0]), float(xs[-1])),
        extra={"found_by": "rim search", "rim_search_statistic": float(stat)})
