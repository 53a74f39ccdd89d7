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
  measured by fitting error functions to the element's own points
  (:func:`step_model`); for a trace element in plagioclase each neighbour is
  fitted alone instead. After the fit, ``s`` of the dated boundary is
  computed from the fitted D·t and the spot.
- **Diffused zone.** ``|x − b| < Z·s`` with ``Z = 2.5``: 99.4 % of the step's
  change lies inside (Φ(2.5) = 0.9938), so beyond it the profile is a plateau
  to 0.6 % of the step, below the 1–2 % precision of a good analysis.
- **Neighbours.** Other steps of the profile: the ones given (campaign zoning,
  other ``--boundary-um``), those found in An (which does not diffuse) or in the
  element, and small young steps near the rim searched for separately, each
  kept only when it improves a model of all known steps significantly (a point
  on the flank of one wide step is not a second step, :func:`neighbour_steps`).
- **Window.** On a side with a neighbour ``n`` the window ends at the edge of
  that neighbour's zone, ``n ± Z·s_n``; on the rim side without one it runs to
  the rim, which the model holds open or closed; on the core side without one
  it runs to the end of the data (the model's far field is a free plateau).
- **Dated alone or deferred.** After the fit the boundary is dated alone only
  when (1) no younger neighbour, the crystal's rim while this boundary
  diffused, was close enough for that rim to change the profile by more than
  the noise; (2) no neighbour's diffusion changes the profile inside the window
  by more than the noise (a neighbour's reach comes from its error function,
  or, for a trace element in plagioclase, from a quick fit of it alone); (3) no
  end of the model other than the rim lies within ``Z·s``. Otherwise the
  boundary cannot be dated alone: the fit says so (``statement: "none"``) and
  defers to the whole-crystal model, which models all steps of the traverse in
  one forward model. A data window that ends inside the zone is not an edge
  condition (the model runs on beyond the data, its far plateau free); it only
  widens the interval.
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


def _basis(x, b, s):
    """Columns of the step model: level, slope, and per step a level change Φ_k and a slope change (x − b_k)·Φ_k.

    Zones are lines, not plateaus (growth zoning inside a zone is common), so
    a gradient is never mistaken for a step.
    """
    xm = x - x.mean()
    phis = [_ndtr((x - b[j]) / s[j]) for j in range(len(b))]
    return np.column_stack([np.ones_like(x), xm] + phis + [(x - b[j]) * phis[j] for j in range(len(b))])


def _fit_steps(x, y, positions, spreads, b_bounds, s_bounds, factors=(0.5, 1.0, 3.0)):
    """Least-squares fit of lines joined by error-function steps; returns (b, s, a, d, chi2, coef) or None.

    ``d`` are the steps' sizes (the coefficients of Φ((x − b_k)/s_k)). The
    linear coefficients are solved at every trial (variable projection);
    positions and spreads (log) are iterated.
    """
    from scipy.optimize import least_squares

    k = len(positions)
    if x.size < 3 * k + 4:
        return None

    def linear(p):
        basis = _basis(x, p[:k], np.exp(p[k:]))
        coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
        return basis, coef

    def resid(p):
        basis, coef = linear(p)
        return basis @ coef - y

    lo = np.array([bb[0] for bb in b_bounds] + [math.log(sb[0]) for sb in s_bounds])
    hi = np.array([bb[1] for bb in b_bounds] + [math.log(sb[1]) for sb in s_bounds])
    best = None
    for factor in factors:
        p0 = np.array(list(positions) + [math.log(max(sp * factor, 1e-9)) for sp in spreads])
        p0 = np.clip(p0, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))
        try:
            sol = least_squares(resid, p0, bounds=(lo, hi), x_scale="jac", max_nfev=200)
        except (ValueError, np.linalg.LinAlgError):
            continue
        chi2 = float(sol.fun @ sol.fun)
        if best is None or chi2 < best[4]:
            _, coef = linear(sol.x)
            best = (sol.x[:k].copy(), np.exp(sol.x[k:]), float(coef[0]), coef[2:2 + k].copy(), chi2, coef)
    return best


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


