"""Growth steps: abrupt changes of composition between zones.

Method
------
1. **Candidates** by penalised segmentation of the values into constant pieces
   (least-squares cost, solved exactly by PELT, Killick, Fearnhead & Eckley
   2012, J. Am. Stat. Assoc. 107:1590, as implemented in ``ruptures``' kernel
   change-point search with a linear kernel). The penalty per change point is
   ``penalty_factor · σ² · ln n``; ``penalty_factor = 2`` is the BIC, the default
   of 1 is deliberately liberal because every candidate is tested next.
2. **Local test** of each candidate on a window of ``±window_um`` around it
   (cut at steps already accepted): a straight line plus a jump at the
   candidate, fitted by least squares, against a smooth cubic. A candidate
   is kept when the jump is significant (``|Δ|/se(Δ) ≥ z_min``, with se from
   the window's own scatter, never below the analytical noise), when the line
   plus jump fits better than a cubic (with one parameter more), and when ``|Δ| ≥ min_change``
   (by default three times the noise). Averaging over a window of several
   wavelengths is what keeps the half-cycles of an oscillatory band from
   passing as steps: they do not change the mean level.
   Candidates are accepted greedily, most significant first.
3. **Refinement** of each accepted step by a local fit of a line plus an erf
   step with free position and width, which gives the position (µm), the
   values on both sides, the change, the 10–90 % width and a position
   uncertainty.

The local tests of all candidates of a round are fitted as one batch, the erf
fit takes its forward differences in one pass, and repeated work between
calls on one profile is shared (``reuse``); none of this changes a result
(docs/methods/steps.md).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field, replace

import numpy as np
from scipy.special import ndtr, ndtri, stdtr

from zoneprofile.zoning._local import median_spacing, ols

__all__ = ["Step", "detect_steps", "candidate_change_points", "fit_step", "ERF_WIDTH_FACTOR"]

#: 10–90 % width of an erf step in units of its standard deviation: 2·Φ⁻¹(0.9)
ERF_WIDTH_FACTOR = 2.563103131089201


@dataclass
class Step:
    """One step between two zones (distances from the rim, µm)."""

    position_um: float
    position_sd_um: float
    before: float  # value on the core side of the boundary
    after: float  # value on the rim side of the boundary
    change: float  # after - before
    change_se: float
    kind: str  # "normal" (falls toward the rim) or "reverse" (rises toward the rim)
    width_um: float  # 10-90 % width of the fitted erf step
    width_resolved: bool  # False when the width is below the point spacing
    sharpness: str  # "sharp" or "gradational"
    z_score: float
    gap_index: int  # the step lies between points gap_index-1 (rim side) and gap_index
    window_um: tuple = (float("nan"), float("nan"))
    extra: dict = field(default_factory=dict)
    beats_smooth: bool = field(default=True, repr=False)
    plausible: bool = field(default=True, repr=False)

    def to_dict(self) -> dict:
        d = asdict(self)
        d.pop("extra")
        d.pop("beats_smooth")
        d.pop("plausible")
        d["window_um"] = list(self.window_um)
        d.update(self.extra)
        return d


#: Longest profile whose change-point candidates are searched on every gap (see candidate_change_points).
CANDIDATE_EXACT_MAX = 20_000


def candidate_change_points(value, noise_sd, *, penalty_factor=1.0, min_size=2) -> list[int]:
    """Change points of a penalised piecewise-constant segmentation (indices into ``value``).

    Each returned index ``k`` splits the points into ``[..k)`` and ``[k..)``.
    """
    import ruptures as rpt

    y = np.asarray(value, dtype=float)
    n = y.size
    if n < 2 * min_size:
        return []
    pen = penalty_factor * noise_sd**2 * np.log(n)
    if n > CANDIDATE_EXACT_MAX:
        # the exact search costs O(n^2) when changes are rare (30 s for 1e5 points): candidates sit on
        # every 5th gap instead (costs still summed over every point); the local jump tests then try gaps
        # k-2 ... k+2 around each, which covers every gap, so a step between grid gaps is still placed exactly
        return segment_on_grid(y, pen, grid=CANDIDATE_GRID, min_size=min_size)
    algo = rpt.KernelCPD(kernel="linear", min_size=min_size, jump=1).fit(y)
    bkps = algo.predict(pen=pen)
    return [int(b) for b in bkps[:-1]]


#: Gap spacing of the change-point candidates of profiles longer than CANDIDATE_EXACT_MAX.
CANDIDATE_GRID = 5


def segment_on_grid(y, pen, *, grid=5, min_size=2) -> list[int]:
    """Optimal penalised piecewise-constant segmentation (l2 cost) with change points on every ``grid``-th gap.

    Minimises ``sum of within-segment squared deviations + pen x (number of segments)`` over
    segmentations whose inner change points are multiples of ``grid`` and whose segments hold at
    least ``min_size`` points (with ``grid = 1``, the problem ``ruptures.KernelCPD(kernel="linear")``
    solves; tested), by dynamic programming with prefix sums (Jackson et al. 2005, IEEE Signal Process. Lett.
    12:105) and the pruning of Killick et al. (2012, J. Am. Stat. Assoc. 107:1590), vectorised
    over the candidates.
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    ends = np.arange(grid, n, grid)
    ends = np.append(ends[ends <= n - min_size], n) if n > min_size else np.array([n])
    pos = np.concatenate([[0], ends])
    c1 = np.concatenate([[0.0], np.cumsum(y - y.mean())])
    c2 = np.concatenate([[0.0], np.cumsum((y - y.mean()) ** 2)])
    s1, s2 = c1[pos], c2[pos]
    m = pos.size
    best = np.full(m, np.inf)
    best[0] = 0.0
    prev = np.zeros(m, dtype=int)
    alive = np.array([0])
    for j in range(1, m):
        t = pos[j]
        length = t - pos[alive]
        ok = length >= min_size
        cand = alive[ok]
        if cand.size:
            seg = (s2[j] - s2[cand]) - (s1[j] - s1[cand]) ** 2 / (t - pos[cand])
            total = best[cand] + seg
            k = int(np.argmin(total))
            best[j] = total[k] + pen
            prev[j] = cand[k]
            # pruning (Killick et al. 2012, K = 0 for this cost): a start that cannot beat t now never will
            keep = np.ones(alive.size, dtype=bool)
            keep[ok] = total <= best[j]
            alive = alive[keep]
        alive = np.append(alive, j)
    out = []
    j = m - 1
    while j > 0:
        j = prev[j]
        if j > 0:
            out.append(int(pos[j]))
    return sorted(out)


