"""The frozen An profile of the An-coupled model and the tie of the element step to the An step.

Private helpers of :mod:`zoneprofile.diffusion.fitting`.
"""

from __future__ import annotations

import math

import numpy as np

from zoneprofile.diffusion._optimise import _coarse_start, _least_squares, _projected_fit
from zoneprofile.diffusion._steps import _noise_sd, _running_mean, _side_means


def _frozen_an(grid, an_x, an_values, an_beam_um, boundary_um, window_um):
    """An (fraction) in every cell: measured An, sharpened at the boundary step.

    Near ``boundary_um`` the An points are fitted with an erf step of free
    apparent width ``w``; the true width is ``s = sqrt(w² − σ_spot²)`` (variances
    add; An points sharper than the stated spot were not blurred by it). Within
    the fitted region the deconvolved step replaces the measured An.

    Returns
    -------
    cells_at : callable
        ``cells_at(position_um) -> X_An per cell`` with the step placed at
        ``position_um`` (the measured position by default).
    info : dict
        What was found (``sharpened``, position, plateaus, widths, ``gap_um``:
        the An points bracketing a sharp step, within which its position is
        unknown).
    """
    from scipy.optimize import least_squares
    from scipy.special import ndtr

    from zoneprofile.diffusion.resolution import beam_sigma_um

    xa = np.asarray(an_x, float)
    an = np.asarray(an_values, float) / 100.0
    spacing = float(np.median(np.diff(xa))) if xa.size > 1 else 1.0
    sig_beam = beam_sigma_um(an_beam_um, "gaussian")
    half = max(6.0 * spacing, 4.0 * sig_beam, 2.0 * window_um, 5.0)
    noise = max(_noise_sd(an), 1e-4)
    # measured An, with its analytical noise reduced: where the An of the profile is
    # consistent with a constant (within 1.5 × its point-to-point scatter) use the mean;
    # otherwise a 5-point running mean (measurement noise is not zoning) taken on each
    # side of the boundary separately, so the mean never smears the step itself
    flat = np.std(an) <= 1.5 * noise
    if flat:
        smooth = np.full_like(an, np.mean(an))
    else:
        smooth = _split_running_mean(xa, an, boundary_um, 5)
    measured = _interp_split(grid.centres_um, xa, smooth, boundary_um)
    sel = np.abs(xa - boundary_um) <= half
    plain = (lambda position_um=None: measured), {"sharpened": False, "an_noise_sd": 100 * noise}
    if sel.sum() < 6 or np.sum(xa[sel] < boundary_um) < 2 or np.sum(xa[sel] > boundary_um) < 2:
        return plain
    xs, ys = xa[sel], an[sel]
    a0, b0 = _side_means(xs, ys, boundary_um)
    if abs(b0 - a0) < max(4.0 * noise, 0.01):
        return plain

    # the zones either side usually carry some continuous zoning: each side of the
    # step is a straight line (value at the step and slope), so a gradient within a
    # zone is neither flattened into the step's plateaus nor read as part of the step
    def model(p, x):
        lo, hi, x0, w, g_lo, g_hi = p
        f = ndtr((x - x0) / (w + 1e-9))
        return (1.0 - f) * (lo + g_lo * (x - x0)) + f * (hi + g_hi * (x - x0))

    def resid(p):
        return model(p, xs) - ys

    # the slopes enter only when they earn their place (BIC, two more parameters):
    # on flat zones they would only add scatter to the step's width and plateaus
    start = [a0, b0, boundary_um, max(spacing * 0.3, 0.1), 0.0, 0.0]
    g_max = 1.0 / max(spacing, 1e-3)
    flat_sides = ([-1, -1, xs[0], 0.0, -1e-12, -1e-12], [2, 2, xs[-1], half, 1e-12, 1e-12])
    sol = least_squares(resid, start, bounds=flat_sides)
    sloped = least_squares(resid, sol.x, bounds=([-1, -1, xs[0], 0.0, -g_max, -g_max],
                                                  [2, 2, xs[-1], half, g_max, g_max]))
    rss_flat, rss_sloped = float(np.sum(sol.fun**2)), float(np.sum(sloped.fun**2))
    w_flat = float(sol.x[3])  # the spot estimate (no beam given) keeps the flat-sided width
    if (rss_flat - rss_sloped) / noise**2 > 2.0 * math.log(xs.size):
        sol = sloped
    lo, hi, x0, w_app, g_lo, g_hi = sol.x
    # variances add: s² = w² − σ_spot²; the noise inflates the fitted w² by its variance
    # (E[ŵ²] = w² + se_w²), which would make a sharp step look like a 0.5–1 µm growth step
    w_se = _param_se(sol, noise, 3)
    w_se = w_se if math.isfinite(w_se) else 0.0
    s = math.sqrt(max(w_app**2 - w_se**2 - sig_beam**2, 0.0))
    # the measured An split at the fitted step (not at the first guess)
    if not flat:
        smooth = _split_running_mean(xa, an, x0, 5)
        measured = _interp_split(grid.centres_um, xa, smooth, x0)
    # the step model replaces the measured An from the step out to where the measured An
    # departs from the (spot-blurred) step model: two successive points off by > 3 noise
    blurred = model([lo, hi, x0, max(w_app, 1e-9), g_lo, g_hi], xa)
    off = np.abs(an - blurred) > 3.0 * noise
    r_lo, r_hi = x0 - half, x0 + half
    left = np.flatnonzero(xa < x0)[::-1]
    for a, b in zip(left[:-1], left[1:]):
        if xa[a] < x0 - half:
            break
        if off[a] and off[b]:
            r_lo = xa[a]
            break
    right = np.flatnonzero(xa > x0)
    for a, b in zip(right[:-1], right[1:]):
        if xa[a] > x0 + half:
            break
        if off[a] and off[b]:
            r_hi = xa[a]
            break
    region = (grid.centres_um > r_lo) & (grid.centres_um < r_hi)
    sharp = s < 0.5 * spacing
    below, above = xa[xa <= x0], xa[xa > x0]
    bracket = [float(below.max()), float(above.min())] if below.size and above.size else [float(x0)] * 2
    # where the step can be: spots that saw part of it (a blurred step) place it to within
    # the An fit's standard error; a step between two spots that saw none of it can be
    # anywhere between them
    x0_se = _position_se(sol, noise)
    if sharp:
        gap = [max(bracket[0], x0 - 2.5 * x0_se), min(bracket[1], x0 + 2.5 * x0_se)]
        if gap[1] - gap[0] < 1e-6:
            gap = [float(x0), float(x0)]
    else:
        gap = [float(x0), float(x0)]

    faces = grid.faces_um

    def cells_at(position_um=None):
        pos = x0 if position_um is None else float(position_um)
        # the deconvolved width is kept even when it is below the point spacing (a growth
        # step of ~1 µm changes the time by 10–25 %); cell averages of the erf, exact
        # for a step much narrower than a cell
        if s <= 1e-6:
            frac = grid.fraction_beyond([pos])[0]
        else:
            z = (faces - pos) / s
            prim = z * ndtr(z) + np.exp(-0.5 * z**2) / math.sqrt(2.0 * math.pi)  # ∫ Φ dz
            frac = np.diff(prim) / np.diff(z)
        dx = grid.centres_um - pos
        step = (1.0 - frac) * (lo + g_lo * dx) + frac * (hi + g_hi * dx)
        out = measured.copy()
        out[region] = step[region]
        return np.clip(out, 0.0, 1.0)

    info = {"sharpened": True, "position_um": float(x0), "outer_an": 100 * float(lo),
            "inner_an": 100 * float(hi), "outer_slope_per_um": 100 * float(g_lo),
            "inner_slope_per_um": 100 * float(g_hi), "apparent_width_sd_um": float(w_flat),
            "apparent_width_sloped_sd_um": float(w_app), "width_sd_um": float(s),
            "an_beam_um": an_beam_um, "gap_um": [float(g) for g in gap], "bracket_um": bracket,
            "position_se_um": float(x0_se) if math.isfinite(x0_se) else None,
            "an_noise_sd": 100 * noise}
    return cells_at, info