def neighbour_steps(x, y, b0, *, an_x=None, an=None, given=None, noise=None, max_new=6):
    """Other steps of the profile than the one at ``b0``: ([(position_um, source)], model or None).

    ``given`` positions (zoning of a campaign, other ``--boundary-um``) are
    kept as they are. More are searched for, one at a time, in An when it is
    given (it does not diffuse, so every growth boundary stays a sharp step
    there) or else in the element: the profile is modelled as a plateau plus
    one error-function step per known step (each with its own position, spread
    and size); the largest step left in the residuals, over the whole profile
    and again between the rim and the outermost known step alone (a small young
    step near the rim is easily outshone), is added when it lowers χ² by more than
    :data:`SECOND_STEP_DCHI2` noise variances and is larger than three noise sd
    (and the An ``min_step`` of 1 mol%, and as sharp as An steps are). A point
    on the flank of one wide step is explained by that step's own spread and is
    never a second step.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    given = [float(p) for p in (given or []) if abs(float(p) - b0) > 1e-6]
    found = []
    if an is not None and an_x is not None and np.size(an) >= 8:
        tx, ty, min_step, source = np.asarray(an_x, float), np.asarray(an, float), 1.0, "An"
        t_noise = _noise_floor(ty, an=True)
    else:
        tx, ty, min_step, source = x, y, 0.0, "element"
        t_noise = _noise_floor(ty, noise)
    t_spacing = float(np.median(np.diff(tx)))
    span = float(tx[-1] - tx[0])
    # An does not diffuse: its steps are as sharp as the spot and the point spacing show them
    new_spread_max = 2.0 * t_spacing if source == "An" else 2.0 * span
    s_rng = (0.05 * t_spacing, 2.0 * span)
    move = 3.0 * t_spacing

    warm = {}

    def fit(marks, new=None):
        pos = [m for m in marks] + ([] if new is None else [new])
        b_b = [(max(m - move, tx[0]), min(m + move, tx[-1])) for m in pos]
        s_b = [s_rng] * len(marks) + ([] if new is None else [(s_rng[0], new_spread_max)])
        # the known steps start from their last fitted spreads (one start), the new one from two spacings
        start = [warm.get(m, 2.0 * t_spacing) for m in marks] + ([] if new is None else [2.0 * t_spacing])
        out = _fit_steps(tx, ty, pos, start, b_b, s_b, factors=(1.0,) if warm else (0.5, 1.0, 3.0))
        return out

    def remember(marks, fitted):
        warm.clear()
        warm.update({m: float(sp) for m, sp in zip(marks, fitted[1])})

    # a given step within four point spacings is kept only when the track shows it as a step of its
    # own: zoning may list one step twice (in An and in the element, a few µm apart)
    near = 4.0 * max(t_spacing, float(np.median(np.diff(x))))
    found = [(p, "given") for p in given if abs(p - b0) > near]
    inside = sorted(m for m in [b0] + [p for p, _ in found] if tx[0] < m < tx[-1])
    if tx.size < 3 * len(inside) + 8:
        return sorted(found), None
    near_given = [p for p in given if abs(p - b0) <= near and tx[0] < p < tx[-1]]
    # the search depends only on the set of known steps, so the fits of every boundary of one
    # traverse (and the quick fits of their neighbours) share it
    key = (_digest(tx, ty), tuple(round(m, 6) for m in inside), tuple(round(p, 6) for p in near_given),
           source, round(t_noise, 12), max_new)
    if key in _SEARCHES:
        added, model = _SEARCHES[key]
        return sorted(found + added), model
    current = fit(inside)
    if current is None:
        return sorted(found), None
    remember(inside, current)
    added = []
    for p in near_given:
        trial = fit(inside, p)
        if trial is not None and (current[4] - trial[4]) / t_noise**2 > SECOND_STEP_DCHI2 \
                and abs(float(trial[3][-1])) > max(min_step, 3.0 * t_noise):
            inside.append(p)
            added.append((p, "given"))
            current = trial
            remember(inside, current)
    for _ in range(max_new):
        pos_now, spread_now = current[0], current[1]
        resid = ty - _predict(tx, current)
        cands = list(find_boundaries(tx, resid, count=3, side_points=3))
        # between the rim and the outermost known step: a small young step there is easily outshone
        rim_side = tx < min(inside) - 2.0 * t_spacing
        if np.sum(rim_side) >= 6:
            cands += list(find_boundaries(tx[rim_side], resid[rim_side], count=2, side_points=2))
        best = None
        for c in sorted(set(float(v) for v in cands)):
            # not a point inside a known step's own zone (its flank)
            if any(abs(c - p) <= max(ZONE_SDS * sp, 3.0 * t_spacing) for p, sp in zip(pos_now, spread_now)):
                continue
            trial = fit(inside, c)
            if trial is None:
                continue
            gain = (current[4] - trial[4]) / t_noise**2
            size = abs(float(trial[3][-1]))
            if gain > SECOND_STEP_DCHI2 and size > max(min_step, 3.0 * t_noise):
                if best is None or trial[4] < best[1][4]:
                    best = (float(trial[0][-1]), trial)
        if best is None:
            break
        inside.append(best[0])
        added.append((best[0], source))
        current = best[1]
        remember(inside, current)
    model = {"marks": inside, "fit": current, "noise": t_noise, "track": source}
    _remember(_SEARCHES, key, (added, model))
    return sorted(found + added), model


#: recent step searches and step models, by data and set of known steps (one traverse's fits share them)
_SEARCHES: dict = {}
_MODELS: dict = {}
_CACHE_SIZE = 64


def _digest(*arrays):
    import hashlib

    h = hashlib.blake2b(digest_size=16)
    for a in arrays:
        h.update(np.ascontiguousarray(a, float).tobytes())
    return h.hexdigest()


def _remember(cache, key, value):
    if len(cache) >= _CACHE_SIZE:
        cache.pop(next(iter(cache)))
    cache[key] = value


def _predict(x, fitted):
    return _basis(x, fitted[0], fitted[1]) @ fitted[5]


def step_model(x, y, b0, steps, noise=None):
    """Every step (``b0`` first, then ``steps``) modelled in the element: position, spread, size.

    A plateau plus one error-function step per step, fitted to the element's
    points (positions may move by three point spacings). The dated boundary's
    spread is a first estimate; each neighbour's spread and size tell how far
    its diffused zone reaches and how much it changes the profile there. A
    neighbour whose step does not show in the element (size within three noise
    sd) gets spread 0 and size 0. Returns (own, neighbours, noise).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    noise = _noise_floor(y, noise)
    spacing = float(np.median(np.diff(x)))
    span = float(x[-1] - x[0])
    marks = [b0] + [p for p, _ in steps]
    pos = sorted(m for m in marks if x[0] < m < x[-1])
    key = (_digest(x, y), tuple(round(m, 6) for m in pos), round(noise, 12))
    by_mark = _MODELS.get(key)
    if by_mark is None:
        by_mark = {}
        if pos and x.size >= 3 * len(pos) + 8:
            fitted = _fit_steps(x, y, pos, [2.0 * spacing] * len(pos),
                                [(max(m - 3 * spacing, x[0]), min(m + 3 * spacing, x[-1])) for m in pos],
                                [(0.05 * spacing, 2.0 * span)] * len(pos))
            if fitted is not None:
                by_mark = {round(m, 6): (float(fitted[1][j]), float(fitted[3][j])) for j, m in enumerate(pos)}
        _remember(_MODELS, key, by_mark)
    spread = {i: 0.0 for i in range(len(marks))}
    size = {i: 0.0 for i in range(len(marks))}
    for i, m in enumerate(marks):
        sp, sz = by_mark.get(round(m, 6), (0.0, 0.0))
        if abs(sz) > 3.0 * noise:
            spread[i], size[i] = sp, sz
    own = {"spread_um": spread[0], "size": size[0]}
    neighbours = [{"position_um": float(marks[i]), "source": steps[i - 1][1], "spread_um": spread[i],
                   "size": size[i], "side": "rimward" if marks[i] < b0 else "coreward"}
                  for i in range(1, len(marks))]
    return own, neighbours, noise