def _window(x, k, lo_um, hi_um, blocked):
    inside = (x >= lo_um) & (x <= hi_um)
    for a, b in blocked:
        inside &= ~((x >= a) & (x <= b))
    idx = np.flatnonzero(inside)
    return idx[idx < k], idx[idx >= k]


def _ols_batch(design, y, mask):
    """Least squares of many small windows at once (rows of a padded batch).

    ``design`` is (W, M, P), ``y`` (W, M) and ``mask`` (W, M) marks the points
    of each window. Returns ``(coef (W, P), rss (W,), inverse of XᵀX (W, P, P),
    full_rank (W,))`` with the rank test of :func:`zoneprofile.zoning._local.ols`
    (Hadamard ratio det/prod(diag) of XᵀX at least 1e-12); the coefficients of a
    rank-deficient window come from a pseudo-inverse.
    """
    xm = design * mask[..., None]
    xtx = np.einsum("wmp,wmq->wpq", xm, xm)
    xty = np.einsum("wmp,wm->wp", xm, y)
    diag = np.diagonal(xtx, axis1=1, axis2=2)
    with np.errstate(divide="ignore", invalid="ignore"):
        full = np.all(diag > 0, axis=1) & (np.linalg.det(xtx) / np.prod(diag, axis=1) >= 1e-12)
    p = design.shape[2]
    cov = np.full_like(xtx, np.nan)
    coef = np.empty((design.shape[0], p))
    if np.any(full):
        cov[full] = np.linalg.inv(xtx[full])
        coef[full] = np.einsum("wpq,wq->wp", cov[full], xty[full])
    for w in np.flatnonzero(~full):
        coef[w] = np.linalg.pinv(xm[w]) @ (y[w] * mask[w])
    resid = (y - np.einsum("wmp,wp->wm", design, coef)) * mask
    return coef, np.einsum("wm,wm->w", resid, resid), cov, full


