r"""Which points a boundary is fitted on, and when a boundary cannot be dated alone.

A single-boundary fit models one step between two plateaus (or one plateau and
the rim). It is only right where nothing else changed the profile inside the
window: no neighbouring step may sit in the window, and the window may not end
inside the boundary's own diffused zone (data cut off there look like a
plateau that is not one). This module draws the window and, after the fit,
decides whether the boundary could be dated alone. The rules (written out in
``docs/fitting-and-uncertainty.md``, "Windows and neighbours"):

- **Spread of a step.** A diffused step seen through a Gaussian spot is, to
  first order, an error function of sd ``s = √(2·D·t + σ_beam²)`` (Crank 1975,
  eq. 2.14, convolved with the spot). Before a fit, ``s`` of every step is
  measured by fitting an error function to the element's own points
  (:func:`erf_step`); after the fit, ``s`` of the dated boundary is computed
  from the fitted D·t and the spot.
- **Diffused zone.** ``|x − b| < Z·s`` with ``Z = 2.5``: 99.4 % of the step's
  change lies inside (Φ(2.5) = 0.9938), so beyond it the profile is a plateau
  to 0.6 % of the step, below the 1–2 % precision of a good analysis.
- **Neighbours.** Other steps of the profile: the ones given (campaign zoning,
  other ``--boundary-um``), those found in An (which does not diffuse) or in the
  element, and small young steps near the rim searched for separately, each
  kept only when a two-step model beats one diffused step (a point on the flank
  of one wide step is not a second step, :func:`separate_step`).
- **Window.** On a side with a neighbour ``n`` the window ends at the edge of
  that neighbour's zone, ``n ± Z·s_n``; on the rim side without one it runs to
  the rim, which the model holds open or closed; on the core side without one
  it runs to the end of the data (the model's far field is a free plateau).
- **Dated alone or deferred.** After the fit the boundary is dated alone only
  when every neighbour is at least ``Z·(s + s_n)`` away (the two zones do not
  overlap, and the old rim at a younger neighbour never felt this boundary) and
  no window edge that is not the rim or the end of the data lies within
  ``Z·s``. Otherwise the boundary cannot be dated alone: the fit says so
  (``statement: "none"``) and defers to the whole-crystal model, which models
  all steps of the traverse in one forward model.
"""

from __future__ import annotations

import math

import numpy as np

from zoneprofile.diffusion._steps import _noise_sd, find_boundaries

#: half-width of a step's diffused zone in units of its spread s (99.4 % of the change inside)
ZONE_SDS = 2.5
#: Δχ² (in units of the noise variance) a second step must gain over one diffused step:
#: χ²(3 dof) at 0.999 (three extra parameters: position, spread, size; scipy.stats.chi2.ppf(0.999, 3))
SECOND_STEP_DCHI2 = 16.27
DEFERRAL = "deferred to the whole-crystal model (fit --crystal / model = \"crystal\")"


def _ndtr(z):
    from scipy.special import ndtr

    return ndtr(z)


def _fit_steps(x, y, positions, spreads, b_bounds, s_bounds):
    """Least-squares fit of ``a + Σ d_k·Φ((x − b_k)/s_k)``; returns (b, s, a, d, chi2) or None.

    The plateau ``a`` and the sizes ``d_k`` are solved linearly at every trial
    (variable projection); positions and spreads (log) are iterated.
    """
    from scipy.optimize import least_squares

    k = len(positions)
    if x.size < 2 * k + 2:
        return None

    def linear(p):
        b, s = p[:k], np.exp(p[k:])
        basis = np.column_stack([np.ones_like(x)] + [_ndtr((x - b[j]) / s[j]) for j in range(k)])
        coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
        return basis, coef

    def resid(p):
        basis, coef = linear(p)
        return basis @ coef - y

    lo = np.array([bb[0] for bb in b_bounds] + [math.log(sb[0]) for sb in s_bounds])
    hi = np.array([bb[1] for bb in b_bounds] + [math.log(sb[1]) for sb in s_bounds])
    best = None
    for factor in (0.5, 1.0, 3.0):
        p0 = np.array(list(positions) + [math.log(max(sp * factor, 1e-9)) for sp in spreads])
        p0 = np.clip(p0, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))
        try:
            sol = least_squares(resid, p0, bounds=(lo, hi), x_scale="jac", max_nfev=200)
        except (ValueError, np.linalg.LinAlgError):
            continue
        chi2 = float(sol.fun @ sol.fun)
        if best is None or chi2 < best[-1]:
            _, coef = linear(sol.x)
            best = (sol.x[:k].copy(), np.exp(sol.x[k:]), float(coef[0]), coef[1:].copy(), chi2)
    return best


