r"""Fitting a diffusion model to one boundary and dating it.

The fitted quantities are ``log10_dt_m2`` (log10 of D_ref·t in m², D_ref the law
at the reference composition of the boundary and the nominal temperature), the
boundary position ``boundary_um`` and two values: plateau values (``step``
initial condition) or, for trace elements in plagioclase, the two melt
concentrations the zones grew from (``melt-equilibrium``). The model is
convolved with the spot (:mod:`~zoneprofile.diffusion.resolution`) before it is
compared with the data.

Procedure
---------
1. A coarse search over (log10 D·t, boundary) with the values solved by linear
   least squares at every node (the model is linear in the values), for a start
   that does not depend on luck.
2. Variable projection (:func:`_projected_fit`: log10 D·t, and the boundary
   when it varies, iterated with analytic derivatives; the values by linear
   least squares at every step) finds the optimum; scipy's ``least_squares``
   (bounds honoured, all parameters free) confirms it from there, and the
   Gauss–Newton covariance at the optimum gives every parameter's standard
   error (:func:`~zoneprofile.diffusion._optimise._confirm_fit`).
3. :mod:`~zoneprofile.diffusion.uncertainty` turns the fit into draws of time.

Models asked for a few times only (trial positions of a boundary tied to an An
step, temperature nodes, the rejected rim) are evaluated without an
eigendecomposition (``LinearModel(evaluator="rational")``, see
:mod:`~zoneprofile.diffusion.solver`).

Time is ``t = D_ref·t / D_ref(T)``; the shape of the An-coupled profile also
depends weakly on T through A/RT, which the uncertainty step measures and
propagates by refitting at a few temperatures.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from zoneprofile._limits import check_limit
from zoneprofile._validation import InputError
from zoneprofile.diffusion._an import _frozen_an, _tie_to_an_step
from zoneprofile.diffusion._optimise import (  # noqa: F401 - re-exported for compatibility
    _coarse_start,
    _confirm_fit,
    _least_squares,
    _lstsq_many,
    _profile_upper_log10_dt,
    _projected_fit,
    _refit_projected,
    _ResidualAndJacobian,
)
from zoneprofile.diffusion import _window
from zoneprofile.diffusion._state import FitState
from zoneprofile.diffusion.options import FitOptions, Placement
from zoneprofile.diffusion._steps import _noise_sd, _side_means, find_boundaries
from zoneprofile.diffusion.uncertainty import propagate
from zoneprofile.minerals.registry import REGISTRY as MINERAL_TABLE
from zoneprofile.minerals.registry import needs_an as an_needed

if TYPE_CHECKING:  # annotations only
    from numpy.typing import ArrayLike

    from zoneprofile.diffusion._budget import BudgetOptions
    from zoneprofile.diffusion._optimise import BestFit
    from zoneprofile.diffusion._problem import LinearModel, NonlinearModel, Problem
    from zoneprofile.diffusion.grid import Grid
    from zoneprofile.diffusion.laws._base import DiffusionLaw
    from zoneprofile.diffusion.orientation import Orientation
    from zoneprofile.diffusion.paths import LinearCooling, TablePath
    from zoneprofile.diffusion.uncertainty import FitResult

__all__ = ["fit_boundary", "find_boundaries", "ELEMENT_COLUMNS"]

UM2_PER_M2 = 1e12

#: value column read for each (element, mineral) by the command line (from zoneprofile/minerals/registry.py)
ELEMENT_COLUMNS = {(d.element, m.law_mineral): d.column for m in MINERAL_TABLE for d in m.elements}

_MIN_SIDE_POINTS = 3
#: keyword arguments of the fit that are data, not options (diffusion/options.py groups the rest)
_DATA_KEYWORDS = ("distance_um", "value", "element", "mineral", "an", "an_distance_um", "value_sd")


# --------------------------------------------------------------------------- helpers
def _check_inputs(distance_um, value, element, mineral, temperature_c):
    from zoneprofile.diffusion.laws import ELEMENTS, MINERALS, normalise_element, normalise_mineral

    el = normalise_element(element)
    mi = normalise_mineral(mineral)
    if el not in ELEMENTS:
        raise InputError(f"unknown element '{element}'; choose one of: {', '.join(ELEMENTS)}")
    if mi not in MINERALS:
        raise InputError(f"unknown mineral '{mineral}'; choose one of: {', '.join(MINERALS)}")
    t = float(check_limit("temperature_c", float(temperature_c), "temperature"))  # zoneprofile/_limits.py
    x = np.asarray(distance_um, float)
    y = np.asarray(value, float)
    if x.ndim != 1 or x.shape != y.shape:
        raise InputError("distance_um and value must be 1-D arrays of the same length")
    if x.size < 2 * _MIN_SIDE_POINTS:
        raise InputError(f"a profile needs at least {2 * _MIN_SIDE_POINTS} points to fit a boundary, got {x.size}")
    bad = np.flatnonzero(~np.isfinite(x) | ~np.isfinite(y))
    if bad.size:
        raise InputError(f"point {bad[0] + 1} holds a non-finite distance or value")
    if np.any(np.diff(x) <= 0):
        k = int(np.flatnonzero(np.diff(x) <= 0)[0]) + 1
        raise InputError(f"distances must increase from the rim; point {k + 1} ({x[k]:g} µm) does not")
    neg = np.flatnonzero(y < 0)
    if neg.size:
        raise InputError(f"negative concentration {y[neg[0]]:g} at point {neg[0] + 1}; concentrations must be >= 0",
                         row=None)
    return el, mi, x, y


# --------------------------------------------------------------------------- set-up
#: discretisation error of D·t allowed, as a fraction of its statistical sd (one tenth: ≪)
GRID_ERROR_FRACTION = 0.1
#: most fine cells the refinement may ask for
MAX_REFINED_CELLS = 6400


def _grid_bias(h_um, dt_um2):
    """Relative error of D·t from cell averaging: a cell of width h adds h²/12 to the variance 2·D·t.

    The finite-volume model holds cell means, so a sharp profile is seen
    through a box of width h (variance h²/12); the fitted 2·D·t is low by about
    that much (measured: −2.8 % with 0.75 µm cells and 2·D·t = 2.25 µm²,
    predicted −2.1 %; −0.25 % with 0.33 µm cells).
    """
    return h_um**2 / (12.0 * max(2.0 * dt_um2, 1e-30))


def _build_grid(x_seg, at_rim, geometry, radius_um, beam_um, beam_shape, n_cells, h_max_um=None):
    from zoneprofile.diffusion.grid import refined_grid
    from zoneprofile.diffusion.resolution import beam_sigma_um

    lo_data, hi_data = float(x_seg[0]), float(x_seg[-1])
    length = hi_data - lo_data
    sig = beam_sigma_um(beam_um, beam_shape)
    reach = 4.0 * sig + 0.02 * length
    fine_lo = 0.0 if at_rim else lo_data - reach
    fine_hi = hi_data + reach
    pad = 2.0 * (fine_hi - fine_lo)
    lo = 0.0 if at_rim else fine_lo - pad
    hi = fine_hi + pad
    if geometry != "planar":
        if radius_um is None:
            raise InputError(f"a {geometry} geometry needs the crystal radius (radius_um)")
        if hi_data > radius_um:
            raise InputError(f"profile reaches {hi_data:g} µm, beyond the crystal radius {radius_um:g} µm")
        lo = max(lo, 0.0)
        fine_lo = max(fine_lo, 0.0)
        hi = radius_um
        fine_hi = min(fine_hi, radius_um)
    spacing = float(np.median(np.diff(x_seg)))
    h = min((fine_hi - fine_lo) / 200.0, spacing / 3.0, max(sig / 2.0, spacing / 8.0))
    if h_max_um is not None:
        # refined until the discretisation error is small beside the statistical one (see _grid_bias)
        h = min(h, h_max_um)
        n_cells = max(n_cells, min(math.ceil((fine_hi - fine_lo) / h), MAX_REFINED_CELLS))
    n_fine = int(min(max(math.ceil((fine_hi - fine_lo) / h), 60), n_cells))
    return refined_grid(lo, hi, fine_lo, fine_hi, n_fine, growth=1.1, geometry=geometry, radius_um=radius_um)


_UNDIFFUSED_RIM_DCHI2 = 3.84


def _choose_rim(problem, t0, y, weights, log_bounds, b_bounds, b0, fixed, known_sd):
    """Open or closed rim for ``rim='auto'``: open unless the data clearly prefer closed.

    The open rim (the outermost zone in contact with its melt) is fitted first
    (coarse search and a variable-projection refit); the closed rim is then
    fitted with the boundary where the open fit put it, so that the comparison
    is about the rim alone (a closed rim lets a wide step trade position for
    D·t). Closed is kept when it lowers χ² by more than 3.84 (95 %, one
    degree of freedom; in units of the residual variance when no precision
    was given). Returns ``(kind, info)``.
    """
    out, models = {}, {}
    lower = np.array([log_bounds[0], b_bounds[0], 0.0, 0.0])
    b_fit = b0
    for kind in ("open", "closed"):
        problem.rim = kind
        # the open rim is nearly always kept and its model then serves the whole fit: decompose
        # it at once; the closed one is asked for a few dozen times only unless it wins
        model = problem.model(t0, evaluator="spectral" if kind == "open" else "auto")
        hold = fixed or kind == "closed"
        bb = (b_fit, b_fit) if hold else b_bounds
        start = np.array(_coarse_start(model, y, weights, log_bounds, bb, b_fit, hold), float)
        lo = lower.copy()
        up = np.array([log_bounds[1], b_bounds[1], *(10.0 * np.abs(start[2:]) + 1e-12 + 10.0 * np.ptp(y))])
        if hold:
            lo[1], up[1] = b_fit - 1e-9, b_fit + 1e-9
        theta = _refit_projected(model, y, weights, start, lo, up, [True, not hold, True, True])
        r = model.predict(theta) - y
        out[kind] = (float(np.sum((r * weights) ** 2)), float(theta[0]))
        models[kind] = model
        b_fit = float(theta[1])
    dof = max(y.size - 4, 1)
    s2 = 1.0 if known_sd else out["open"][0] / dof
    gain = float((out["open"][0] - out["closed"][0]) / max(s2, 1e-300))
    best = "closed" if gain > _UNDIFFUSED_RIM_DCHI2 else "open"
    info = {"chosen": best, "chi2_open": out["open"][0], "chi2_closed": out["closed"][0],
            "log10_dt_open": out["open"][1], "log10_dt_closed": out["closed"][1],
            "closed_minus_open_delta_chi2": -gain,
            "log10_dt_shift": float(out["closed"][1] - out["open"][1]) * (1 if best == "open" else -1)}
    return best, info, models[best]


def _element_step(x, y, guess):
    """Where a step found in the element itself is, and how wide it looks.

    The position is where the (3-point smoothed) profile crosses half-way between
    its two ends, nearest ``guess`` (the largest 3-point step sits on one flank of
    a wide diffused step, not at its middle); the width is the distance between
    the 10 % and 90 % crossings, so the fitted position may range over it.
    """
    from zoneprofile.diffusion._steps import _running_mean

    k = min(4, max(x.size // 4, 1))
    lo_end, hi_end = float(np.median(y[:k])), float(np.median(y[-k:]))
    span = hi_end - lo_end
    if span == 0:
        return float(guess), 0.0
    f = (_running_mean(y, 3) - lo_end) / span

    def crossing(level, near):
        s = np.sign(f - level)
        idx = np.flatnonzero(s[:-1] * s[1:] <= 0)
        if idx.size == 0:
            return None
        pts = [x[i] + (x[i + 1] - x[i]) * (level - f[i]) / (f[i + 1] - f[i]) if f[i + 1] != f[i] else x[i]
               for i in idx]
        return float(min(pts, key=lambda p: abs(p - near)))

    mid = crossing(0.5, guess)
    if mid is None:
        return float(guess), 0.0
    a, b = crossing(0.1, mid), crossing(0.9, mid)
    width = abs(b - a) if a is not None and b is not None else 0.0
    return mid, float(width)


def _spot_from_an_step(grid, an_x, an_vals, b0, window, spacing):
    """Gaussian spot FWHM (µm) estimated from the apparent width of a sharp An step, or None.

    Used only when no spot size is given and An comes from the same spots. A
    step wider than a 10 µm spot (docs/references.md §2: defocused beams 5–10 µm) is
    growth zoning, not blur, and gives no estimate.
    """
    from zoneprofile.diffusion.resolution import FWHM_PER_SIGMA

    _, probe = _frozen_an(grid, an_x, an_vals, None, b0, window)
    if not probe.get("sharpened"):
        return None
    fwhm = float(probe["apparent_width_sd_um"]) * FWHM_PER_SIGMA
    if not 0.05 * spacing < fwhm <= 10.0:
        return None
    return fwhm


def _neighbour_spreads(call, b0, plan):
    """Spread (µm, √(2·D·t + σ_beam²)) and reach of each neighbour from a quick fit of it alone, by index.

    The reach is the change the neighbour's fitted diffusion made to the
    profile (model minus its initial condition) on its model grid.

    The quick fit uses the same data and conditions, the other steps (this
    boundary included) as its neighbours, no Monte Carlo to speak of and no
    judgement of its own window; a neighbour that cannot be fitted keeps its
    first estimate.
    """
    from zoneprofile.diffusion.resolution import beam_sigma_um

    out = {}
    for i, n in enumerate(plan["neighbours"]):
        others = [b0] + [m["position_um"] for j, m in enumerate(plan["neighbours"]) if j != i]
        quick = {**call, "boundary_um": n["position_um"], "boundary_window_um": None, "neighbours_um": others,
                 "segment_um": None, "draws": 10, "noise_refits": 0, "temperature_sd_c": 0.0, "path": None,
                 "obliquity_deg": None, "obliquity_sd_deg": 0.0, "dip_deg": None,
                 # only the best fit is used: no uncertainty terms beyond the data
                 "budget": {"section_obliquity": False, "law_spread": False, "an_noise": False,
                            "beam_sd_um": 0.0, "growth_width_sd_um": 0.0}}
        try:
            r = _fit_boundary(**quick, _depth=1)
        except InputError:
            continue
        out[i] = (_window.fitted_spread_um(r.parameters["log10_dt_m2"]["value"],
                                           beam_sigma_um(r.setup["beam_um"], r.setup["beam_shape"])),
                  getattr(r, "reach", None))
    return out


def _single_threaded(func):
    """Run ``func`` with OpenBLAS on one thread (small matrices; see ``_blas``)."""
    import functools

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        from zoneprofile.diffusion._blas import single_thread

        with single_thread():
            return func(*args, **kwargs)

    return wrapper


# --------------------------------------------------------------------------- the stages of one fit
# each stage returns a frozen record that the later stages read (their lists, dicts and the Problem
# are filled in place where the original procedure did: warnings, an_info, the rim and the An tie)
@dataclass(frozen=True)
class _Checked:
    """Stage 1, the inputs checked: element, mineral, profile, law, conditions, An."""

    el: str
    mi: str
    x_all: np.ndarray
    y_all: np.ndarray
    sd_all: np.ndarray | None
    t0: float
    t_sd: float
    law: DiffusionLaw
    options: BudgetOptions
    fo2_pa: float | None
    draws: int
    needs_an: bool
    an_x: np.ndarray | None
    an_vals: np.ndarray | None
    an_beam_um: float | None
    defaults_used: dict
    warnings: list


@dataclass(frozen=True)
class _Located:
    """Stage 2, the boundary located: the points fitted, the start position and its window."""

    x: np.ndarray
    y: np.ndarray
    sd: np.ndarray | None
    segment_um: tuple | None
    plan: dict | None
    b0: float
    fixed: bool
    b_lo: float
    b_hi: float
    window: float
    spacing: float
    at_rim: bool


@dataclass(frozen=True)
class _Built:
    """Stage 3, the problem built: grid, spot, rim, law conditions, coupling to An."""

    problem: Problem
    grid: Grid
    beam_um: float | None
    beam_shape: str
    an_beam_um: float | None
    beam_from_an: float | None
    rim_kind: str
    rim_auto: bool
    orientation: Orientation | None
    coupling: str | None
    an_info: dict
    an_cells_at: Callable[[float | None], np.ndarray] | None
    partition_ab: tuple | None
    reference: dict
    nonlinear: bool
    d_ref0: float


@dataclass(frozen=True)
class _Start:
    """Stage 4, bounds and start: the parameter ranges, the start and the model at the nominal temperature."""

    log_lo: float
    log_hi: float
    weights: np.ndarray
    b0: float
    fixed: bool
    rim_kind: str
    rim_choice: dict | None
    model0: LinearModel | NonlinearModel
    start: list
    lower: np.ndarray
    upper: np.ndarray
    vary: list
    param_names: list
    lm_start: np.ndarray | list


@dataclass(frozen=True)
class _Optimum:
    """Stage 5, the optimum: best fit, its covariance, χ², the undiffused-step test, the parameter table."""

    out: BestFit
    best: np.ndarray
    pred: np.ndarray
    resid: np.ndarray
    chi2: float
    dof: int
    floor_delta_chi2: float
    upper_log10_dt: Callable[[], float | None]
    params_report: dict


@dataclass(frozen=True)
class _Dated:
    """Stage 6, dated: the FitResult from the Monte Carlo draws and what the grid and the path say of it."""

    result: FitResult
    h_new_um: float | None
    h_at_um: float
    grid_bias: float
    path_effective_c: float | None


def _check_call(distance_um, value, *, element, mineral, value_sd, an, an_distance_um, opts: FitOptions) -> _Checked:
    """Stage 1, check inputs: element, mineral, profile, temperature, budget options, law, draws, An.

    Stated defaults taken here (the temperature sd) are named in
    ``defaults_used``; an fO2 buffer is turned into fO2 at the nominal
    temperature. Raises :class:`InputError` with a plain message on bad input.
    """
    from zoneprofile.diffusion._budget import DEFAULT_TEMPERATURE_SD_C, BudgetOptions
    from zoneprofile.diffusion.laws import default_law, get_law

    temperature_c, temperature_sd_c = opts.conditions.temperature_c, opts.conditions.temperature_sd_c
    fo2_pa, budget, law, draws = opts.conditions.fo2_pa, opts.monte_carlo.budget, opts.model.law, opts.monte_carlo.draws
    an_beam_um, beam_um = opts.spot.an_beam_um, opts.spot.beam_um
    el, mi, x_all, y_all = _check_inputs(distance_um, value, element, mineral, temperature_c)
    t0 = float(temperature_c)
    defaults_used = {}
    if temperature_sd_c is None:
        temperature_sd_c = DEFAULT_TEMPERATURE_SD_C
        defaults_used["temperature_sd_c"] = (f"{DEFAULT_TEMPERATURE_SD_C:g} °C (1σ; no temperature uncertainty "
                                             "was given)")
    try:
        options = budget if isinstance(budget, BudgetOptions) else BudgetOptions(**(budget or {}))
    except TypeError as exc:
        raise InputError(f"unknown budget setting: {exc}") from None
    options = options.checked()
    if options.fo2_buffer is not None and fo2_pa is not None:
        raise InputError("give either fo2_pa or an fO2 buffer, not both")
    if options.fo2_buffer is not None:
        from zoneprofile.diffusion.laws.buffers import fo2_buffer_pa

        fo2_pa = float(fo2_buffer_pa(options.fo2_buffer, t0, delta_log=options.fo2_delta_log))
    t_sd = float(temperature_sd_c)
    if not math.isfinite(t_sd) or t_sd < 0:
        raise InputError(f"temperature uncertainty must be >= 0 °C, got {temperature_sd_c}")
    law_obj = default_law(el, mi) if law is None else get_law(law)
    if law_obj.element != el:
        raise InputError(f"law {law_obj.id} is for {law_obj.element}, not {el}; choose a law for {el}")
    draws = int(draws)
    if draws < 10:
        raise InputError(f"draws must be at least 10, got {draws}")
    warnings = []
    if law_obj.mineral != mi:
        warnings.append(f"law {law_obj.id} was calibrated on {law_obj.mineral}, not {mi}")
    sd_all = None
    if value_sd is not None:
        sd_all = np.broadcast_to(np.asarray(value_sd, float), x_all.shape).copy()
        if np.any(~np.isfinite(sd_all)) or np.any(sd_all <= 0):
            raise InputError("value_sd must be finite and > 0")
    an_x = an_vals = None
    needs_an = "x_an" in law_obj.needs or an_needed(el, mi)
    if needs_an:
        if an is None:
            raise InputError(f"{el} in {mi} needs An (mol%) along the profile: give an An column or --an-from")
        an_vals = np.asarray(an, float)
        an_x = x_all if an_distance_um is None else np.asarray(an_distance_um, float)
        if an_vals.shape != an_x.shape or an_vals.ndim != 1 or an_vals.size < 2:
            raise InputError("An values and their distances must be 1-D arrays of the same length")
        if np.any(~np.isfinite(an_vals)) or np.any((an_vals < 0) | (an_vals > 100)):
            raise InputError("An must be finite and between 0 and 100 mol%")
        if np.any(np.diff(an_x) <= 0):
            raise InputError("An distances must increase from the rim")
        if an_beam_um is None and an_distance_um is None:
            an_beam_um = beam_um
    return _Checked(el=el, mi=mi, x_all=x_all, y_all=y_all, sd_all=sd_all, t0=t0, t_sd=t_sd, law=law_obj,
                    options=options, fo2_pa=fo2_pa, draws=draws, needs_an=needs_an, an_x=an_x, an_vals=an_vals,
                    an_beam_um=an_beam_um, defaults_used=defaults_used, warnings=warnings)


def _locate_boundary(chk: _Checked, placement: Placement, *, call: dict, plan: dict | None, depth: int) -> _Located:
    """Stage 2, locate the boundary: the segment, the start position, the window free of other steps.

    Without ``boundary_um`` the largest step is taken (in An when An steps
    clearly, else in the element itself). The window
    (:mod:`~zoneprofile.diffusion._window`) keeps neighbouring steps and cut
    edges out of this boundary's diffused zone; for a plagioclase trace
    element each neighbour is fitted alone first (``call``: this fit's
    keyword arguments). ``plan``: a window already drawn (a refit on a finer
    grid keeps it).
    """
    x_all, y_all, sd_all, an_x, an_vals, needs_an = chk.x_all, chk.y_all, chk.sd_all, chk.an_x, chk.an_vals, \
        chk.needs_an
    boundary_um, boundary_window_um = placement.boundary_um, placement.boundary_window_um
    segment_um, neighbours_um = placement.segment_um, placement.neighbours_um
    if segment_um is not None:
        keep = (x_all >= segment_um[0]) & (x_all <= segment_um[1])
    else:
        keep = np.ones(x_all.size, bool)
    x, y = x_all[keep], y_all[keep]
    sd = None if sd_all is None else sd_all[keep]
    if x.size < 2 * _MIN_SIDE_POINTS:
        raise InputError(f"too few points ({x.size}) in the part of the profile given to this boundary; "
                         f"need at least {2 * _MIN_SIDE_POINTS}")

    noise = _noise_sd(y) if sd is None else float(np.median(sd))
    scale = max(float(np.max(np.abs(y))), 1e-12)
    if np.ptp(y) <= max(3.0 * noise, 1e-9 * scale):
        raise InputError("the profile is flat (its range is within the noise): nothing to fit")

    spacing = float(np.median(np.diff(x)))
    element_width = 0.0
    if boundary_um is None:
        fixed = False
        source = None
        if needs_an and an_vals is not None:
            sel = (an_x >= x[0]) & (an_x <= x[-1])
            if sel.sum() >= 2 * _MIN_SIDE_POINTS:
                cand = find_boundaries(an_x[sel], an_vals[sel])
                if cand:
                    lo_an, hi_an = _side_means(an_x[sel], an_vals[sel], cand[0])
                    if abs(hi_an - lo_an) >= max(2.0, 4 * _noise_sd(an_vals[sel])):
                        source = cand[0]
        if source is None:
            cand = find_boundaries(x, y)
            if not cand:
                raise InputError("no boundary found: the profile is too short")
            source, element_width = _element_step(x, y, cand[0])
        b0 = float(source)
    else:
        b0 = float(boundary_um)
        fixed = boundary_window_um is None
    if not x_all[0] <= b0 <= x_all[-1]:
        raise InputError(f"boundary {b0:g} µm lies outside the profile ({x_all[0]:g}–{x_all[-1]:g} µm)")
    # ---- window: no neighbouring step inside, no cut edge inside this boundary's diffused zone
    if plan is None and (segment_um is None or neighbours_um is not None):
        plan = _window.plan(x, y, b0, an_x=an_x if needs_an else None, an=an_vals if needs_an else None,
                            given=neighbours_um, noise=None if sd is None else float(np.median(sd)))
        if plan["neighbours"] and needs_an and chk.mi == "plagioclase":
            # a trace element in plagioclase keeps a step where An steps however long it diffused,
            # so a neighbour's reach cannot be read off its shape: fit each neighbour alone, quickly
            # (between the midpoints to its own neighbours), and draw this window from their fits
            if depth == 0:
                plan = _window.redraw(plan, x, b0, spreads=_neighbour_spreads(call, b0, plan),
                                      how="quick fit of the neighbour alone (its D·t and the spot)")
            else:
                plan = _window.redraw(plan, x, b0, midpoints=True)
    if plan is not None and plan.get("lo_um") is not None and plan["edges"].get("rimward") != "given segment":
        keep = (x >= plan["lo_um"]) & (x <= plan["hi_um"])
        if np.sum(keep & (x < b0)) >= _MIN_SIDE_POINTS and np.sum(keep & (x > b0)) >= _MIN_SIDE_POINTS:
            x, y = x[keep], y[keep]
            sd = None if sd is None else sd[keep]
            if math.isfinite(plan["lo_um"]) or math.isfinite(plan["hi_um"]):
                segment_um = (plan["lo_um"], plan["hi_um"])
            spacing = float(np.median(np.diff(x)))
    elif segment_um is not None:
        plan = {"neighbours": [], "lo_um": float(segment_um[0]), "hi_um": float(segment_um[1]), "noise": noise,
                "edges": {"rimward": "given segment", "coreward": "given segment"}}
    n_left, n_right = int(np.sum(x < b0)), int(np.sum(x > b0))
    if min(n_left, n_right) < _MIN_SIDE_POINTS:
        raise InputError(
            f"too few points on either side of the boundary at {b0:g} µm "
            f"({n_left} rimward, {n_right} coreward; need {_MIN_SIDE_POINTS} each)"
        )
    window = float(boundary_window_um) if boundary_window_um is not None else max(3.0 * spacing, 5.0,
                                                                                  0.5 * element_width)
    b_lo = max(b0 - window, x[_MIN_SIDE_POINTS - 1])
    b_hi = min(b0 + window, x[-_MIN_SIDE_POINTS])
    if fixed or b_hi <= b_lo:
        b_lo, b_hi = b0 - 1e-6, b0 + 1e-6
        fixed = True
    at_rim = (segment_um is None or segment_um[0] <= x_all[0]) and x[0] <= max(3.0 * spacing, 0.1 * (x[-1] - x[0]))
    return _Located(x=x, y=y, sd=sd, segment_um=segment_um, plan=plan, b0=b0, fixed=fixed, b_lo=b_lo, b_hi=b_hi,
                    window=window, spacing=spacing, at_rim=at_rim)


def _build_problem(chk: _Checked, loc: _Located, opts: FitOptions, *, an_distance_um, h_um: float | None) -> _Built:
    """Stage 3, build the problem: grid, spot (or its estimate from the An step), rim, law conditions, An coupling.

    Adds the warnings of the law's and the partition model's calibrated
    ranges and of a missing spot size to ``chk.warnings``.
    """
    from zoneprofile.diffusion._problem import Problem

    beam_um, beam_shape = opts.spot.beam_um, opts.spot.beam_shape
    geometry, radius_um, n_cells, rim = opts.model.geometry, opts.model.radius_um, opts.model.n_cells, opts.model.rim
    partition, value_name, direction = opts.model.partition, opts.model.value_name, opts.section.direction
    pressure_mpa, x_fe, path = opts.conditions.pressure_mpa, opts.conditions.x_fe, opts.conditions.path
    el, mi, law_obj, x, y = chk.el, chk.mi, chk.law, loc.x, loc.y
    an_x, an_vals, an_beam_um, t0, warnings = chk.an_x, chk.an_vals, chk.an_beam_um, chk.t0, chk.warnings
    b0, fixed, window, spacing = loc.b0, loc.fixed, loc.window, loc.spacing
    grid = _build_grid(x, loc.at_rim, geometry, radius_um, beam_um, beam_shape, n_cells, h_um)
    beam_from_an = None
    if chk.needs_an and beam_um is None and an_beam_um is None and an_distance_um is None:
        # no spot given, An measured by the same spots: An does not diffuse on these
        # timescales, so the apparent width of a sharp An step is the spot's blur
        beam_from_an = _spot_from_an_step(grid, an_x, an_vals, b0, window, spacing)
        if beam_from_an is not None:
            beam_um = an_beam_um = beam_from_an
            beam_shape = "gaussian"
            grid = _build_grid(x, loc.at_rim, geometry, radius_um, beam_um, beam_shape, n_cells, h_um)
    if rim not in ("open", "closed", "auto"):
        raise InputError(f"rim must be 'open', 'closed' or 'auto', got '{rim}'")
    rim_kind = rim if loc.at_rim else "closed"
    rim_auto = rim_kind == "auto"
    if rim_auto:
        rim_kind = "open"  # provisional; chosen by the data below

    orientation = None
    if getattr(law_obj, "family", None) == "olivine-femg":
        # the fit runs on the [001] law; the orientation (axis, EBSD angles or unknown) scales the time
        from zoneprofile.diffusion.orientation import parse_direction

        orientation = parse_direction(direction)
    law_kwargs = {"fo2_pa": chk.fo2_pa,
                  "pressure_pa": None if pressure_mpa is None else float(pressure_mpa) * 1e6,
                  "direction": None if orientation is not None else direction}
    coupling = None
    x_an_cells = None
    an_info = {}
    an_cells_at = None
    partition_ab = None
    reference = {}
    lo_side, hi_side = _side_means(x, y, b0)
    if chk.needs_an:
        an_cells_at, an_info = _frozen_an(grid, an_x, an_vals, an_beam_um, b0, window)
        tie_at = None
        if fixed and an_info.get("sharpened"):
            g0, g1 = an_info["bracket_um"]
            if g0 - 1e-9 <= b0 <= g1 + 1e-9:
                tie_at = b0  # the given boundary is this An step: put the An step exactly there
        x_an_cells = an_cells_at(tie_at)
        an_lo, an_hi = _side_means(an_x, an_vals, b0) if np.sum(an_x < b0) and np.sum(an_x > b0) else (
            float(np.mean(an_vals)),) * 2
        reference["x_an"] = 0.5 * (an_lo + an_hi) / 100.0
        if an_needed(el, mi):  # An-coupled partitioning
            from zoneprofile.diffusion.partition import partition_parameters, partition_range_warnings

            coupling = "an"
            partition_ab = tuple(float(v) for v in partition_parameters(el, model=partition))
            warnings += partition_range_warnings(el, an_vals[(an_x >= x[0]) & (an_x <= x[-1])] / 100.0, t0,
                                                 model=partition)
    nonlinear = False
    if el == "FeMg" and mi == "olivine":
        if x_fe is not None:
            law_kwargs["x_fe"] = float(x_fe)
            reference["x_fe"] = float(x_fe)
        else:
            if np.any(y > 100):
                raise InputError("Fo must lie between 0 and 100 mol%")
            reference["x_fe"] = 1.0 - 0.5 * (lo_side + hi_side) / 100.0
            nonlinear = "x_fe" in law_obj.needs
    elif "x_fe" in law_obj.needs:
        if x_fe is None:
            raise InputError(f"law {law_obj.id} needs X_Fe; give x_fe")
        law_kwargs["x_fe"] = float(x_fe)

    if coupling == "an":
        names = (f"melt_{el.lower()}_ppm_outer", f"melt_{el.lower()}_ppm_inner")
    else:
        col = value_name or ELEMENT_COLUMNS.get((el, mi), el)
        names = (f"{col.lower()}_outer", f"{col.lower()}_inner")

    problem = Problem(
        element=el, mineral=mi, law=law_obj, grid=grid, x_um=x, y=y, sigma=loc.sd, beam_um=beam_um,
        beam_shape=beam_shape, rim=rim_kind, value_names=names, coupling=coupling, x_an_cells=x_an_cells,
        partition_model=partition if coupling else None, partition_ab=partition_ab, nonlinear=nonlinear,
        law_kwargs=law_kwargs, reference=reference,
    )
    # check the law can be evaluated (missing fO2 etc. give a plain message here)
    d_ref0 = float(problem.d_ref(t0))
    comp_warn = {k: v for k, v in problem.law_composition(**reference).items() if k in ("x_an", "x_fe", "fo2_pa")}
    if x_an_cells is not None:
        comp_warn["x_an"] = an_vals[(an_x >= x[0]) & (an_x <= x[-1])] / 100.0
    warnings += law_obj.range_warnings(t0 if path is None else path.nominal_c, **comp_warn)
    if beam_from_an is not None:
        warnings.append(f"no spot size given (beam_um): a Gaussian spot of {beam_from_an:.2g} µm FWHM was "
                        "estimated from the apparent width of the An step (An does not diffuse); give the "
                        "beam or spot diameter if it is known")
    elif beam_um is None:
        warnings.append("no spot size given (beam_um): the model was compared with the data point by point; "
                        "give the beam or spot diameter so the resolution is accounted for")
    return _Built(problem=problem, grid=grid, beam_um=beam_um, beam_shape=beam_shape, an_beam_um=an_beam_um,
                  beam_from_an=beam_from_an, rim_kind=rim_kind, rim_auto=rim_auto, orientation=orientation,
                  coupling=coupling, an_info=an_info, an_cells_at=an_cells_at, partition_ab=partition_ab,
                  reference=reference, nonlinear=nonlinear, d_ref0=d_ref0)


def _bounds_and_start(chk: _Checked, loc: _Located, built: _Built) -> _Start:
    """Stage 4, bounds and start: range of log10 D·t, the An tie, the rim, the coarse start, the value bounds.

    A boundary of an An-coupled element near a sharp An step is tied to it
    (its place chosen inside the gap between the bracketing An points, and
    then held); with ``rim='auto'`` the data choose an open or closed rim
    (:func:`_choose_rim`). The start is a coarse grid search
    (:func:`~zoneprofile.diffusion._optimise._coarse_start`), refined by
    variable projection where the model is linear in its values.
    """
    problem, grid, warnings = built.problem, built.grid, chk.warnings
    x, y, sd, el, mi, t0 = loc.x, loc.y, loc.sd, chk.el, chk.mi, chk.t0
    b0, b_lo, b_hi, fixed = loc.b0, loc.b_lo, loc.b_hi, loc.fixed
    an_info, coupling, nonlinear, rim_kind = built.an_info, built.coupling, built.nonlinear, built.rim_kind
    h_min = float(np.min(grid.widths_um))
    length = float(x[-1] - x[0])
    log_lo = math.log10((0.05 * h_min) ** 2) - 12.0
    log_hi = math.log10((2.0 * length) ** 2) - 12.0
    weights = np.ones_like(y) if sd is None else 1.0 / sd
    if (coupling == "an" and an_info.get("sharpened") and not fixed
            and an_info["gap_um"][0] <= b_hi and an_info["gap_um"][1] >= b_lo):
        # the melt changed when An changed: tie the element step to the An step and
        # choose its place inside the gap between the An points that bracket it
        b0, x_an_cells, position_candidates = _tie_to_an_step(
            problem, built.an_cells_at, an_info["gap_um"], t0, y, weights, (log_lo, log_hi), sd is not None,
            an_position=(an_info["position_um"], an_info.get("position_se_um") or math.inf))
        problem.x_an_cells = x_an_cells
        b_lo, b_hi, fixed = b0 - 1e-6, b0 + 1e-6, True
        an_info["tied_position_um"] = b0
        an_info["position_candidates"] = position_candidates
    rim_choice = model0 = None
    if built.rim_auto and not nonlinear:
        rim_kind, rim_choice, model0 = _choose_rim(problem, t0, y, weights, (log_lo, log_hi), (b_lo, b_hi), b0, fixed,
                                                   sd is not None)
        problem.rim = rim_kind
        if abs(rim_choice["log10_dt_shift"]) > 0.05:
            other = "closed" if rim_kind == "open" else "open"
            gain = rim_choice["closed_minus_open_delta_chi2"]
            warnings.append(
                f"the rim was taken as {rim_kind} (Δχ² of a closed rim {gain:+.2g}); a {other} rim would "
                f"change log10 D·t by {rim_choice['log10_dt_shift']:+.2f}: give --rim if you know it")
    if model0 is None:
        model0 = problem.model(t0)
    if nonlinear:
        # start from the linear model with D at the reference composition
        from zoneprofile.diffusion._problem import Problem

        lin = Problem(**{**problem.__dict__, "nonlinear": False, "_B": problem.data_matrix})
        start = _coarse_start(lin.model(t0), y, weights, (log_lo, log_hi), (b_lo, b_hi), b0, fixed)
    else:
        start = _coarse_start(model0, y, weights, (log_lo, log_hi), (b_lo, b_hi), b0, fixed)
    # values: generous bounds around the data, never negative (concentrations, Fo)
    vscale = max(float(np.ptp(y)), 1e-12)
    if coupling is None:
        v_lower = [max(0.0, float(y.min()) - 2.0 * vscale)] * 2
        v_upper = [float(y.max()) + 2.0 * vscale] * 2
        if el == "FeMg" and mi == "olivine":
            v_upper = [min(v, 100.0) for v in v_upper]
    else:
        v_lower = [0.0, 0.0]
        v_upper = [10.0 * max(abs(float(s)), 1e-12) + 10.0 * vscale for s in start[2:]]
    lower = np.array([log_lo, b_lo] + v_lower)
    upper = np.array([log_hi, b_hi] + v_upper)
    param_names = ["log10_dt_m2", "boundary_um", *problem.value_names]
    vary = [True, not fixed, True, True]
    lm_start = start
    if hasattr(model0, "basis_predictions"):
        # variable projection finds the optimum cheaply; least squares then confirms it from
        # there (a step or two) and gives the covariance of all parameters
        refined = _refit_projected(model0, y, weights, np.array(start, float), lower, upper, vary)
        if np.all(refined >= lower) and np.all(refined <= upper):
            lm_start = refined
    return _Start(log_lo=log_lo, log_hi=log_hi, weights=weights, b0=b0, fixed=fixed, rim_kind=rim_kind,
                  rim_choice=rim_choice, model0=model0, start=start, lower=lower, upper=upper, vary=vary,
                  param_names=param_names, lm_start=lm_start)


def _optimise_fit(chk: _Checked, loc: _Located, st: _Start) -> _Optimum:
    """Stage 5, optimise: the last least-squares step and its covariance, χ², the undiffused-step test, the table.

    The Δχ² of the fit with D·t at its lower bound (values refitted) says
    whether the data can tell the profile from an undiffused step seen through
    the spot; parameters that end at a bound get a warning.
    """
    y, weights, model0, log_lo, log_hi = loc.y, st.weights, st.model0, st.log_lo, st.log_hi
    out = _confirm_fit(model0, y, weights, st.param_names, st.lm_start, st.lower, st.upper, st.vary)
    best = out.theta.copy()
    pred = model0.predict(best)
    resid = (pred - y)
    chi2 = float(np.sum((resid * weights) ** 2))
    dof = max(y.size - sum(st.vary), 1)

    # can the data tell this profile from an undiffused step seen through the spot?
    # Δχ² of the fit with D·t at its lower bound (values refitted), in units of the
    # residual variance when no precision was given
    if hasattr(model0, "basis_predictions"):
        basis = model0.basis_predictions(log_lo, best[1]) * weights[None, :]
        v_floor, *_ = np.linalg.lstsq(basis.T, y * weights, rcond=None)
        r_floor = basis.T @ v_floor - y * weights
    else:
        r_floor = (model0.predict([log_lo, best[1], *best[2:]]) - y) * weights
    s2 = 1.0 if loc.sd is not None else max(chi2 / dof, 1e-300)
    floor_delta_chi2 = float((r_floor @ r_floor - chi2) / s2)

    def upper_log10_dt():  # only needed (and computed) when the boundary is not resolved
        return _profile_upper_log10_dt(model0, y, weights, best, chi2, s2, log_hi)

    params_report = {}
    bounds_hit = []
    for n, value_n, err_n, s0, lo_b, hi_b, var in zip(st.param_names, best, out.stderr, st.start, st.lower,
                                                       st.upper, st.vary):
        span = hi_b - lo_b
        at = None
        if var and value_n <= lo_b + 1e-4 * span:
            at = "lower"
        elif var and value_n >= hi_b - 1e-4 * span:
            at = "upper"
        if at:
            bounds_hit.append(n)
        params_report[n] = {
            "value": float(value_n), "stderr": None if err_n is None else float(err_n),
            "start": float(s0), "min": float(lo_b), "max": float(hi_b), "vary": bool(var), "at_bound": at,
        }
    for n in bounds_hit:
        side = params_report[n]["at_bound"]
        chk.warnings.append(f"parameter {n} stopped at its {side} bound ({params_report[n]['value']:.4g}); "
                            "the value and its uncertainty are not reliable")
    return _Optimum(out=out, best=best, pred=pred, resid=resid, chi2=chi2, dof=dof,
                    floor_delta_chi2=floor_delta_chi2, upper_log10_dt=upper_log10_dt, params_report=params_report)


def _propagate_uncertainty(chk: _Checked, loc: _Located, built: _Built, st: _Start, opt: _Optimum,
                           opts: FitOptions) -> _Dated:
    """Stage 6, uncertainty: the fit's state handed to :func:`~zoneprofile.diffusion.uncertainty.propagate`.

    Also gives the finer cell width the grid should have (None when the
    cell-averaging error of D·t is already small beside its statistical sd,
    :func:`_grid_bias`) and, on a T–t path, the path's effective temperature.
    """
    from zoneprofile.diffusion.resolution import beam_variance_um2

    path, section, mc = opts.conditions.path, opts.section, opts.monte_carlo
    problem, grid, best = built.problem, built.grid, opt.best
    sig2 = beam_variance_um2(built.beam_um, built.beam_shape)
    resolution_var_um2 = sig2 + loc.spacing**2 / 12.0
    an_vals = chk.an_vals
    state = FitState(
        problem=problem, model=st.model0, best=best, lower=st.lower, upper=st.upper,
        vary=tuple(bool(v) for v in st.vary), param_names=tuple(st.param_names), best_fit=opt.out,
        weights=st.weights, residuals=opt.resid, pred=opt.pred, log_bounds=(st.log_lo, st.log_hi),
        floor_delta_chi2=opt.floor_delta_chi2, profile_upper_log10_dt=opt.upper_log10_dt,
        position_candidates=tuple(built.an_info.get("position_candidates") or ()),
        resolution_var_um2=resolution_var_um2,
        an_values=None if problem.x_an_cells is None or an_vals is None else an_vals,
        temperature_c=chk.t0, temperature_sd_c=chk.t_sd, path=path, obliquity_deg=section.obliquity_deg,
        obliquity_sd_deg=float(section.obliquity_sd_deg or 0.0), dip_deg=section.dip_deg, draws=chk.draws,
        seed=mc.seed, noise_refits=int(mc.noise_refits), budget_options=chk.options,
        defaults_used=chk.defaults_used,
    )
    warnings = chk.warnings
    if loc.sd is None:
        warnings.append(
            f"no precision given (value_sd, or a '_sd' column): the noise was estimated from the fit's residuals "
            f"(sd ≈ {math.sqrt(opt.chi2 / opt.dof):.3g}); the reduced χ² is then in data units squared, not a test of fit")
    plan = loc.plan
    if opts.placement.boundary_um is None and plan is not None and plan["neighbours"]:
        others = ", ".join(f"{n['position_um']:.1f}" for n in plan["neighbours"])
        warnings.append(f"only the largest step was dated; other steps at {others} µm were left undated (give "
                        "--boundary-um with every position to date each)")
    result = propagate(state)
    result.warnings = warnings + result.warnings
    td = result.time_days
    path_effective = None
    if path is not None:
        from zoneprofile.diffusion._pathfit import effective_temperature_c

        comp_ref = problem.law_composition(**problem.reference)
        path_effective = effective_temperature_c(
            path, lambda temps: chk.law.d_m2_s(np.maximum(temps, 1.0), **comp_ref), td.get("best"))
    td.setdefault("lower_bound", None)
    td.setdefault("statement", "date" if result.resolved else
                  ("upper_bound" if td.get("upper_bound") is not None else "none"))
    # grid: refine once when the cell-averaging error of D·t is not small beside its statistical sd
    h_at = float(np.interp(best[1], grid.centres_um, grid.widths_um))
    dt_um2 = 10.0 ** (best[0] + 12.0)
    ld = result.log10_dt_m2
    stat_rel = math.log(10.0) * max((ld["p97_5"] - ld["p2_5"]) / 3.92, 1e-6)
    grid_bias = _grid_bias(h_at, dt_um2)
    h_new = None
    if grid_bias > GRID_ERROR_FRACTION * stat_rel:
        h_new = math.sqrt(GRID_ERROR_FRACTION * stat_rel * 12.0 * 2.0 * dt_um2)
        if not h_new < 0.9 * h_at:
            h_new = None
    return _Dated(result=result, h_new_um=h_new, h_at_um=h_at, grid_bias=grid_bias, path_effective_c=path_effective)


def _to_result(dated: _Dated, chk: _Checked, loc: _Located, built: _Built, st: _Start, opt: _Optimum,
               opts: FitOptions, *, depth: int):
    """Stage 7, to result: orientation, the window's verdict, the fitted quantities and the model set-up.

    Fills the :class:`~zoneprofile.diffusion.uncertainty.FitResult` that
    :func:`_propagate_uncertainty` returned; at the top level adds the pitfall
    warnings (:mod:`~zoneprofile.diffusion._checks`).
    """
    from zoneprofile.diffusion.resolution import beam_sigma_um

    result = dated.result
    geometry, radius_um, partition = opts.model.geometry, opts.model.radius_um, opts.model.partition
    pressure_mpa, path, direction = opts.conditions.pressure_mpa, opts.conditions.path, opts.section.direction
    problem, grid, law_obj, best, x = built.problem, built.grid, chk.law, opt.best, loc.x
    beam_um, beam_shape, partition_ab, coupling = built.beam_um, built.beam_shape, built.partition_ab, built.coupling
    orientation = built.orientation
    orientation_entry = None
    if orientation is not None:
        from zoneprofile.diffusion import orientation as _orientation
        from zoneprofile.diffusion.laws.olivine import ANISOTROPY_001_OVER_100

        _orientation.apply(result, orientation, ANISOTROPY_001_OVER_100)
        orientation_entry = orientation.to_dict(ANISOTROPY_001_OVER_100)
        if not orientation.known:
            result.warnings.append(_orientation.UNKNOWN_WARNING)
    window_entry = None
    plan = loc.plan
    if plan is not None and depth == 0:
        spread = _window.fitted_spread_um(best[0], beam_sigma_um(beam_um, beam_shape))
        cells_best, cells_0 = st.model0.cells(best)
        inside = (grid.centres_um >= x[0]) & (grid.centres_um <= x[-1])
        step_size = float(np.ptp(cells_0[inside])) if np.any(inside) else float(np.ptp(loc.y))
        alone, reasons = _window.verdict(float(best[1]), spread, plan, x, step_size=step_size,
                                         model_lo_um=float(grid.faces_um[0]), model_hi_um=float(grid.faces_um[-1]),
                                         rim_modelled=bool(loc.at_rim))
        window_entry = _window.describe(plan, float(best[1]), spread, alone, reasons)
        if not alone:
            _window.defer(result, reasons)
    result.parameters = opt.params_report
    result.chi2 = opt.chi2
    result.reduced_chi2 = opt.chi2 / opt.dof
    result.n_points = int(loc.y.size)
    result.boundary_fixed = bool(st.fixed)
    result.an_profile = built.an_info
    result.d_ref_m2_s = built.d_ref0
    if depth == 1:
        # for the boundary that asked for this quick fit: how far this step's diffusion reaches
        cells_best, cells_0 = st.model0.cells(best)
        result.reach = (np.asarray(grid.centres_um, float).copy(), np.asarray(cells_best - cells_0, float))
    from zoneprofile.diffusion.resolution import beam_variance_um2

    resolution_var_um2 = beam_variance_um2(beam_um, beam_shape) + loc.spacing**2 / 12.0
    reference = built.reference
    result.setup = {
        "mineral": chk.mi, "law_citation": law_obj.citation, "law_status": law_obj.status,
        "initial_condition": "melt-equilibrium" if coupling == "an" else "step",
        "partition_model": partition if coupling else None,
        "partition_a_j_mol": None if partition_ab is None else partition_ab[0],
        "partition_b_j_mol": None if partition_ab is None else partition_ab[1],
        "reference_composition": reference, "rim": st.rim_kind, "rim_selection": st.rim_choice,
        "geometry": geometry,
        "radius_um": radius_um, "beam_um": beam_um, "beam_shape": beam_shape,
        "beam_sigma_um": beam_sigma_um(beam_um, beam_shape), "an_beam_um": built.an_beam_um,
        "beam_um_estimated_from_an": built.beam_from_an,
        "resolution_sd_um": math.sqrt(resolution_var_um2), "grid_cells": grid.n,
        "grid_cell_um": dated.h_at_um, "grid_error_relative": dated.grid_bias,
        "grid_rule": (f"cells refined until the cell-averaging error of D·t (h²/(12·2·D·t)) is at most "
                      f"{GRID_ERROR_FRACTION:g} of its statistical sd (up to {MAX_REFINED_CELLS} cells)"),
        "solver": ("implicit Crank-Nicolson with Picard iteration" if built.nonlinear
                   else "spectral (eigendecomposition)"),
        "fo2_pa": chk.fo2_pa, "pressure_mpa": pressure_mpa,
        "direction": orientation_entry if orientation is not None else direction,
        "path": None if path is None else path.to_dict(),
        "path_effective_c": dated.path_effective_c,
        "segment_um": [float(x[0]), float(x[-1])],
        "undiffused_step_delta_chi2": opt.floor_delta_chi2,
        "window": window_entry,
    }
    if depth == 0:  # pitfalls in plain words, each with its fix (diffusion/_checks.py)
        from zoneprofile.diffusion._checks import add_pitfall_warnings

        add_pitfall_warnings(result, law=law_obj, pressure_mpa=pressure_mpa,
                             temperature_c=chk.t0 if path is None else path.nominal_c,
                             composition=problem.law_composition(**reference))
    return result


def _fit_boundary(
    distance_um: ArrayLike,
    value: ArrayLike,
    *,
    element: str,
    mineral: str,
    temperature_c: float,
    temperature_sd_c: float | None = None,
    an: ArrayLike | None = None,
    an_distance_um: ArrayLike | None = None,
    an_beam_um: float | None = None,
    boundary_um: float | None = None,
    boundary_window_um: float | None = None,
    segment_um: tuple[float, float] | None = None,
    beam_um: float | None = None,
    beam_shape: str = "gaussian",
    law: str | DiffusionLaw | None = None,
    partition: str = "bindeman1998",
    draws: int = 1000,
    seed: int = 0,
    obliquity_deg: float | None = None,
    obliquity_sd_deg: float = 0.0,
    dip_deg: float | None = None,
    value_sd: float | ArrayLike | None = None,
    fo2_pa: float | None = None,
    pressure_mpa: float | None = None,
    x_fe: float | None = None,
    direction: str | Sequence[float] | None = None,
    rim: str = "open",
    geometry: str = "planar",
    radius_um: float | None = None,
    path: LinearCooling | TablePath | None = None,
    noise_refits: int = 40,
    n_cells: int = 400,
    value_name: str | None = None,
    neighbours_um: Sequence[float] | None = None,
    budget: BudgetOptions | Mapping[str, Any] | None = None,
    _plan: dict | None = None,
    _depth: int = 0,
    _shape_c: float | None = None,
    _h_um: float | None = None,
) -> FitResult:
    """Fit a diffusion model to one boundary of a profile and date it.

    Parameters
    ----------
    distance_um, value : array_like
        The profile (µm from the rim, increasing; ppm for trace elements, Fo
        mol% for olivine, Mg# for clinopyroxene).
    element : {'Mg', 'Sr', 'Ba', 'FeMg', 'Ti'}
    mineral : {'plagioclase', 'alkali-feldspar', 'olivine', 'clinopyroxene', 'quartz'}
    temperature_c, temperature_sd_c : float
        Storage temperature (°C) and its 1-sigma uncertainty (None: the stated
        default :data:`~zoneprofile.diffusion._budget.DEFAULT_TEMPERATURE_SD_C`,
        with a warning).
    an, an_distance_um : array_like, optional
        An (mol%) and its positions (default ``distance_um``); needed for
        plagioclase laws that depend on X_An and for the An-coupled model.
    an_beam_um : float, optional
        Spot diameter of the An analyses (default ``beam_um`` when the An comes
        from the same points).
    boundary_um : float, optional
        Boundary position. Given: held fixed (unless ``boundary_window_um``);
        not given: the largest step, fitted within a window.
    boundary_window_um : float, optional
        Half-width of the window the position is fitted in.
    segment_um : (float, float), optional
        Only points inside this range take part (several boundaries).
    beam_um, beam_shape : float, {'gaussian', 'square'}
        Spot diameter: Gaussian FWHM (electron beam) or square full width
        (LA-ICP-MS).
    law : str or DiffusionLaw, optional
        Law id (default :func:`default_law`).
    partition : str
        Partition model for the An-coupled model (plagioclase trace elements).
    draws, seed : int
        Monte Carlo draws and the random seed.
    obliquity_deg, obliquity_sd_deg : float, optional
        Angle ψ between the traverse and the boundary trace's normal in the
        section, and its 1-sigma.
    dip_deg : float, optional
        Angle φ between the boundary plane's normal and the section normal
        (90° when not given: boundary perpendicular to the section).
    value_sd : float or array_like, optional
        1-sigma precision of the values (weights the fit).
    fo2_pa, pressure_mpa, x_fe, direction : optional
        Conditions for laws that use them.
    rim : {'open', 'closed'}
        Rim held at equilibrium with the outer melt (open) or zero flux.
    geometry, radius_um : {'planar', 'cylinder', 'sphere'}, float
    path : LinearCooling or TablePath, optional
        Temperature–time path; the time is then the duration along the path.
    noise_refits : int
        Refits of residual-resampled data for the analytical-noise part (the
        first round; rounds double until the percentiles are stable).
    neighbours_um : list of float, optional
        Positions of the other steps of the traverse (the zoning analysis, other
        boundaries); more are searched for (:mod:`~zoneprofile.diffusion._window`).
        The window ends outside each neighbour's diffused zone, and a boundary
        whose zone overlaps a neighbour's is not dated alone (``statement:
        "none"``, deferred to the whole-crystal model).
    budget : BudgetOptions or dict, optional
        The other sources of uncertainty (beam size sd, growth width, section
        obliquity default, fO2 buffer, partition sd, shared seeds); see
        :mod:`zoneprofile.diffusion._budget`. None: the stated defaults.

    The options other than the data (``element``, ``mineral``, ``an``,
    ``an_distance_um``, ``value_sd``) are grouped once, by
    :meth:`~zoneprofile.diffusion.options.FitOptions.from_keywords`, into
    conditions, spot, section, placement, model and Monte Carlo
    (:mod:`zoneprofile.diffusion.options`); the stages of the fit read the
    groups: check inputs, locate boundary, build problem, bounds and start,
    optimise, uncertainty, to result.

    Returns
    -------
    FitResult
    """
    call = {k: v for k, v in locals().items() if not k.startswith("_")}
    if path is not None and _shape_c is None:
        # on a T–t path: the shape at the path's effective temperature, the time along the path
        from zoneprofile.diffusion._pathfit import fit_on_path

        return fit_on_path(_fit_boundary, call, path)
    opts = FitOptions.from_keywords(**{k: v for k, v in call.items() if k not in _DATA_KEYWORDS})
    chk = _check_call(distance_um, value, element=element, mineral=mineral, value_sd=value_sd, an=an,
                      an_distance_um=an_distance_um, opts=opts)
    loc = _locate_boundary(chk, opts.placement, call=call, plan=_plan, depth=_depth)
    built = _build_problem(chk, loc, opts, an_distance_um=an_distance_um, h_um=_h_um)
    st = _bounds_and_start(chk, loc, built)
    opt = _optimise_fit(chk, loc, st)
    dated = _propagate_uncertainty(chk, loc, built, st, opt, opts)
    if dated.h_new_um is not None and _h_um is None and _depth == 0:
        # the same window and neighbours (they do not depend on the grid), finer cells
        return _fit_boundary(**call, _plan=loc.plan, _shape_c=_shape_c, _h_um=dated.h_new_um)
    return _to_result(dated, chk, loc, built, st, opt, opts, depth=_depth)


fit_boundary = _single_threaded(_fit_boundary)
fit_boundary.__name__ = fit_boundary.__qualname__ = "fit_boundary"