def draw_window(x, b0, own_spread, neighbours, *, min_side_points=3, midpoints=False):
    """Window (lo, hi) in µm for the boundary at ``b0`` and a description of each edge.

    Each side ends just outside the nearest neighbour's zone (``n ± Z·s_n``)
    when that leaves this boundary's own zone (``Z·s``, from the first
    estimate ``own_spread``) inside the window; otherwise (the zones overlap)
    at the midpoint to the neighbour, and :func:`verdict` judges whether the
    neighbour's diffusion inside the window matters (``midpoints``: always at
    the midpoints, when spreads are not known). Without a neighbour the
    window runs to the rim (modelled) or the end of the data (free plateau).
    """
    x = np.asarray(x, float)
    rim = [n for n in neighbours if n["position_um"] < b0]
    core = [n for n in neighbours if n["position_um"] > b0]
    lo, hi = -math.inf, math.inf
    edges = {"rimward": "rim (modelled)", "coreward": "end of the data (free plateau)"}
    own = ZONE_SDS * own_spread
    if rim:
        n = max(rim, key=lambda d: d["position_um"])
        clear = n["position_um"] + ZONE_SDS * n["spread_um"]
        if not midpoints and clear <= b0 - own and np.sum((x >= clear) & (x < b0)) >= min_side_points:
            lo = clear
            edges["rimward"] = f"edge of the diffused zone of the neighbour at {n['position_um']:.1f} µm"
        else:
            lo = 0.5 * (n["position_um"] + b0)
            edges["rimward"] = f"midpoint to the neighbour at {n['position_um']:.1f} µm (zones overlap)"
    if core:
        n = min(core, key=lambda d: d["position_um"])
        clear = n["position_um"] - ZONE_SDS * n["spread_um"]
        if not midpoints and clear >= b0 + own and np.sum((x <= clear) & (x > b0)) >= min_side_points:
            hi = clear
            edges["coreward"] = f"edge of the diffused zone of the neighbour at {n['position_um']:.1f} µm"
        else:
            hi = 0.5 * (n["position_um"] + b0)
            edges["coreward"] = f"midpoint to the neighbour at {n['position_um']:.1f} µm (zones overlap)"
    return lo, hi, edges