def erf_step(x, y, b_guess, *, half_range_um=None):
    """Apparent position, spread s (µm), plateau and size of one step near ``b_guess``.

    ``half_range_um``: how far the position may move (default: the data range).
    Returns a dict or None when the fit fails.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if x.size < 6:
        return None
    spacing = float(np.median(np.diff(x)))
    span = float(x[-1] - x[0])
    h = span if half_range_um is None else float(half_range_um)
    b_lo, b_hi = max(b_guess - h, x[0]), min(b_guess + h, x[-1])
    if b_hi <= b_lo:
        return None
    out = _fit_steps(x, y, [b_guess], [2.0 * spacing], [(b_lo, b_hi)], [(0.05 * spacing, 2.0 * span)])
    if out is None:
        return None
    b, s, a, d, chi2 = out
    return {"position_um": float(b[0]), "spread_um": float(s[0]), "plateau": a, "size": float(d[0]),
            "chi2": chi2}


def separate_step(x, y, b0, c, noise, min_step=0.0, max_spread_um=None):
    """Is there a step at ``c`` besides the one at ``b0``, or is ``c`` a point on ``b0``'s flank?

    One diffused step and two are fitted to the points spanning both (and as far
    again beyond each); ``c`` is a separate step when the two-step model lowers
    χ² by more than :data:`SECOND_STEP_DCHI2` noise variances and its second step
    is larger than both ``min_step`` and three times the noise (and, for a
    track that does not diffuse such as An, no wider than ``max_spread_um``).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    gap = abs(c - b0)
    spacing = float(np.median(np.diff(x)))
    reach = max(gap, 6.0 * spacing)
    sel = (x >= min(b0, c) - reach) & (x <= max(b0, c) + reach)
    xs, ys = x[sel], y[sel]
    if xs.size < 8 or noise <= 0:
        return False
    span = float(xs[-1] - xs[0])
    s_rng = (0.05 * spacing, 2.0 * span)
    one = _fit_steps(xs, ys, [b0], [2 * spacing], [(xs[0], xs[-1])], [s_rng])
    half = 0.5 * gap
    two = _fit_steps(xs, ys, [b0, c], [2 * spacing, 2 * spacing],
                     [(b0 - half, b0 + half), (c - half, c + half)], [s_rng, s_rng])
    if one is None or two is None:
        return False
    gain = (one[-1] - two[-1]) / noise**2
    size = abs(float(two[3][1]))
    sharp = max_spread_um is None or float(two[1][1]) <= max_spread_um
    return bool(gain > SECOND_STEP_DCHI2 and size > max(min_step, 3.0 * noise) and sharp)


#: An precision floor (mol%, 1 sd) of a microprobe analysis, common practice
AN_NOISE_FLOOR = 0.3
#: relative precision floor of a value (1 sd), for noise-free (model) data: common practice
RELATIVE_NOISE_FLOOR = 0.002


def _noise_floor(y, noise=None, *, an=False):
    """Noise sd of a track: the given one, else the point-to-point scatter, never below a floor."""
    y = np.asarray(y, float)
    n = _noise_sd(y) if noise is None else float(noise)
    floor = AN_NOISE_FLOOR if an else RELATIVE_NOISE_FLOOR * max(float(np.median(np.abs(y))), 1e-12)
    return max(n, floor)