def _window_tests(x, y, gaps, skips_um, los, his, noise_sd):
    """Jump tests in many windows at once.

    Window ``w`` holds the points of ``[los[w], his[w]]`` (a run of consecutive
    points: the bounds are already cut at accepted steps) on either side of
    the gap ``gaps[w]`` (between points ``gaps[w]-1`` and ``gaps[w]``), less the
    points closer than ``skips_um[w]`` to the middle of the gap. In each
    window a constant and a jump at the gap (plus a slope shared by both sides
    when the BIC asks for it) are fitted by least squares and compared with a
    quadratic. Returns a dict of arrays (one entry per window); ``valid`` is
    False where a side holds fewer than 2 points or the window fewer than 6.
    """
    j = np.asarray(gaps)
    xb = 0.5 * (x[j - 1] + x[j])
    i0 = np.searchsorted(x, los, side="left")
    i1 = np.searchsorted(x, his, side="right")
    skip = np.asarray(skips_um, dtype=float)
    r1 = np.where(skip > 0, np.minimum(j, np.searchsorted(x, xb - skip, side="left")), j)
    c0 = np.where(skip > 0, np.maximum(j, np.searchsorted(x, xb + skip, side="right")), j)
    n_rim = np.maximum(r1 - i0, 0)
    n_core = np.maximum(i1 - c0, 0)
    valid = (n_rim >= 2) & (n_core >= 2) & (n_rim + n_core >= 6)
    out = {"valid": valid}
    w_ok = np.flatnonzero(valid)
    if w_ok.size == 0:
        return out
    n_rim, n_core, i0, c0, xb, j = n_rim[w_ok], n_core[w_ok], i0[w_ok], c0[w_ok], xb[w_ok], j[w_ok]
    m = n_rim + n_core
    width = int(m.max())
    pos = np.arange(width)[None, :]
    mask = pos < m[:, None]
    rim_side = pos < n_rim[:, None]
    idx = np.where(rim_side, i0[:, None] + pos, c0[:, None] + pos - n_rim[:, None])
    idx = np.where(mask, idx, 0)
    t = np.where(mask, x[idx] - xb[:, None], 0.0)
    yy = np.where(mask, y[idx], 0.0)
    ones = mask.astype(float)
    indicator = (rim_side & mask).astype(float)
    # the slope (continuous zoning) enters only when it earns its place (BIC):
    # a slope shared by both sides is nearly collinear with the jump and would
    # otherwise blur every jump estimate
    coef1, rss1, cov1, full1 = _ols_batch(np.stack([ones, indicator], axis=2), yy, mask)
    coef_t, rss_t, cov_t, full_t = _ols_batch(np.stack([ones, t, indicator], axis=2), yy, mask)
    var = np.maximum(rss_t / np.maximum(m - 3, 1), noise_sd**2)
    use_t = ~full1 | (full_t & (rss1 - rss_t > var * np.log(m)))
    valid[w_ok[use_t & ~full_t]] = False  # neither model can be solved
    change = np.where(use_t, coef_t[:, -1], coef1[:, -1])
    rss = np.where(use_t, rss_t, rss1)
    n_par = np.where(use_t, 3, 2)
    cov_jump = np.where(use_t, cov_t[:, -1, -1], cov1[:, -1, -1])
    local = np.sqrt(rss / np.maximum(m - n_par, 1))
    scatter = np.maximum(local, noise_sd)
    se = scatter * np.sqrt(cov_jump)
    # with the scatter at the known noise the jump is normal; above it, Student t
    z = np.abs(change) / se
    p_value = np.where(local > noise_sd, 2.0 * stdtr(np.maximum(m - n_par, 1), -z), 2.0 * ndtr(-z))
    last = np.take_along_axis(t, (m - 1)[:, None], axis=1)[:, 0]
    u = t / np.maximum(last - t[:, 0], 1e-9)[:, None]
    _, rss0, _, _ = _ols_batch(np.stack([ones, u, u**2], axis=2), yy, mask)
    for name, values in (("change", change), ("se", se), ("z", z), ("p", p_value),
                         ("better_than_smooth", rss < rss0), ("scatter", scatter)):
        full_values = np.full(valid.size, np.nan if values.dtype.kind == "f" else False, dtype=values.dtype)
        full_values[w_ok] = values
        out[name] = full_values
    return out