def fitted_spread_um(log10_dt_m2, beam_sigma_um):
    """``s = √(2·D·t + σ_beam²)`` in µm."""
    dt_um2 = 10.0 ** (float(log10_dt_m2) + 12.0)
    return math.sqrt(2.0 * dt_um2 + float(beam_sigma_um or 0.0) ** 2)


def neighbour_tail(n, x_window, b):
    """How much a neighbour's diffusion changes the profile inside the window, beyond a shift of a plateau.

    The change is taken from the neighbour's own quick fit when there is one
    (its model minus its initial condition on its model grid, nothing beyond
    the grid), else from its error-function step (size × Φ). A constant shift
    on either side of this boundary is absorbed by that side's free plateau,
    so what counts is the range of the change on each side; the larger range
    is returned.
    """
    xw = np.asarray(x_window, float)
    if xw.size == 0:
        return 0.0
    reach = n.get("_reach")
    if reach is not None:
        centres, change = reach
        at = np.interp(xw, centres, change, left=0.0, right=0.0)
    elif n["spread_um"] <= 0 or n["size"] == 0:
        return 0.0
    else:
        at = n["size"] * _ndtr((xw - n["position_um"]) / n["spread_um"])
    sides = [at[xw < b], at[xw > b]]
    return float(max((np.ptp(v) for v in sides if v.size), default=0.0))


