"""The frozen An profile of the An-coupled model and the tie of the element step to the An step.

Private helpers of :mod:`zoneprofile.diffusion.fitting`.
"""

from __future__ import annotations

import math

import numpy as np

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
    # otherwise a 5-point running mean (measurement noise is not zoning)
    smooth = _running_mean(an, 5)
    if np.std(an) <= 1.5 * noise:
        smooth = np.full_like(an, np.mean(an))
    measured = np.interp(grid.centres_um, xa, smooth)
    sel = np.abs(xa - boundary_um) <= half
    plain = (lambda position_um=None: measured), {"sharpened": False, "an_noise_sd": 100 * noise}
    if sel.sum() < 6 or np.sum(xa[sel] < boundary_um) < 2 or np.sum(xa[sel] > boundary_um) < 2:
        return plain
    xs, ys = xa[sel], an[sel]
    a0, b0 = _side_means(xs, ys, boundary_um)
    if abs(b0 - a0) < max(4.0 * noise, 0.01):
        return plain

    def resid(p):
        lo, hi, x0, w = p
        return lo + (hi - lo) * ndtr((xs - x0) / (w + 1e-9)) - ys

    start = [a0, b0, boundary_um, max(spacing * 0.3, 0.1)]
    bounds = ([-1, -1, xs[0], 0.0], [2, 2, xs[-1], half])
    sol = least_squares(resid, start, bounds=bounds)
    lo, hi, x0, w_app = sol.x
    s = math.sqrt(max(w_app**2 - sig_beam**2, 0.0))
    region = np.abs(grid.centres_um - x0) <= half * 0.75
    if np.std(sol.fun) <= 1.5 * noise:
        # two plateaus explain the An near the boundary: use them on each side, up to
        # where the measured An departs from them
        left = np.flatnonzero((xa < x0) & (np.abs(an - lo) > 3 * noise))
        right = np.flatnonzero((xa > x0) & (np.abs(an - hi) > 3 * noise))
        r_lo = xa[left[-1]] if left.size else -np.inf
        r_hi = xa[right[0]] if right.size else np.inf
        region = (grid.centres_um > r_lo) & (grid.centres_um < r_hi)
    sharp = s < 0.5 * spacing
    gap = [float(xa[xa <= x0].max()), float(xa[xa > x0].min())] if sharp else [float(x0), float(x0)]

    def cells_at(position_um=None):
        pos = x0 if position_um is None else float(position_um)
        if sharp:
            step = lo + (hi - lo) * grid.fraction_beyond([pos])[0]
        else:
            step = lo + (hi - lo) * ndtr((grid.centres_um - pos) / s)
        out = measured.copy()
        out[region] = step[region]
        return np.clip(out, 0.0, 1.0)

    info = {"sharpened": True, "position_um": float(x0), "outer_an": 100 * float(lo),
            "inner_an": 100 * float(hi), "apparent_width_sd_um": float(w_app), "width_sd_um": float(s),
            "an_beam_um": an_beam_um, "gap_um": gap, "an_noise_sd": 100 * noise}
    return cells_at, info


def _tie_to_an_step(problem, cells_at, gap, t0, y, weights, log_bounds, known_sd, n_candidates=5):
    """Place the tied An/element step inside the An gap: best position and likelihood weights.

    Returns ``(position, x_an_cells, candidates)``; ``candidates`` lists each
    tried position with its log10 D·t and its relative likelihood
    ``exp(−Δχ²/2)`` (χ² from the residuals, scaled by the residual variance
    when no precision was given), used to spread the time over positions the
    data cannot tell apart.
    """
    from zoneprofile.diffusion.fitting import _coarse_start, _least_squares

    lo, hi = gap
    if hi - lo <= 1e-9:
        return lo, cells_at(lo), []
    candidates = lo + (np.arange(n_candidates) + 0.5) / n_candidates * (hi - lo)
    rows = []

    def cost_at(c):
        problem.x_an_cells = cells_at(c)
        model = problem.model(t0)
        start = _coarse_start(model, y, weights, log_bounds, (c, c), c, True)
        lower = np.array([log_bounds[0], c - 1e-9, 0.0, 0.0])
        upper = np.array([log_bounds[1], c + 1e-9, *(10.0 * np.abs(start[2:]) + 1.0)])
        theta, sol = _least_squares(model, y, weights, np.array(start, float), lower, upper, max_nfev=100)
        rows.append([float(c), float(sol.cost), float(theta[0])])
        return float(sol.cost)

    for c in candidates:
        cost_at(c)
    # refine between the neighbours of the best candidate (the time is sensitive to it)
    from scipy.optimize import minimize_scalar

    k = int(np.argmin([r[1] for r in rows]))
    step = (hi - lo) / n_candidates
    a, b = max(lo, candidates[k] - step), min(hi, candidates[k] + step)
    minimize_scalar(cost_at, bounds=(a, b), method="bounded", options={"xatol": 0.01 * step})
    rows.sort()
    costs = np.array([r[1] for r in rows])
    scale = 1.0 if known_sd else 2.0 * costs.min() / max(y.size - 3, 1)
    chi2 = 2.0 * costs / max(scale, 1e-300)
    like = np.exp(-0.5 * (chi2 - chi2.min()))
    # ∫ L(p) dp over the gap: trapezoid widths of the (unevenly) evaluated positions
    pos = np.array([r[0] for r in rows])
    edges = np.concatenate([[lo], 0.5 * (pos[1:] + pos[:-1]), [hi]])
    like = like * np.diff(edges)
    like /= like.sum()
    out = [{"position_um": r[0], "log10_dt_m2": r[2], "weight": float(wt)} for r, wt in zip(rows, like)]
    best = rows[int(np.argmin(costs))][0]
    return float(best), cells_at(best), out