def _multi_scale_tests(x, y, ks, bounds_of, halves, noise_sd, blocked, p_max, min_change, spacing):
    """For each candidate of ``ks``, the most significant passing test over the half-widths ``halves`` (or None).

    At each half-width the gaps ``k-2 … k+2`` are tried (a gradational step
    puts one or two points on its slope), leaving out up to two point
    spacings on either side of the gap (the points on the slope); the most
    significant jump stands for that half-width, and the quick screen against
    a quadratic passes when any variant beats it. The refined erf step must
    later beat a cubic on all points of its window (BIC). ``bounds_of[i]`` are
    the limits of candidate ``ks[i]`` set by the steps already accepted. All
    windows of all candidates are fitted in one batch.
    """
    results: list = [None] * len(ks)
    if not ks:
        return results
    # every variant (candidate, half-width, gap, skip) in the order they are compared
    n_c, n_h = len(ks), len(halves)
    gaps = np.asarray(ks)[:, None] + np.arange(-2, 3)[None, :]  # (candidate, gap)
    inside = (gaps >= 1) & (gaps < x.size)
    gaps = np.clip(gaps, 1, x.size - 1)
    xb = 0.5 * (x[gaps - 1] + x[gaps])
    b_lo = np.array([bounds[0] for bounds in bounds_of], dtype=float)[:, None]
    b_hi = np.array([bounds[1] for bounds in bounds_of], dtype=float)[:, None]
    inside &= (b_lo < xb) & (xb < b_hi)
    half = np.asarray(halves, dtype=float)[None, :, None]
    los = np.maximum(xb[:, None, :] - half, b_lo[:, :, None])  # (candidate, half, gap)
    his = np.minimum(xb[:, None, :] + half, b_hi[:, :, None])
    shape = (n_c, n_h, 5, 3)
    keep = np.broadcast_to(inside[:, None, :, None], shape).ravel()
    cand = np.broadcast_to(np.arange(n_c)[:, None, None, None], shape).ravel()[keep]
    h_of = np.broadcast_to(np.arange(n_h)[None, :, None, None], shape).ravel()[keep]
    gaps = np.broadcast_to(gaps[:, None, :, None], shape).ravel()[keep]
    skips = np.broadcast_to(np.array([0.0, 1.0 * spacing, 2.0 * spacing]), shape).ravel()[keep]
    los = np.broadcast_to(los[..., None], shape).ravel()[keep]
    his = np.broadcast_to(his[..., None], shape).ravel()[keep]
    if cand.size == 0:
        return results
    general = np.zeros(n_c, dtype=bool)
    if blocked:
        # bounds are cut at accepted steps, so a window holds no blocked point;
        # a point exactly on a blocked edge is the exception: such candidates
        # are tested window by window, the point left out as it should be
        hit = np.zeros(x.size, dtype=bool)
        for lo_b, hi_b in blocked:
            hit |= (x >= lo_b) & (x <= hi_b)
        count = np.concatenate([[0], np.cumsum(hit)])
        i0 = np.searchsorted(x, los, side="left")
        i1 = np.searchsorted(x, his, side="right")
        holed = count[i1] - count[np.minimum(i0, i1)] > 0
        general[np.unique(cand[holed])] = True
    res = _window_tests(x, y, gaps, skips, los, his, noise_sd)
    # per (candidate, half-width): the first most significant variant, and
    # whether any variant beats the quadratic
    group = cand * n_h + h_of
    valid = res["valid"]
    z = np.where(valid, res["z"], -np.inf) if "z" in res else np.full(valid.size, -np.inf)
    top = np.full(n_c * n_h, -np.inf)
    np.maximum.at(top, group, z)
    beaten = np.zeros(n_c * n_h, dtype=bool)
    if "better_than_smooth" in res:
        np.logical_or.at(beaten, group, valid & res["better_than_smooth"])
    first = {}
    for w in np.flatnonzero(valid & (z == top[group])):
        first.setdefault(int(group[w]), w)
    for c in range(n_c):
        if general[c]:
            results[c] = _multi_scale_test_general(x, y, ks[c], bounds_of[c], halves, noise_sd, blocked, p_max,
                                                   min_change, spacing)
            continue
        passing = []
        for h, half_um in enumerate(halves):
            best = first.get(c * n_h + h)
            if best is None:
                continue
            r = {"k": int(gaps[best]), "change": float(res["change"][best]), "se": float(res["se"][best]),
                 "z": res["z"][best], "p": float(res["p"][best]), "better_than_smooth": bool(beaten[c * n_h + h]),
                 "scatter": res["scatter"][best], "lo": los[best], "hi": his[best], "half": half_um}
            if r["p"] <= p_max and abs(r["change"]) >= min_change and r["better_than_smooth"]:
                passing.append(r)
        results[c] = max(passing, key=lambda r: r["z"]) if passing else None
    return results


def _local_test_at(x, y, k, xb, bounds, half_um, noise_sd, blocked, skip_um):
    """One jump test, point by point (windows with holes; reference for the batch)."""
    lo = max(xb - half_um, bounds[0])
    hi = min(xb + half_um, bounds[1])
    rim, core = _window(x, k, lo, hi, blocked)
    if skip_um > 0:
        rim = rim[x[rim] < xb - skip_um]
        core = core[x[core] > xb + skip_um]
    if rim.size < 2 or core.size < 2 or rim.size + core.size < 6:
        return None
    idx = np.concatenate([rim, core])
    t = x[idx] - xb
    yy = y[idx]
    m = idx.size
    indicator = (idx < k).astype(float)
    ones = np.ones_like(t)
    coef, rss1, cov = ols(np.column_stack([ones, indicator]), yy)
    coef_t, rss_t, cov_t = ols(np.column_stack([ones, t, indicator]), yy)
    var = max(rss_t / max(m - 3, 1), noise_sd**2)
    if cov is None or (cov_t is not None and rss1 - rss_t > var * np.log(m)):
        coef, rss1, cov = coef_t, rss_t, cov_t
    if cov is None:
        return None
    n_par = cov.shape[0]
    local = np.sqrt(rss1 / max(m - n_par, 1))
    s = max(local, noise_sd)
    se = s * np.sqrt(cov[-1, -1])
    dof = max(m - n_par, 1) if local > noise_sd else np.inf
    u = t / max(float(np.ptp(t)), 1e-9)
    _, rss0, _ = ols(np.column_stack([ones, u, u**2]), yy)
    z = abs(coef[-1]) / se
    return {"k": k, "change": float(coef[-1]), "se": float(se), "z": z,
            "p": float(2.0 * (ndtr(-z) if np.isinf(dof) else stdtr(dof, -z))),
            "better_than_smooth": rss1 < rss0, "scatter": s, "lo": lo, "hi": hi}