def _split_running_mean(x, y, split, k):
    """Running mean over ``k`` points on each side of ``split`` separately."""
    out = np.empty_like(y)
    left = x < split
    if left.any():
        out[left] = _running_mean(y[left], k)
    if (~left).any():
        out[~left] = _running_mean(y[~left], k)
    return out


def _interp_split(xc, x, y, split):
    """Linear interpolation that does not bridge ``split`` (each side extends its end value)."""
    out = np.interp(xc, x, y)
    left, right = x < split, x >= split
    if left.any() and right.any():
        lc = xc < split
        out[lc] = np.interp(xc[lc], x[left], y[left])
        out[~lc] = np.interp(xc[~lc], x[right], y[right])
    return out


def _position_se(sol, noise):
    """Standard error of the fitted step position (Gauss–Newton covariance, noise σ known)."""
    return _param_se(sol, noise, 2)


def _param_se(sol, noise, index):
    """Standard error of parameter ``index`` of the erf fit (2: position, 3: width)."""
    jac = np.asarray(sol.jac, float)
    try:
        cov = np.linalg.pinv(jac.T @ jac) * max(float(np.mean(sol.fun**2)), noise**2)
        se = math.sqrt(max(float(cov[index, index]), 0.0))
    except (np.linalg.LinAlgError, ValueError):
        return math.inf
    # a step no spot saw the inside of has no position information (vanishing derivative)
    if not math.isfinite(se) or float(np.max(np.abs(jac[:, index]))) < 1e-9:
        return math.inf
    return se