def verdict(b, spread, plan_, x_window, *, step_size, model_lo_um, model_hi_um, rim_modelled):
    """Can the boundary be dated alone? Returns (alone, reasons).

    ``spread``: s of the fitted boundary (µm); ``x_window``: the fitted points;
    ``step_size``: the size of this boundary's initial step in the element;
    ``model_lo_um/model_hi_um``: the ends of the model's grid (zero-flux ends,
    except a modelled rim). Not alone when

    1. a younger (rimward) neighbour, the crystal's rim while this boundary
       diffused, was close enough for that rim to change this boundary's
       profile by more than the noise: ``|Δ|·Φ(−g/s) > noise`` (the image of
       the step in an open rim at distance ``g``, Crank 1975 §3.3);
    2. a neighbour's diffusion changes the profile inside the window by more
       than the noise (it would pass for this boundary's diffusion);
    3. an end of the model that is not the crystal's rim lies inside this
       boundary's diffused zone (``Z·s``): an artificial edge condition.
    """
    from scipy.special import ndtr

    reasons = []
    zone = ZONE_SDS * spread
    noise = plan_["noise"]
    for n in plan_["neighbours"]:
        gap = abs(n["position_um"] - b)
        if n["side"] == "rimward":
            felt = abs(step_size) * float(ndtr(-gap / max(spread, 1e-12)))
            if felt > noise:
                reasons.append(
                    f"the younger neighbour at {n['position_um']:.1f} µm was the crystal's rim while this boundary "
                    f"diffused, {gap:.1f} µm away (s = {spread:.1f} µm): that rim changed this boundary's profile "
                    f"by about {felt:.3g}, more than the noise ({noise:.2g})")
                continue
        tail = neighbour_tail(n, x_window, b)
        if tail > noise:
            reasons.append(
                f"the diffusion of the neighbour at {n['position_um']:.1f} µm changes the profile by "
                f"{tail:.3g} inside this boundary's window, more than the noise ({noise:.2g})")
    if not rim_modelled and b - model_lo_um < zone:
        reasons.append(f"the model's rimward end at {model_lo_um:.1f} µm lies inside this boundary's diffused "
                       f"zone (±{zone:.1f} µm)")
    if b + zone > model_hi_um:
        reasons.append(f"the model's coreward end at {model_hi_um:.1f} µm lies inside this boundary's diffused "
                       f"zone (±{zone:.1f} µm)")
    return not reasons, reasons


def plan(x, y, b0, *, an_x=None, an=None, given=None, noise=None):
    """Neighbours (position, spread, size), window edges and their description for the boundary at ``b0``."""
    steps, _ = neighbour_steps(x, y, b0, an_x=an_x, an=an, given=given, noise=noise)
    own, neighbours, noise_used = step_model(x, y, b0, steps, noise)
    for n in neighbours:
        n["spread_from"] = "error function fitted to the element"
    out = {"neighbours": neighbours, "noise": noise_used, "own_spread_estimate_um": own["spread_um"]}
    return redraw(out, x, b0)


def redraw(plan_, x, b0, *, own_spread=None, spreads=None, how=None, midpoints=False):
    """The window of ``plan_`` drawn again with a better own spread and/or neighbour spreads (by index)."""
    if own_spread is not None:
        plan_["own_spread_estimate_um"] = float(own_spread)
    for i, value in (spreads or {}).items():
        spread, reach = value if isinstance(value, tuple) else (value, None)
        plan_["neighbours"][i]["spread_um"] = float(spread)
        plan_["neighbours"][i]["spread_from"] = how
        if reach is not None:
            plan_["neighbours"][i]["_reach"] = reach
    lo, hi, edges = draw_window(x, b0, plan_["own_spread_estimate_um"], plan_["neighbours"], midpoints=midpoints)
    plan_.update({"lo_um": lo, "hi_um": hi, "edges": edges})
    return plan_


def describe(plan_, b, spread, alone, reasons):
    """The ``window`` entry of a fit's setup: what was fitted and why."""
    zone = ZONE_SDS * spread
    return {
        "lo_um": None if not math.isfinite(plan_["lo_um"]) else float(plan_["lo_um"]),
        "hi_um": None if not math.isfinite(plan_["hi_um"]) else float(plan_["hi_um"]),
        "edges": dict(plan_["edges"]),
        "neighbours": [{**{k: v for k, v in n.items() if not k.startswith("_")},
                        "outside_zone": bool(abs(n["position_um"] - b) >= zone)} for n in plan_["neighbours"]],
        "spread_um": float(spread),
        "zone_half_width_um": float(ZONE_SDS * spread),
        "rule": (f"window ends outside each neighbour's diffused zone (n ± {ZONE_SDS:g}·s_n), or at the midpoint "
                 f"when the zones overlap; dated alone only when neither a younger neighbour (the old rim) nor "
                 f"any neighbour's diffusion changes the profile in the window by more than the noise, and no "
                 f"model end other than the rim lies within {ZONE_SDS:g}·s; s = √(2·D·t + σ_beam²)"),
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