def _multi_scale_test_general(x, y, k, bounds, halves, noise_sd, blocked, p_max, min_change, spacing):
    """:func:`_multi_scale_tests` for one candidate, window by window (any window, holes included)."""
    passing = []
    for half_um in halves:
        best, smooth_beaten = None, False
        for j in range(max(k - 2, 1), min(k + 3, x.size)):
            xb = 0.5 * (x[j - 1] + x[j])
            if not bounds[0] < xb < bounds[1]:
                continue
            for skip in (0.0, 1.0 * spacing, 2.0 * spacing):
                r = _local_test_at(x, y, j, xb, bounds, half_um, noise_sd, blocked, skip)
                if r is None:
                    continue
                smooth_beaten |= bool(r["better_than_smooth"])
                if best is None or r["z"] > best["z"]:
                    best = r
        if best is None:
            continue
        best["better_than_smooth"] = smooth_beaten
        best["half"] = half_um
        if best["p"] <= p_max and abs(best["change"]) >= min_change and best["better_than_smooth"]:
            passing.append(best)
    return max(passing, key=lambda r: r["z"]) if passing else None


def _erf_model(p, t):
    a, b, delta, x0, log_s = p
    return a + b * (t - x0) + delta * (1.0 - ndtr((t - x0) / np.exp(log_s)))


def _erf_jacobian(t, yy, lower, upper):
    """Analytic Jacobian of the erf-step residuals (see :func:`_erf_problem`)."""
    return _erf_problem(t, yy, lower, upper)[1]


_INV_SQRT_2PI = 1.0 / np.sqrt(2.0 * np.pi)


def _erf_problem(t, yy, lower, upper):
    """Residuals and analytic Jacobian of the erf step, sharing work.

    With ``d = t - x0``, ``s = exp(log_s)``, ``z = d / s``, ``Φ`` the normal
    cdf and ``φ`` its density, the residual ``a + b d + δ (1 - Φ(z)) - y`` has
    the derivatives ``1``, ``d``, ``1 - Φ(z)``, ``-b + δ φ(z) / s`` (by
    ``x0``) and ``δ φ(z) z`` (by ``log_s``). The residuals at the point where
    the Jacobian is asked for were computed just before (the solver evaluates
    a point, then its Jacobian when it accepts it); their terms are kept.
    ``lower`` and ``upper`` are not needed by the analytic form and kept for
    the signature.
    """
    last = {}

    def terms(p):
        a, b, delta, x0, log_s = p
        d = t - x0
        s = np.exp(log_s)
        z = d / s
        e = 1.0 - ndtr(z)
        return d, s, z, e, a + b * d + delta * e - yy  # the operations of _erf_model, then - y

    def residuals(p):
        last.clear()
        last[p.tobytes()] = kept = terms(p)
        return kept[4]

    def jacobian(p):
        a, b, delta, x0, log_s = p
        kept = last.get(p.tobytes())
        d, s, z, e, _ = kept if kept is not None else terms(p)
        dens = delta * _INV_SQRT_2PI * np.exp(-0.5 * z * z)
        jac = np.empty((t.size, 5))
        jac[:, 0] = 1.0
        jac[:, 1] = d
        jac[:, 2] = e
        jac[:, 3] = dens / s - b
        jac[:, 4] = dens * z
        return jac

    return residuals, jacobian


def _trust_region_fit(residuals, jacobian, p0, lower, upper, x_scale):
    """Bounded nonlinear least squares: ``scipy.optimize.least_squares``, trust-region reflective.

    The method of Branch, Coleman & Li (1999, SIAM J. Sci. Comput. 21:1) with
    scipy's default tolerances (``ftol = xtol = gtol = 1e-8``), a linear loss
    and the analytic Jacobian of :func:`_erf_problem`.
    """
    from scipy.optimize import least_squares  # imported here: slow to import, most commands never fit

    return least_squares(residuals, p0, jac=jacobian, bounds=(np.asarray(lower, dtype=float),
                                                              np.asarray(upper, dtype=float)),
                         x_scale=np.asarray(x_scale, dtype=float), method="trf")