def neighbour_steps(x, y, b0, *, an_x=None, an=None, given=None, noise=None):
    """Other steps of the profile than the one at ``b0``: [(position_um, source)].

    ``given`` positions (zoning of a campaign, other ``--boundary-um``) are
    kept as they are. Then steps are searched in An (when given; it does not
    diffuse, so its steps stay sharp) and in the element, over the whole
    profile and again between the rim and ``b0`` alone (a small young step near
    the rim is easily outshone by the large one being dated); each candidate
    must pass :func:`separate_step`.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    spacing = float(np.median(np.diff(x)))
    found = []

    def near_known(c, tol):
        return abs(c - b0) <= tol or any(abs(c - p) <= tol for p, _ in found)

    for p in given or []:
        if abs(float(p) - b0) > 1e-6:
            found.append((float(p), "given"))
    if an is not None and an_x is not None and np.size(an) >= 8:
        # An marks every growth boundary and stays sharp; the element's own shape near an An
        # step (partition-coupled, uphill) is not one error function, so it is not searched
        tracks = [(np.asarray(an_x, float), np.asarray(an, float), 1.0, "An")]
    else:
        tracks = [(x, y, 0.0, "element")]
    for tx, ty, min_step, source in tracks:
        t_noise = _noise_floor(ty, None if source == "An" else noise, an=source == "An")
        t_spacing = float(np.median(np.diff(tx)))
        # An does not diffuse: its steps are as sharp as the spot and the point spacing show them
        max_spread = 2.0 * t_spacing if source == "An" else None
        cands = list(find_boundaries(tx, ty, count=6, side_points=3))
        rim_side = tx < b0 - 2.0 * t_spacing
        if np.sum(rim_side) >= 6:
            cands += list(find_boundaries(tx[rim_side], ty[rim_side], count=3, side_points=2))
        for c in sorted(set(float(v) for v in cands)):
            if near_known(c, max(3.0 * t_spacing, 3.0 * spacing)):
                continue
            if separate_step(tx, ty, b0, c, t_noise, min_step, max_spread):
                found.append((c, source))
    return sorted(found)


def neighbour_spreads(x, y, b0, neighbours, noise=None):
    """Spread (µm) of each neighbour in the element, measured between the midpoints to its own neighbours.

    A neighbour whose step does not show in the element (the fit fails, or its
    size is within three noise sd) gets a spread of 0: only its position bounds
    the window.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    noise = _noise_floor(y, noise)
    marks = sorted([b0] + [p for p, _ in neighbours])
    out = []
    for p, source in neighbours:
        i = marks.index(p)
        lo = 0.5 * (marks[i - 1] + p) if i > 0 else -math.inf
        hi = 0.5 * (marks[i + 1] + p) if i + 1 < len(marks) else math.inf
        sel = (x >= lo) & (x <= hi)
        fit = erf_step(x[sel], y[sel], p, half_range_um=0.5 * (min(hi, x[-1]) - max(lo, x[0]))) \
            if np.sum(sel) >= 6 else None
        s = 0.0 if fit is None or abs(fit["size"]) <= 3.0 * noise else fit["spread_um"]
        out.append({"position_um": float(p), "source": source, "spread_um": float(s),
                    "side": "rimward" if p < b0 else "coreward"})
    return out


def draw_window(x, b0, neighbours, *, min_side_points=3):
    """Window (lo, hi) in µm for the boundary at ``b0`` and a description of each edge.

    ``neighbours``: :func:`neighbour_spreads` entries. Each side ends just
    outside the nearest neighbour's zone (``n ± Z·s_n``); when that leaves too
    few points before ``b0``, at the midpoint (the fit then cannot be dated
    alone, which :func:`verdict` finds). Without a neighbour the window runs to
    the end of the data.
    """
    x = np.asarray(x, float)
    rim = [n for n in neighbours if n["position_um"] < b0]
    core = [n for n in neighbours if n["position_um"] > b0]
    lo, hi = -math.inf, math.inf
    edges = {"rimward": "rim (modelled)", "coreward": "end of the data (free plateau)"}
    if rim:
        n = max(rim, key=lambda d: d["position_um"])
        lo = n["position_um"] + ZONE_SDS * n["spread_um"]
        edges["rimward"] = f"edge of the neighbour's zone at {n['position_um']:.1f} µm"
        if np.sum((x >= lo) & (x < b0)) < min_side_points:
            lo = 0.5 * (n["position_um"] + b0)
            edges["rimward"] = f"midpoint to the neighbour at {n['position_um']:.1f} µm (zones overlap)"
    if core:
        n = min(core, key=lambda d: d["position_um"])
        hi = n["position_um"] - ZONE_SDS * n["spread_um"]
        edges["coreward"] = f"edge of the neighbour's zone at {n['position_um']:.1f} µm"
        if np.sum((x <= hi) & (x > b0)) < min_side_points:
            hi = 0.5 * (n["position_um"] + b0)
            edges["coreward"] = f"midpoint to the neighbour at {n['position_um']:.1f} µm (zones overlap)"
    return lo, hi, edges