def _tie_to_an_step(problem, cells_at, gap, t0, y, weights, log_bounds, known_sd, n_candidates=5,
                    an_position=None):
    """Place the tied An/element step inside the An gap: best position and likelihood weights.

    Returns ``(position, x_an_cells, candidates)``; ``candidates`` lists each
    tried position with its log10 D·t and its relative likelihood
    ``exp(−Δχ²/2)`` (χ² from the residuals, scaled by the residual variance
    when no precision was given), used to spread the time over positions the
    data cannot tell apart. ``an_position = (x0, se)``: where the An fit put
    the step and its standard error; it multiplies the likelihood (the An
    points see the step too).
    """

    lo, hi = gap
    if hi - lo <= 1e-9:
        return lo, cells_at(lo), []
    candidates = lo + (np.arange(n_candidates) + 0.5) / n_candidates * (hi - lo)
    rows = []

    def cost_at(c):
        # the model at each trial position is asked for a handful of times: no
        # eigendecomposition ('rational' evaluator). The first position starts from
        # the coarse search; the others from the positions already fitted
        # (log10 D·t changes by a few hundredths across the gap, smoothly)
        problem.x_an_cells = cells_at(c)
        model = problem.model(t0, evaluator="rational")
        if len(rows) >= 2:
            # log10 D·t and the values from the two nearest positions, linearly
            (p1, _, l1, v1), (p2, _, l2, v2) = sorted(rows, key=lambda r: abs(r[0] - c))[:2]
            f = (c - p1) / (p2 - p1) if p2 != p1 else 0.0
            start = [l1 + f * (l2 - l1), c, *(np.array(v1) + f * (np.array(v2) - np.array(v1)))]
        elif rows:
            start = [rows[0][2], c, *rows[0][3]]
        else:
            start = _coarse_start(model, y, weights, log_bounds, (c, c), c, True)
        lower = np.array([log_bounds[0], c - 1e-9, 0.0, 0.0])
        upper = np.array([log_bounds[1], c + 1e-9, *(10.0 * np.abs(start[2:]) + 1.0)])
        thetas, costs = _projected_fit(model, y, weights, start, lower, upper, [True, False, True, True])
        theta, cost = thetas[0], 0.5 * float(costs[0])
        if np.any(theta[2:] < lower[2:]) or np.any(theta[2:] > upper[2:]):
            # the best values lie outside their bounds: the bounded fit of all parameters
            theta, sol = _least_squares(model, y, weights, np.array(start, float), lower, upper, max_nfev=100)
            cost = float(sol.cost)
        rows.append([float(c), cost, float(theta[0]), [float(v) for v in theta[2:]]])
        return cost

    for c in candidates:
        cost_at(c)
    # refine between the neighbours of the best candidate (the time is sensitive to it)
    from scipy.optimize import minimize_scalar

    def an_chi2(c):
        if an_position is None or not an_position[1] or not math.isfinite(an_position[1]):
            return 0.0
        return ((c - an_position[0]) / an_position[1]) ** 2

    scale0 = 1.0 if known_sd else 2.0 * min(r[1] for r in rows) / max(y.size - 3, 1)
    k = int(np.argmin([2.0 * r[1] / max(scale0, 1e-300) + an_chi2(r[0]) for r in rows]))
    step = (hi - lo) / n_candidates
    a, b = max(lo, candidates[k] - step), min(hi, candidates[k] + step)
    minimize_scalar(lambda c: 2.0 * cost_at(c) / max(scale0, 1e-300) + an_chi2(c), bounds=(a, b),
                    method="bounded", options={"xatol": 0.01 * step})
    rows.sort()
    costs = np.array([r[1] for r in rows])
    scale = 1.0 if known_sd else 2.0 * costs.min() / max(y.size - 3, 1)
    chi2 = 2.0 * costs / max(scale, 1e-300) + np.array([an_chi2(r[0]) for r in rows])
    like = np.exp(-0.5 * (chi2 - chi2.min()))
    # ∫ L(p) dp over the gap: trapezoid widths of the (unevenly) evaluated positions
    pos = np.array([r[0] for r in rows])
    edges = np.concatenate([[lo], 0.5 * (pos[1:] + pos[:-1]), [hi]])
    like = like * np.diff(edges)
    like /= like.sum()
    out = [{"position_um": r[0], "log10_dt_m2": r[2], "weight": float(wt)} for r, wt in zip(rows, like)]
    best = rows[int(np.argmin(chi2))][0]
    return float(best), cells_at(best), out