def fit_step(x, y, k, *, lo_um, hi_um, noise_sd, max_width_um, blocked=(), sharp=False):
    """Fit a line plus an erf step near the gap between points ``k-1`` and ``k``.

    Returns a :class:`Step` or None when the window holds too few points.

    Notes
    -----
    Model: ``y = a + b (x - x0) + Δ [1 - Φ((x - x0)/s)]`` with Φ the normal
    cumulative distribution, so the core side tends to ``a`` and the rim side to
    ``a + Δ`` at ``x0``; the 10–90 % width is ``2 Φ⁻¹(0.9) s = 2.563 s``. The
    position uncertainty comes from the Jacobian at the optimum scaled by the
    residual scatter (never below the noise); when the width is below the point
    spacing the position is only known within the gap, and the uncertainty is
    at least ``gap/√12`` (uniform within the gap).
    """
    rim, core = _window(x, k, lo_um, hi_um, blocked)
    if rim.size < 2 or core.size < 2:
        return None
    idx = np.concatenate([rim, core])
    t, yy = x[idx], y[idx]
    gap = float(x[k] - x[k - 1])
    xb = 0.5 * (x[k - 1] + x[k])
    spacing = median_spacing(x)
    x0_lo = x[max(k - 2, 0)]
    x0_hi = x[min(k + 1, x.size - 1)]
    s_min = 0.02 * min(gap, spacing)
    extent = float(t.max() - t.min())
    s_max = max(min(max_width_um / ERF_WIDTH_FACTOR * 1.5, extent / 6.0), 2 * s_min)
    if sharp:  # width held below the gap: only the position and the levels are fitted
        s_max = max(0.1 * gap, 2 * s_min)
    core_level = float(np.mean(y[core[:3]]))
    rim_level = float(np.mean(y[rim[-3:]]))
    lower = np.array([-np.inf, -np.inf, -np.inf, x0_lo, np.log(s_min)])
    upper = np.array([np.inf, np.inf, np.inf, x0_hi, np.log(s_max)])
    residuals, jacobian = _erf_problem(t, yy, lower, upper)
    best = None
    for s0 in ((0.05 * gap,) if sharp else (0.25 * gap, gap, 2.5 * gap)):
        s0 = float(np.clip(s0, s_min * 1.01, s_max * 0.99))
        p0 = [core_level, 0.0, rim_level - core_level, xb, np.log(s0)]
        res = _trust_region_fit(
            residuals,
            jacobian,
            p0,
            lower,
            upper,
            x_scale=[max(abs(core_level), 1.0), 0.1, max(abs(rim_level - core_level), 1.0), gap, 1.0],
        )
        if best is None or res.cost < best.cost:
            best = res
    a, b, delta, x0, log_s = best.x
    s_fit = float(np.exp(log_s))
    width = ERF_WIDTH_FACTOR * s_fit
    m = idx.size
    scatter = max(np.sqrt(2 * best.cost / max(m - 5, 1)), noise_sd)
    sd = np.full(5, np.nan)
    jac = best.jac
    try:
        cov = np.linalg.inv(jac.T @ jac) * scatter**2
        sd = np.sqrt(np.clip(np.diag(cov), 0, None))
    except np.linalg.LinAlgError:
        pass
    # BIC of the erf step (5 parameters) against smooth zoning (a cubic, 4)
    u = (t - t.mean()) / max(extent, 1e-9)
    _, rss_cubic, _ = ols(np.column_stack([np.ones_like(u), u, u**2, u**3]), yy)
    var = noise_sd**2
    beats_smooth = bool(2 * best.cost + var * np.log(m) < rss_cubic) if not sharp else True
    # the levels on both sides must lie within the data of the window (a slope
    # traded against the jump can otherwise push them out)
    low, high = float(yy.min()) - 2.0 * noise_sd, float(yy.max()) + 2.0 * noise_sd
    plausible = bool(low <= a <= high and low <= a + delta <= high)
    # the gap that holds the fitted position
    j = int(np.searchsorted(x, x0))
    j = min(max(j, 1), x.size - 1)
    local_gap = float(x[j] - x[j - 1])
    resolved = width > local_gap
    pos_sd = float(sd[3]) if np.isfinite(sd[3]) else float("nan")
    if not resolved:
        floor = local_gap / np.sqrt(12.0)
        pos_sd = floor if not np.isfinite(pos_sd) or pos_sd < floor or pos_sd > local_gap else pos_sd
    elif not np.isfinite(pos_sd):
        pos_sd = width / 2.0
    # an exact-jump fit gives the change uncertainty robustly
    indicator = (t < x0).astype(float)
    coef, rss, cov_lin = ols(np.column_stack([np.ones_like(t), t - x0, indicator]), yy)
    change_se = float(scatter * np.sqrt(cov_lin[2, 2])) if cov_lin is not None else float("nan")
    return Step(
        position_um=float(x0),
        position_sd_um=float(pos_sd),
        before=float(a),
        after=float(a + delta),
        change=float(delta),
        change_se=change_se,
        kind="reverse" if delta > 0 else "normal",
        width_um=float(width),
        width_resolved=bool(resolved),
        sharpness="gradational" if width > 2.0 * local_gap else "sharp",
        z_score=float(abs(delta) / change_se) if change_se and np.isfinite(change_se) else float("nan"),
        gap_index=int(j),
        window_um=(float(lo_um), float(hi_um)),
        beats_smooth=beats_smooth and plausible,
        plausible=plausible,
    )