def fitted_spread_um(log10_dt_m2, beam_sigma_um):
    """``s = √(2·D·t + σ_beam²)`` in µm."""
    dt_um2 = 10.0 ** (float(log10_dt_m2) + 12.0)
    return math.sqrt(2.0 * dt_um2 + float(beam_sigma_um or 0.0) ** 2)


def verdict(b, spread, neighbours, window_lo, window_hi, x_first, x_last):
    """Can the boundary be dated alone? Returns (alone, reasons).

    ``spread``: s of the fitted boundary (µm); ``window_lo/hi``: the window's
    edges (±inf when it runs to the rim / the end of the data).
    """
    reasons = []
    zone = ZONE_SDS * spread
    for n in neighbours:
        need = ZONE_SDS * (spread + n["spread_um"])
        gap = abs(n["position_um"] - b)
        if gap < need:
            reasons.append(
                f"the {n['side']} neighbour at {n['position_um']:.1f} µm is {gap:.1f} µm away, closer than "
                f"the {need:.1f} µm its diffused zone and this boundary's need "
                f"({ZONE_SDS:g}·(s = {spread:.1f} µm + s_n = {n['spread_um']:.1f} µm))")
    if math.isfinite(window_lo) and window_lo > x_first and b - window_lo < zone and not reasons:
        reasons.append(f"the window's rimward edge at {window_lo:.1f} µm lies inside this boundary's "
                       f"diffused zone (±{zone:.1f} µm)")
    if math.isfinite(window_hi) and window_hi < x_last and window_hi - b < zone and not reasons:
        reasons.append(f"the window's coreward edge at {window_hi:.1f} µm lies inside this boundary's "
                       f"diffused zone (±{zone:.1f} µm)")
    return not reasons, reasons


def plan(x, y, b0, *, an_x=None, an=None, given=None, noise=None):
    """Neighbours (with spreads), window edges and their description for the boundary at ``b0``."""
    steps = neighbour_steps(x, y, b0, an_x=an_x, an=an, given=given, noise=noise)
    neighbours = neighbour_spreads(x, y, b0, steps, noise)
    lo, hi, edges = draw_window(x, b0, neighbours)
    return {"neighbours": neighbours, "lo_um": lo, "hi_um": hi, "edges": edges}


def describe(plan_, b, spread, alone, reasons):
    """The ``window`` entry of a fit's setup: what was fitted and why."""
    return {
        "lo_um": None if not math.isfinite(plan_["lo_um"]) else float(plan_["lo_um"]),
        "hi_um": None if not math.isfinite(plan_["hi_um"]) else float(plan_["hi_um"]),
        "edges": dict(plan_["edges"]),
        "neighbours": [dict(n, clear=bool(abs(n["position_um"] - b) >= ZONE_SDS * (spread + n["spread_um"])))
                       for n in plan_["neighbours"]],
        "spread_um": float(spread),
        "zone_half_width_um": float(ZONE_SDS * spread),
        "rule": (f"window ends outside each neighbour's diffused zone (n ± {ZONE_SDS:g}·s_n); dated alone only "
                 f"when every neighbour is at least {ZONE_SDS:g}·(s + s_n) away and no cut edge lies within "
                 f"{ZONE_SDS:g}·s, s = √(2·D·t + σ_beam²)"),
        "dated_alone": bool(alone),
        "neighbour_handling": "none needed" if alone and not plan_["neighbours"] else (
            "kept outside the window" if alone else "zones overlap: " + DEFERRAL),
        "reasons": list(reasons),
    }


def defer(result, reasons):
    """Turn a fit into 'cannot be dated alone': no time, no bound, no draws, a plain warning."""
    td = result.time_days
    for key in ("p2_5", "p16", "median", "p84", "p97_5", "best", "upper_bound", "lower_bound"):
        td[key] = None
    td["statement"] = "none"
    result.resolved = False
    result.time_draws_days = np.empty(0)
    result.warnings.append("this boundary cannot be dated alone: " + "; ".join(reasons) + "; " + DEFERRAL)
    return result
