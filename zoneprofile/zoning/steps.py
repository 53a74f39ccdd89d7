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
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

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
    algo = rpt.KernelCPD(kernel="linear", min_size=min_size, jump=1).fit(y)
    bkps = algo.predict(pen=pen)
    return [int(b) for b in bkps[:-1]]


def _window(x, k, lo_um, hi_um, blocked):
    inside = (x >= lo_um) & (x <= hi_um)
    for a, b in blocked:
        inside &= ~((x >= a) & (x <= b))
    idx = np.flatnonzero(inside)
    return idx[idx < k], idx[idx >= k]


def _local_test_at(x, y, k, xb, bounds, half_um, noise_sd, blocked, skip_um):
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
    # the slope (continuous zoning) enters only when it earns its place (BIC):
    # a slope shared by both sides is nearly collinear with the jump and would
    # otherwise blur every jump estimate
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
    # with the scatter at the known noise the jump is normal; above it, Student t
    dof = max(m - n_par, 1) if local > noise_sd else np.inf
    u = t / max(float(np.ptp(t)), 1e-9)
    _, rss0, _ = ols(np.column_stack([ones, u, u**2]), yy)
    z = abs(coef[-1]) / se
    return {"k": k, "change": float(coef[-1]), "se": float(se), "z": z,
            "p": float(2.0 * (ndtr(-z) if np.isinf(dof) else stdtr(dof, -z))),
            "better_than_smooth": rss1 < rss0, "scatter": s, "lo": lo, "hi": hi}


def _local_test(x, y, k, bounds, half_um, noise_sd, blocked):
    """Best jump test at the gaps near candidate ``k`` in a window of ``±half_um``.

    A gradational step puts one or two points on its slope; the test tries the
    gaps ``k-2 … k+2`` and leaves out up to two point spacings on either side
    of the gap (the points on the slope), and keeps the most significant.
    """
    spacing = median_spacing(x)
    best = None
    smooth_beaten = False
    for j in range(max(k - 2, 1), min(k + 3, x.size)):
        xb = 0.5 * (x[j - 1] + x[j])
        if not bounds[0] < xb < bounds[1]:
            continue
        for skip in (0.0, 1.0 * spacing, 2.0 * spacing):
            r = _local_test_at(x, y, j, xb, bounds, half_um, noise_sd, blocked, skip)
            if r is None:
                continue
            # quick screen against a quadratic; the refined erf step must
            # later beat a cubic on all points of its window (BIC)
            smooth_beaten |= bool(r["better_than_smooth"])
            if best is None or r["z"] > best["z"]:
                best = r
    if best is not None:
        best["better_than_smooth"] = smooth_beaten
        best["half"] = half_um
    return best


def _multi_scale_test(x, y, k, bounds, halves, noise_sd, blocked, p_max, min_change):
    """The most significant passing test over the window half-widths ``halves`` (or None)."""
    passing = []
    for half in halves:
        r = _local_test(x, y, k, bounds, half, noise_sd, blocked)
        if r is not None and r["p"] <= p_max and abs(r["change"]) >= min_change and r["better_than_smooth"]:
            passing.append(r)
    return max(passing, key=lambda r: r["z"]) if passing else None


def _erf_model(p, t):
    a, b, delta, x0, log_s = p
    return a + b * (t - x0) + delta * (1.0 - ndtr((t - x0) / np.exp(log_s)))


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
    from scipy.optimize import least_squares

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
    best = None
    for s0 in ((0.05 * gap,) if sharp else (0.25 * gap, gap, 2.5 * gap)):
        s0 = float(np.clip(s0, s_min * 1.01, s_max * 0.99))
        p0 = [core_level, 0.0, rim_level - core_level, xb, np.log(s0)]
        res = least_squares(
            lambda p: _erf_model(p, t) - yy,
            p0,
            bounds=([-np.inf, -np.inf, -np.inf, x0_lo, np.log(s_min)],
                    [np.inf, np.inf, np.inf, x0_hi, np.log(s_max)]),
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
    candidates = set(candidate_change_points(y, sigma, penalty_factor=penalty_factor))
    accepted: list[Step] = []
    blocked: list[tuple] = []
    rejected: set[int] = set()
    cache: dict[int, dict | None] = {}
    while True:
        tests = []
        for k in sorted(candidates - rejected):
            xb = 0.5 * (x[k - 1] + x[k])
            if any(a <= xb <= b for a, b in blocked):
                rejected.add(k)
                continue
            if k not in cache:
                cache[k] = _multi_scale_test(x, y, k, _bounds_for(xb, blocked), halves, sigma, blocked,
                                             p_max, min_change)
            r = cache[k]
            if r is not None:
                tests.append(dict(r, candidate=k))
        if not tests:
            break
        best = max(tests, key=lambda r: r["z"])
        k = best["k"]
        rejected.add(best["candidate"])
        step = fit_step(x, y, k, lo_um=best["lo"], hi_um=best["hi"], noise_sd=sigma,
                        max_width_um=max_width_um, blocked=blocked)
        rejected.add(k)
        if step is not None and (not _agrees(step, best) or not step.plausible):
            step = fit_step(x, y, k, lo_um=best["lo"], hi_um=best["hi"], noise_sd=sigma,
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
        again = fit_step(x, y, k, lo_um=lo, hi_um=hi, noise_sd=sigma, max_width_um=max_width_um, blocked=others)
        # the refined jump must still be significant and large enough; if the
        # refit with the final neighbours fails, the fit that was accepted stands
        for option in (again, step):
            if option is not None and option.z_score >= z_final and abs(option.change) >= min_change \
                    and option.beats_smooth and _means_agree(x, y, option, step_half, lo, hi):
                option.extra.pop("_half", None)
                final.append(option)
                break
    return final