def _fit_step_reused(reuse, x, y, k, **kwargs):
    """:func:`fit_step`, reusing a fit already made with the same settings on this profile.

    Fits are deterministic, so a repeated fit (the final refinement often
    repeats the accepted fit; the short-and-wide pass repeats fits of the
    wide pass) is taken from ``reuse``; each caller gets its own copy.
    """
    key = ("fit", int(k), tuple(sorted((name, tuple(map(tuple, v)) if name == "blocked" else v)
                                       for name, v in kwargs.items())))
    if key not in reuse:
        reuse[key] = fit_step(x, y, k, **kwargs)
    step = reuse[key]
    return None if step is None else replace(step, extra=dict(step.extra))


def _agrees(step, test):
    """The erf refinement must tell the same story as the local jump test."""
    same_sign = np.sign(step.change) == np.sign(test["change"])
    close = abs(step.change - test["change"]) <= 3.0 * test["se"] + 0.5 * abs(test["change"])
    return bool(same_sign and close)


def _blocked_zone(step, x):
    spacing = median_spacing(x)
    half = max(0.5 * step.width_um + 0.5 * spacing, 1.5 * spacing)
    return (step.position_um - half, step.position_um + half)


def _bounds_for(pos, zones):
    lo, hi = -np.inf, np.inf
    for a, b in zones:
        if b <= pos:
            lo = max(lo, b)
        elif a >= pos:
            hi = min(hi, a)
    return lo, hi


def _means_agree(x, y, step, half_um, lo_um, hi_um) -> bool:
    """Plain means on either side of the step agree with the fitted jump.

    The erf model carries a shared slope; in a short window a slope and a jump
    of opposite signs can fit two adjacent noisy points (a sawtooth). A real
    step also shows as a difference of plain means of the points on either
    side, outside its transition: same sign and at least half the fitted
    change. Windows with fewer than two points a side are not judged.
    """
    half_w = 0.5 * max(step.width_um, 0.0)
    rim = (x >= max(step.position_um - half_w - half_um, lo_um)) & (x < step.position_um - half_w)
    core = (x > step.position_um + half_w) & (x <= min(step.position_um + half_w + half_um, hi_um))
    if rim.sum() < 2 or core.sum() < 2:
        return True
    plain = float(np.mean(y[rim]) - np.mean(y[core]))
    return np.sign(plain) == np.sign(step.change) and abs(plain) >= 0.5 * abs(step.change)


def detect_steps(
    distance_um,
    value,
    noise_sd,
    *,
    min_change=None,
    p_max=None,
    window_um=None,
    max_width_um=12.0,
    penalty_factor=1.0,
    alpha=0.01,
    windows="both",
    reuse=None,
) -> list[Step]:
    """Find the steps of a profile.

    Parameters
    ----------
    distance_um, value : array_like
        Strictly increasing distances from the rim (µm) and values.
    noise_sd : float
        1-sigma analytical noise (see :func:`estimate_noise_sd`).
    min_change : float, optional
        Smallest step reported (default ``3 · noise_sd``).
    p_max : float, optional
        Largest two-sided p-value of the jump (Student t with the window's
        degrees of freedom); default ``alpha`` shared (Bonferroni) among the
        ``n - 1`` gaps and the 5 gap/skip variants tried per candidate.
    window_um : float, optional
        Half-width of the local test window (default ``max(15 µm, 6 × median
        spacing)``).
    max_width_um : float
        A change spread over more than this (10–90 %) is continuous zoning, not
        a step.
    penalty_factor : float
        Penalty of the candidate segmentation in units of ``σ² ln n``.
    alpha : float
        Family-wise false-alarm rate of the local tests.
    windows : {"both", "wide"}
        ``"both"`` tests each candidate in a short window (``max(6 µm, 4
        spacings)``, for steps close together) and in the wide one; ``"wide"``
        only in the wide one (does not split oscillations; used to find
        oscillatory bands).
    reuse : dict, optional
        Work shared between calls on the same profile (the same distances,
        values and noise): candidate change points and erf fits are made once.
        Pass the same empty dict to every call on one profile; a dict
        already used on another profile is refused (ValueError).

    Returns
    -------
    list of Step
        Ordered by distance from the rim.
    """
    x = np.asarray(distance_um, dtype=float)
    y = np.asarray(value, dtype=float)
    n = x.size
    sigma = float(noise_sd)
    if min_change is None:
        min_change = 3.0 * sigma
    if p_max is None:
        p_max = alpha / (5.0 * max(n - 1, 1))
    p_max_given = p_max
    spacing = median_spacing(x)
    half = float(window_um) if window_um is not None else max(15.0, 6.0 * spacing)
    if windows == "wide":
        halves = (half,)
    else:  # a short window as well, for steps closer together than the wide window
        halves = (min(max(6.0 * half / 15.0, 4.0 * spacing), half), half)
    p_max = p_max / len(halves)
    if reuse is None:
        reuse = {}
    profile = (x.tobytes(), y.tobytes(), sigma)
    if reuse.setdefault("profile", profile) != profile:
        raise ValueError("detect_steps: `reuse` holds the work of another profile; pass a new dict")
    if ("candidates", penalty_factor) not in reuse:
        reuse[("candidates", penalty_factor)] = candidate_change_points(y, sigma, penalty_factor=penalty_factor)
    candidates = set(reuse[("candidates", penalty_factor)])
    accepted: list[Step] = []
    blocked: list[tuple] = []
    rejected: set[int] = set()
    cache: dict[int, dict | None] = {}
    while True:
        live = []
        for k in sorted(candidates - rejected):
            xb = 0.5 * (x[k - 1] + x[k])
            if any(a <= xb <= b for a, b in blocked):
                rejected.add(k)
            else:
                live.append(k)
        todo = [k for k in live if k not in cache]
        bounds_of = [_bounds_for(0.5 * (x[k - 1] + x[k]), blocked) for k in todo]
        cache.update(zip(todo, _multi_scale_tests(x, y, todo, bounds_of, halves, sigma, blocked, p_max, min_change,
                                                  spacing)))
        tests = [dict(cache[k], candidate=k) for k in live if cache[k] is not None]
        if not tests:
            break
        best = max(tests, key=lambda r: r["z"])
        k = best["k"]
        rejected.add(best["candidate"])
        step = _fit_step_reused(reuse, x, y, k, lo_um=best["lo"], hi_um=best["hi"], noise_sd=sigma,
                                max_width_um=max_width_um, blocked=blocked)
        rejected.add(k)
        if step is not None and (not _agrees(step, best) or not step.plausible):
            step = _fit_step_reused(reuse, x, y, k, lo_um=best["lo"], hi_um=best["hi"], noise_sd=sigma,
                                    max_width_um=max_width_um, blocked=blocked, sharp=True)
        if (step is None or step.width_um > max_width_um or abs(step.change) < min_change
                or not step.beats_smooth):
            continue
        step.extra["_half"] = best["half"]
        accepted.append(step)
        blocked.append(_blocked_zone(step, x))
        # tests whose window reaches the new step must be redone
        reach = half + 3.0 * spacing
        for j in list(cache):
            if abs(0.5 * (x[j - 1] + x[j]) - step.position_um) <= reach + 0.5 * step.width_um:
                del cache[j]
    # refine every step once more with its final neighbours
    z_final = float(-ndtri(p_max_given / 2.0))
    final = []
    accepted.sort(key=lambda s: s.position_um)
    for i, step in enumerate(accepted):
        others = [_blocked_zone(s, x) for j, s in enumerate(accepted) if j != i]
        lo, hi = _bounds_for(step.position_um, others)
        step_half = step.extra.get("_half", half)
        lo, hi = max(lo, step.position_um - step_half), min(hi, step.position_um + step_half)
        k = int(np.searchsorted(x, step.position_um))
        k = min(max(k, 1), n - 1)
        again = _fit_step_reused(reuse, x, y, k, lo_um=lo, hi_um=hi, noise_sd=sigma, max_width_um=max_width_um,
                                 blocked=others)
        # the refined jump must still be significant and large enough; if the
        # refit with the final neighbours fails, the fit that was accepted stands
        for option in (again, step):
            if option is not None and option.z_score >= z_final and abs(option.change) >= min_change \
                    and option.beats_smooth and _means_agree(x, y, option, step_half, lo, hi):
                option.extra.pop("_half", None)
                final.append(option)
                break
    return final
