r"""Uncertainty of a diffusion time: Monte Carlo over everything that is uncertain.

Each draw ``k`` combines

- **temperature**: ``T_k ~ N(T, σ_T)``; time is ``t_k = τ_k / D_ref(T_k)``.
  Where the profile shape itself depends on T (the A/RT term of the
  An-coupled model, or a law that is not temperature-separable), the fit is
  repeated at T ± 1.25σ and ± 2.5σ and ``log10 τ(T)`` is interpolated by a
  quadratic, so that dependence is measured, not assumed away;
- **law parameters**: offsets ``N(0, sd)`` for every parameter with a
  ``parameter_sd`` (the law rotates the Arrhenius line about its pivot for an
  activation-energy offset);
- **analytical noise**: ``noise_refits`` refits of the best model plus
  resampled residuals (residual bootstrap, residuals inflated by
  √(n/(n−p))); each draw takes one refit's ``log10 τ`` offset, smoothed by a
  small Gaussian kernel. For the implicit (non-linear) solver the
  least-squares covariance of the best fit is used instead (Laplace approximation) to keep it fast;
- **obliquity** (when given): ``t_true = t_apparent · (sin φ · cos ψ)²``
  (REFERENCES §7), ψ ~ N(ψ, σ_ψ), φ = 90° unless given.

The draws are kept (``time_draws_days``) so that intervals between boundaries
can be propagated draw by draw.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from zoneprofile._units import format_days, format_days_range
from zoneprofile.diffusion._optimise import _least_squares, _projected_fit, _refit_projected
from zoneprofile.diffusion._state import FitState
from zoneprofile._api import FitVocabulary  # summary / to_dict / to_frame / _repr_html_

__all__ = ["FitResult", "propagate", "PERCENTILES"]

from zoneprofile._units import SECONDS_PER_DAY  # noqa: E402
PERCENTILES = {"p2_5": 2.5, "p16": 16.0, "median": 50.0, "p84": 84.0, "p97_5": 97.5}
_NODES = np.array([-2.5, -1.25, 1.25, 2.5])
#: χ² quantile (1 dof, 95 %) an undiffused step must be worse by for a boundary to count as resolved
_UNDIFFUSED_DCHI2 = 3.84


@dataclass
class FitResult(FitVocabulary):
    """One dated boundary. ``to_dict()`` is one entry of FIT.json ``fits[]``."""

    position_um: float
    element: str
    law: str
    temperature_c: float
    temperature_sd_c: float
    log10_dt_m2: dict
    time_days: dict
    resolved: bool
    warnings: list
    time_draws_days: np.ndarray
    log10_dt_draws: np.ndarray
    distance_um: np.ndarray
    model: np.ndarray
    initial: np.ndarray
    band_low: np.ndarray
    band_high: np.ndarray
    data_distance_um: np.ndarray
    data_value: np.ndarray
    data_model: np.ndarray
    residuals: np.ndarray
    uncertainty_budget: dict
    obliquity: dict | None = None
    data_sd: np.ndarray | None = None  # the 1-sigma precision the fit weighted by (None: from the residuals)
    temperature_nodes: dict | None = None
    parameters: dict = field(default_factory=dict)
    chi2: float = float("nan")
    reduced_chi2: float = float("nan")
    n_points: int = 0
    boundary_fixed: bool = False
    an_profile: dict = field(default_factory=dict)
    d_ref_m2_s: float = float("nan")
    setup: dict = field(default_factory=dict)
    draws: int = 0
    noise_method: str = ""
    budget_info: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {
            "position_um": self.position_um,
            "element": self.element,
            "mineral": self.setup.get("mineral"),
            "law": self.law,
            "law_citation": self.setup.get("law_citation"),
            "law_status": self.setup.get("law_status"),
            "temperature_c": self.temperature_c,
            "temperature_sd_c": self.temperature_sd_c,
            "log10_dt_m2": self.log10_dt_m2,
            "time_days": self.time_days,
            "resolved": self.resolved,
            "warnings": list(self.warnings),
            "d_ref_m2_s": self.d_ref_m2_s,
            "parameters": self.parameters,
            "chi2": self.chi2,
            "reduced_chi2": self.reduced_chi2,
            "n_points": self.n_points,
            "boundary_fixed": self.boundary_fixed,
            "uncertainty_budget_log10_time_sd": self.uncertainty_budget,
            "uncertainty_budget_settings": self.budget_info,
            "obliquity": self.obliquity,
            "temperature_nodes": self.temperature_nodes,
            "an_profile": self.an_profile,
            "draws": self.draws,
            "noise_method": self.noise_method,
            "model_setup": self.setup,
            "curve": {
                "distance_um": self.distance_um, "model": self.model, "initial": self.initial,
                "band_low": self.band_low, "band_high": self.band_high,
            },
            "points": {"distance_um": self.data_distance_um, "value": self.data_value,
                       "model": self.data_model, "residual": self.residuals,
                       **({} if self.data_sd is None else {"sd": self.data_sd})},
        }

    def report(self) -> str:
        """A readable summary: what was fitted, the time with its interval, and the caveats."""
        t = self.time_days
        lines = [
            f"Boundary at {self.position_um:.2f} µm: {self.element} in {self.setup.get('mineral')}, "
            f"law {self.law} ({self.setup.get('law_status')})",
            f"  temperature {self.temperature_c:g} ± {self.temperature_sd_c:g} °C; "
            f"D_ref = {self.d_ref_m2_s:.3e} m²/s at {self.setup.get('reference_composition')}",
            f"  log10 D·t = {self.log10_dt_m2['best']:.3f} "
            f"(95%: {self.log10_dt_m2['p2_5']:.3f} – {self.log10_dt_m2['p97_5']:.3f}) [m²]",
        ]
        if self.resolved:
            lines.append(
                f"  time = {_fmt_days(t['best'])} (median {_fmt_days(t['median'])}; "
                f"68%: {format_days_range(t['p16'], t['p84'])}; "
                f"95%: {format_days_range(t['p2_5'], t['p97_5'])})"
            )
        elif (self.setup.get("window") or {}).get("dated_alone") is False:
            lines.append("  NOT DATED ALONE: a neighbouring step is too close (see the warning); deferred to the "
                         "whole-crystal model")
        elif t.get("upper_bound") is None:
            lines.append("  NOT RESOLVED: the data do not bound the time (no time for this element)")
        else:
            lines.append(f"  NOT RESOLVED: time < {_fmt_days(t.get('upper_bound'))} (upper bound only)")
        lines.append(f"  chi² = {self.chi2:.4g}, reduced chi² = {self.reduced_chi2:.3g}, {self.n_points} points")
        lines.append("  parameters (value ± 1σ, start, bounds):")
        for name, p in self.parameters.items():
            err = "fixed" if not p["vary"] else ("± n/a" if p["stderr"] is None else f"± {p['stderr']:.3g}")
            flag = f"  <-- at {p['at_bound']} bound" if p["at_bound"] else ""
            lines.append(f"    {name:28s} {p['value']:.5g} {err} (start {p['start']:.4g}; "
                         f"[{p['min']:.4g}, {p['max']:.4g}]){flag}")
        budget = ", ".join(f"{k} {v:.3f}" for k, v in self.uncertainty_budget.items() if v is not None)
        lines.append(f"  sd of log10 time by source: {budget}")
        if self.time_days.get("statement") != "date":
            # the draws pile at the shortest time the model resolves, so their spread (total, clipped there)
            # and each source's spread alone (not clipped) do not add up and do not describe the bound
            lines.append("    (not a date: these spreads describe the draws, not the bound; read the bound above)")
        for w in self.warnings:
            lines.append(f"  warning: {w}")
        lines.append("  Diffusion timescales inform, and do not replace, hazard assessment, which belongs "
                     "to the responsible observatory and local authorities.")
        return "\n".join(lines)


def _fmt_days(d):
    return format_days(d)


def _percentiles(values):
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return {k: None for k in PERCENTILES}
    return {k: float(np.percentile(v, q)) for k, q in PERCENTILES.items()}


def _noise_offsets(state: FitState, rng: np.random.Generator) -> tuple[np.ndarray, str]:
    """log10 τ of refits to resampled data (or covariance draws); also the refit parameter sets."""

    problem, model, best = state.problem, state.model, state.best
    lower, upper, vary = state.lower, state.upper, np.array(state.vary)
    weights, pred, resid = state.weights, state.pred, state.residuals
    n_refits = state.noise_refits
    n, p = resid.size, int(vary.sum())
    at_floor = best[0] <= state.log_bounds[0] + 0.1
    if problem.nonlinear and not at_floor:
        out = state.best_fit
        names = state.param_names
        var_names = [nm for nm, v in zip(names, vary) if v]
        covar = out.covar
        if covar is not None and np.all(np.isfinite(covar)) and out.var_names == var_names:
            draws = rng.multivariate_normal(best[vary], covar, size=max(n_refits, 2000))
            thetas = np.tile(best, (draws.shape[0], 1))
            thetas[:, vary] = draws
            thetas = np.clip(thetas, lower, upper)
            return thetas, "least-squares covariance (Laplace approximation)"
    if problem.nonlinear:
        # no usable covariance (e.g. at the lower bound of D·t): a few real refits
        n_refits = min(n_refits, 12)
    if n_refits <= 0:
        return best[None, :], "none"
    scaled = resid * weights * math.sqrt(n / max(n - p, 1))
    scaled = scaled - scaled.mean()
    thetas = []
    lo_fit = np.where(vary, lower, best - 1e-9)
    hi_fit = np.where(vary, upper, best + 1e-9)
    linear = hasattr(model, "basis_predictions")
    if linear:
        # all refits of a round at once (variable projection, vectorised over the resampled
        # sets); rounds double the refits until the percentiles are stable (_refits_stable)
        def round_of(count):
            y_stars = np.array([pred + rng.choice(scaled, size=n, replace=True) / weights for _ in range(count)])
            return _projected_fit(model, y_stars, weights, best, lower, upper, vary)[0]

        thetas = round_of(n_refits)
        # a first round of 40 or more counts as the doubling of its own first half (fewer than 20
        # refits say too little of a 2.5th percentile to call it stable)
        stable = n_refits >= 40 and _refits_stable(thetas[: n_refits // 2, 0], thetas[:, 0])
        while not stable and thetas.shape[0] < MAX_NOISE_REFITS:
            more = np.vstack([thetas, round_of(min(thetas.shape[0], MAX_NOISE_REFITS - thetas.shape[0]))])
            stable = _refits_stable(thetas[:, 0], more[:, 0])
            thetas = more
        return thetas, f"residual bootstrap, {thetas.shape[0]} refits (grown until stable)"
    y_stars = [pred + rng.choice(scaled, size=n, replace=True) / weights for _ in range(n_refits)]
    for y_star in y_stars:
        theta, _ = _least_squares(model, y_star, weights, best, lo_fit, hi_fit, max_nfev=200)
        thetas.append(theta)
    return np.array(thetas), f"residual bootstrap, {n_refits} refits"


_DEFAULT_LABELS = {
    "temperature_sd_c": "the temperature uncertainty", "beam_sd_um": "the uncertainty of the spot size",
    "growth_width_sd_um": "the width of the boundary when it grew",
    "section_obliquity": "the section obliquity", "partition_a_sd_j_mol": "the uncertainty of partition A",
}

#: percentiles of log10 D·t (noise refits) that must be stable, and by how much (log10 units)
STABLE_PERCENTILES = (2.5, 50.0, 97.5)
STABLE_TOLERANCE_LOG10 = 0.02
MAX_NOISE_REFITS = 1280


def _refits_stable(before, after) -> bool:
    """Rule: doubling the refits moved none of the 2.5/50/97.5 percentiles by more than 0.02 log10."""
    a = np.percentile(before, STABLE_PERCENTILES)
    b = np.percentile(after, STABLE_PERCENTILES)
    return bool(np.max(np.abs(a - b)) <= STABLE_TOLERANCE_LOG10)


def _data_seed(state: FitState) -> int:
    """Seed of the noise refits: a hash of the fitted points, their weights and the best fit."""
    import hashlib

    h = hashlib.sha256()
    for a in (state.problem.x_um, state.problem.y, state.weights, state.best):
        h.update(np.ascontiguousarray(np.asarray(a, float)).tobytes())
    return int.from_bytes(h.digest()[:8], "big")


def _mixture_quantile(q, sd, shifts, weights):
    """q-quantile of Σ wᵢ·N(sᵢ, sd) (deterministic: no draws)."""
    from scipy.optimize import brentq
    from scipy.special import ndtr

    shifts = np.asarray(shifts, float)
    w = np.asarray(weights, float) / np.sum(weights)
    if sd <= 0:
        order = np.argsort(shifts)
        c = np.cumsum(w[order])
        return float(shifts[order][np.searchsorted(c, q)])

    def f(x):
        return float(np.sum(w * ndtr((x - shifts) / sd))) - q

    lo, hi = float(shifts.min()) - 10 * sd, float(shifts.max()) + 10 * sd
    return float(brentq(f, lo, hi, xtol=1e-6))


def _temperature_shape(state: FitState):
    """log10 τ(T) − log10 τ(T0) as a function of δT (None when the shape does not depend on T)."""

    problem = state.problem
    t0, sd = state.temperature_c, state.temperature_sd_c
    if sd <= 0 or state.path is not None or not problem.shape_depends_on_temperature():
        return None, None
    best, lower, upper, vary = state.best, state.lower, state.upper, np.array(state.vary)
    lo_fit = np.where(vary, lower, best - 1e-9)
    hi_fit = np.where(vary, upper, best + 1e-9)
    offsets = _NODES * sd
    logs = np.full(offsets.size, np.nan)
    done_dt, done_log = [0.0], [float(best[0])]
    for i in np.argsort(np.abs(offsets), kind="stable"):  # nearest temperatures first
        dt = offsets[i]
        t = t0 + dt
        if t <= 0:
            continue
        model = problem.model(t, evaluator="rational")  # one refit from the best fit: no decomposition
        if hasattr(model, "basis_predictions"):
            # start from log10 D·t extrapolated through the temperatures already fitted (the
            # values are solved at every step of a projected fit and need no start)
            start = np.array(best, float)
            if len(done_dt) > 1:
                coef = np.polyfit(done_dt, done_log, min(len(done_dt) - 1, 2))
                start[0] = float(np.clip(np.polyval(coef, dt), lower[0], upper[0]))
            theta = _refit_projected(model, problem.y, state.weights, start, lower, upper, vary)
        else:
            theta, _ = _least_squares(model, problem.y, state.weights, best, lo_fit, hi_fit, max_nfev=200)
        logs[i] = theta[0]
        done_dt.append(float(dt))
        done_log.append(float(theta[0]))
    dts = np.concatenate([[0.0], offsets])
    vals = np.concatenate([[best[0]], logs]) - best[0]
    ok = np.isfinite(vals)
    coef = np.polyfit(dts[ok], vals[ok], 2)
    nodes = {"temperature_c": (t0 + dts[ok]).tolist(), "log10_dt_m2": (best[0] + vals[ok]).tolist(),
             "max_shift_log10": float(np.max(np.abs(vals[ok])))}
    return np.poly1d(coef), nodes


def propagate(state: FitState) -> FitResult:
    """Monte Carlo draws of time from a finished fit (see module notes)."""
    from zoneprofile.diffusion.paths import durations_days
    from zoneprofile.diffusion.resolution import beam_matrix

    problem, model, best = state.problem, state.model, state.best
    rng = np.random.default_rng(state.seed)
    n_draws = state.draws
    t0, t_sd = state.temperature_c, state.temperature_sd_c
    law = problem.law
    warnings = []

    # the noise refits resample the profile with a generator keyed by the data, not by the seed: the
    # analytical-noise part, and with it the verdict (resolved or an upper bound), is a function of
    # the data alone, so no seed can flip it (docs/fitting-and-uncertainty.md)
    thetas, noise_method = _noise_offsets(state, np.random.default_rng(_data_seed(state)))
    log_noise = thetas[:, 0]
    shape_fn, nodes = _temperature_shape(state)

    # --- draws (module notes; the terms beyond the profile come from _budget)
    from zoneprofile.diffusion import _budget as bud

    options = state.budget_options or bud.BudgetOptions()
    shared_seed, traverse_seed = bud.seeds(options, state.seed)
    defaults_used = dict(state.defaults_used or {})
    # temperature: one deviate per sample and draw index, never from the bootstrap's generator
    z_t = bud.shared_normals(shared_seed, n_draws, "temperature")
    t_draw = t0 + t_sd * z_t
    if np.any(t_draw <= 0):
        t_draw = np.maximum(t_draw, 1.0)
    # noise part: a normal centred on the best fit with the larger of the refit scatter
    # and the best fit's standard error (percentiles of a few dozen refits are too noisy to
    # trust in the tails); when the best fit sits on the lower bound of D·t the refits
    # are used as they are (a one-sided distribution: only an upper bound)
    spread = float(np.std(log_noise, ddof=1)) if log_noise.size > 2 else 0.0
    log_lo, log_hi = state.log_bounds
    # at the upper bound of D·t (a profile relaxed to equilibrium fits best) the fit's standard
    # error is not a standard error; nor is one wider than the whole range searched
    at_ceiling = best[0] >= log_hi - 0.1
    stderr = state.best_fit.stderr[0]
    usable = stderr is not None and np.isfinite(stderr) and stderr < log_hi - log_lo and not at_ceiling
    sd_noise = max(spread, float(stderr) if usable else 0.0)
    at_floor = best[0] <= log_lo + 0.1 or np.percentile(log_noise, 2.5) <= log_lo + 0.1
    z_noise = rng.standard_normal(n_draws)
    if at_floor and log_noise.size > 1:
        pick = rng.integers(0, log_noise.size, n_draws)
        eps = log_noise[pick] - best[0] + 0.25 * spread * z_noise
    else:
        eps = sd_noise * z_noise
    # position of a boundary tied to a sharp An step: the data cannot place it inside the
    # gap between two An points better than their likelihood says; spread over positions
    cands = state.position_candidates or []
    shifts, wts = np.zeros(1), np.ones(1)
    if len(cands) > 1:
        wts = np.array([c["weight"] for c in cands])
        shifts = np.array([c["log10_dt_m2"] for c in cands]) - cands[int(np.argmax(wts))]["log10_dt_m2"]
        eps = eps + shifts[rng.choice(len(cands), size=n_draws, p=wts / wts.sum())]
    g = np.zeros(n_draws) if shape_fn is None else shape_fn(t_draw - t0)
    # law parameters: the law is the same for the whole sample, so its deviates are shared
    perturb = {}
    for name, sd in (getattr(law, "parameter_sd", {}) or {}).items():
        if sd and np.isfinite(sd) and sd > 0:
            perturb[name] = float(sd) * bud.shared_normals(shared_seed, n_draws, f"law parameter {name}")
    # partition coefficient A (plagioclase trace elements): slope of log10 D·t on A
    a_sd = 0.0
    log_partition = np.zeros(n_draws)
    if problem.coupling == "an" and problem.partition_ab is not None:
        a_sd = options.partition_a_sd_j_mol
        if a_sd is None:
            a_sd = bud.DEFAULT_PARTITION_A_SD_FRACTION * abs(problem.partition_ab[0])
            defaults_used["partition_a_sd_j_mol"] = (
                f"{a_sd:.3g} J/mol ({bud.DEFAULT_PARTITION_A_SD_FRACTION:.0%} of |A|; the model gives no sd)")
        if shape_fn is not None and getattr(law, "temperature_separable", True):
            # the shape depends on T only through A/RT (B/RT scales the values, which are fitted):
            # A + δA at T is the shape at T' = T·A/(A + δA), so the slope comes free from the
            # temperature refits: d log τ / dA = g'(0) · (−T_K / A)
            a0 = float(problem.partition_ab[0])
            slope = float(shape_fn.deriv()(0.0)) * (-(t0 + 273.15) / a0) if a0 else 0.0
        else:
            slope, a_sd = bud.partition_term(state, float(a_sd))
        log_partition = slope * a_sd * bud.shared_normals(shared_seed, n_draws, "partition A")
    # An noise: the An levels either side of the boundary, from two refits (deterministic)
    log_an = np.zeros(n_draws)
    if options.an_noise:
        an_sd = bud.an_noise_sd(state)
        if an_sd > 0:
            log_an = an_sd * bud.shared_normals(state.seed, n_draws, "An noise")
    # --- resolution (deterministic given the converged refits: a seed does not decide it)
    dt_um2 = 10.0 ** (best[0] + 12.0)
    res_var = state.resolution_var_um2
    p_low = float(np.percentile(log_noise, 2.5)) if log_noise.size > 1 else best[0]
    floor_delta = state.floor_delta_chi2
    step_rejected = floor_delta is None or floor_delta > _UNDIFFUSED_DCHI2
    # resolved: the data show, at 95 % (noise and position), a relaxed width larger than the resolution
    q_low = _mixture_quantile(0.025, sd_noise, shifts, wts)
    dt_low_um2 = 10.0 ** (best[0] + q_low + 12.0)
    resolved = bool(2.0 * dt_low_um2 > res_var and p_low > log_lo + 0.1 and not at_floor and step_rejected
                    and not at_ceiling)
    if not resolved:
        # the An-noise and partition sensitivities are refits about a best fit that the data do not
        # separate from an undiffused step: not applied to an upper bound (shown in the budget only)
        applied_an_partition = False
        log_an_shown, log_partition_shown = log_an, log_partition
        log_an, log_partition = np.zeros(n_draws), np.zeros(n_draws)
    else:
        applied_an_partition = True
        log_an_shown, log_partition_shown = log_an, log_partition
    # m², D_ref(T_k)·t of the apparent profile; draws stay inside the range of D·t the fit searched
    log_tau = np.clip(best[0] + g + eps + log_partition + log_an, log_lo, log_hi)

    # beam size and growth width: variances add (module notes of _budget)
    from zoneprofile.diffusion.resolution import beam_variance_um2

    s2_assumed = beam_variance_um2(problem.beam_um, problem.beam_shape)
    s2_drawn = np.full(n_draws, s2_assumed)
    beam_sd = 0.0
    if problem.beam_um:
        beam_sd = options.beam_sd_um
        if beam_sd is None:
            beam_sd = bud.DEFAULT_BEAM_SD_FRACTION * float(problem.beam_um)
            defaults_used["beam_sd_um"] = (f"{beam_sd:.3g} µm ({bud.DEFAULT_BEAM_SD_FRACTION:.0%} of the "
                                           f"{problem.beam_um:g} µm spot)")
        beam_draw = np.abs(float(problem.beam_um) + beam_sd * bud.shared_normals(traverse_seed, n_draws, "beam"))
        s2_drawn = np.array([beam_variance_um2(b, problem.beam_shape) for b in beam_draw]) if \
            problem.beam_shape != "gaussian" else s2_assumed * (beam_draw / float(problem.beam_um)) ** 2
    growth_sd = options.growth_width_sd_um
    if growth_sd is None:
        growth_sd = bud.DEFAULT_GROWTH_WIDTH_SD_UM
        defaults_used["growth_width_sd_um"] = (f"half-normal, sd {growth_sd:g} µm (width of the boundary when "
                                               "it grew)")
    sg2 = bud.half_normal(state.seed, n_draws, growth_sd, "growth width") ** 2

    # obliquity
    obl = None
    factor = np.ones(n_draws)
    factor_best = 1.0
    if state.obliquity_deg is not None or state.dip_deg is not None:
        psi0 = float(state.obliquity_deg or 0.0)
        phi0 = 90.0 if state.dip_deg is None else float(state.dip_deg)
        psi = psi0 + state.obliquity_sd_deg * bud.shared_normals(traverse_seed, n_draws, "obliquity given")
        factor = (np.sin(np.radians(phi0)) * np.cos(np.radians(psi))) ** 2
        factor_best = (math.sin(math.radians(phi0)) * math.cos(math.radians(psi0))) ** 2
        obl = {"psi_deg": psi0, "psi_sd_deg": state.obliquity_sd_deg, "phi_deg": phi0,
               "phi_assumed": state.dip_deg is None, "time_factor": factor_best,
               "formula": "t_true = t_apparent · (sin φ · cos ψ)²",
               "log10_dt_m2_apparent": float(best[0])}
        if state.dip_deg is None:
            warnings.append("obliquity corrected for the in-section angle only; the boundary was assumed "
                            "perpendicular to the section (φ = 90°), so the time may still be too long")
        if factor_best < 0.05:
            warnings.append("the traverse is nearly parallel to the boundary; the obliquity correction is huge")
    elif options.section_obliquity and options.obliquity_default_sd_deg > 0:
        theta = bud.section_obliquity_deg(traverse_seed, n_draws, sd_deg=options.obliquity_default_sd_deg,
                                          max_deg=bud.MAX_OBLIQUITY_DEG)
        factor = np.cos(np.radians(theta)) ** 2
        factor_best = 1.0  # "best" is the fit at the stated conditions; the draws carry the prior
        obl = {"psi_deg": None, "default_distribution": (
            f"half-normal, sd {options.obliquity_default_sd_deg:g}°, cut at {bud.MAX_OBLIQUITY_DEG:g}°"),
            "time_factor": factor_best, "formula": "t_true = t_apparent · cos²θ",
            "log10_dt_m2_apparent": float(best[0]), "median_angle_deg": float(np.median(theta))}
        defaults_used["section_obliquity"] = (
            f"unknown angle of the boundary plane to the traverse: {obl['default_distribution']} "
            "(switch off with section_obliquity=False / --no-section-obliquity)")

    def corrected(log_fit, s2b, g2, fac):
        """True D·t (m²) from the apparent one: beam, then obliquity, then growth width."""
        dt = fac * (10.0**log_fit + 0.5e-12 * (s2_assumed - s2b)) - 0.5e-12 * g2
        return np.maximum(dt, 10.0**log_lo)

    tau_m2 = corrected(log_tau, s2_drawn, sg2, factor)
    tau_best = float(corrected(np.array([best[0]]), s2_assumed, 0.0, factor_best)[0])
    comp = problem.law_composition(**problem.reference)
    comp_draw = dict(comp)
    fo2_note = None
    if options.fo2_buffer is not None and "fo2_pa" in law.needs:
        from zoneprofile.diffusion.laws.buffers import fo2_buffer_pa

        comp_draw["fo2_pa"] = fo2_buffer_pa(options.fo2_buffer, t_draw, delta_log=options.fo2_delta_log)
        fo2_note = f"fO2 follows {options.fo2_buffer.upper()} {options.fo2_delta_log:+g} with each drawn temperature"

    path = state.path
    if path is None:
        d_draw = law.d_m2_s(t_draw, perturb=perturb or None, **comp_draw)
        time_days = tau_m2 / d_draw / SECONDS_PER_DAY
        best_days = tau_best / float(law.d_m2_s(t0, **comp)) / SECONDS_PER_DAY
    else:
        def comp_at(temp):
            if fo2_note is None:
                return comp
            from zoneprofile.diffusion.laws.buffers import fo2_buffer_pa

            return {**comp, "fo2_pa": fo2_buffer_pa(options.fo2_buffer, temp, delta_log=options.fo2_delta_log)}

        def d_fn(temp, rows):
            pert = {k: v[rows] for k, v in perturb.items()} or None
            temp = np.maximum(temp, 1.0)
            return law.d_m2_s(temp, perturb=pert, **comp_at(temp))

        time_days, notes = durations_days(path, d_fn, tau_m2, shift_c=t_draw - t0)
        warnings += notes
        bd, _ = durations_days(path, lambda temp, rows: law.d_m2_s(np.maximum(temp, 1.0),
                                                                  **comp_at(np.maximum(temp, 1.0))),
                               np.array([tau_best]))
        best_days = float(bd[0])
        warnings.append("non-isothermal path: the profile shape was modelled at the path's starting "
                        "temperature; only the integral of D along the path sets the time")

    log_dt_draws = np.log10(tau_m2)
    ld = _percentiles(log_dt_draws)
    ld["best"] = float(math.log10(tau_best))
    ld["sd_noise"] = sd_noise
    td = _percentiles(time_days)
    td["best"] = float(best_days)
    n_inf = int(np.sum(~np.isfinite(time_days)))
    if n_inf:
        warnings.append(f"{n_inf} of {n_draws} draws give no finite time")

    if not step_rejected:
        warnings.append(
            f"an undiffused step seen through the spot fits the data about as well (Δχ² = {floor_delta:.2g} "
            f"< {_UNDIFFUSED_DCHI2:g}, 95 %)"
        )
    if not resolved:
        up = state.profile_upper_log10_dt
        up = up() if callable(up) else up
        if at_ceiling or (up is not None and up >= log_hi - 0.05):
            # nothing bounds the time: an equilibrated profile fits as well as any (for a
            # plagioclase trace element the equilibrium profile keeps a step where An steps)
            td["upper_bound"] = None
            warnings.append(
                "the data do not bound the time: a profile relaxed to equilibrium fits as well as a sharp "
                "one (for a trace element in plagioclase the equilibrium profile keeps a step where An "
                "steps); this boundary gives no time for this element"
            )
        elif up is not None and path is None:
            # profile-likelihood bound on D·t (95 %), spread by every other term of the budget
            ub_m2 = corrected(up + g + log_partition + log_an, s2_drawn, sg2, factor)
            ub_draws = ub_m2 / law.d_m2_s(t_draw, perturb=perturb or None, **comp_draw)
            td["upper_bound"] = float(np.percentile(ub_draws / SECONDS_PER_DAY, 97.5))
        else:
            td["upper_bound"] = td["p97_5"]
        if td["upper_bound"] is not None and td["p97_5"] is not None:
            # one statement: the interval drawn never reaches above the bound stated
            td["upper_bound"] = max(td["upper_bound"], td["p97_5"])
        if td["upper_bound"] is not None:
            warnings.append(
                f"the relaxed width (√(2·D·t) = {math.sqrt(2 * dt_um2):.2g} µm) is not larger than the "
                f"resolution (spot and point spacing, {math.sqrt(res_var):.2g} µm sd) with 95 % confidence: the "
                f"time is an upper bound only (< {td['upper_bound']:.3g} days)"
            )
    else:
        td["upper_bound"] = None
    td.setdefault("lower_bound", None)
    td["statement"] = "date" if resolved else ("upper_bound" if td["upper_bound"] is not None else "none")

    # --- uncertainty budget (sd of log10 time from each source alone)
    def sd_of(v):
        v = np.asarray(v, float)
        v = v[np.isfinite(v)]
        return float(np.std(v)) if v.size > 1 else 0.0

    log_best = math.log10(tau_best)
    budget = {"analytical_noise": sd_of(eps)}
    if t_sd > 0:
        budget["temperature"] = sd_of(g - np.log10(law.d_m2_s(t_draw, **comp_draw)))
    else:
        budget["temperature"] = 0.0
    budget["law_parameters"] = sd_of(np.log10(law.d_m2_s(t0, perturb=perturb, **comp))) if perturb else 0.0
    spread = bud.law_spread(law, t0, comp) if options.law_spread else None
    budget["law_spread_systematic"] = 0.0 if spread is None else spread["sd_log10"]
    budget["partition_coefficients"] = sd_of(log_partition_shown)
    budget["an_noise"] = sd_of(log_an_shown)
    budget["beam_size"] = sd_of(np.log10(corrected(np.full(n_draws, best[0]), s2_drawn, 0.0, factor_best))
                                - log_best)
    budget["growth_width"] = sd_of(np.log10(corrected(np.full(n_draws, best[0]), s2_assumed, sg2, factor_best))
                                   - log_best)
    budget["obliquity"] = sd_of(np.log10(factor)) if obl else 0.0
    budget["total"] = float(np.std(np.log10(time_days[np.isfinite(time_days) & (time_days > 0)]))) \
        if np.any(np.isfinite(time_days)) else None
    law_choice = None
    if spread is not None:
        # the systematic term as an interval of its own (not in time_days: see _budget notes)
        z_law = bud.shared_normals(shared_seed, n_draws, "between-law spread")
        wide = time_days * 10.0 ** (-spread["sd_log10"] * z_law)
        wide = wide[np.isfinite(wide)]
        law_choice = {**spread, "time_days_p2_5": float(np.percentile(wide, 2.5)) if wide.size else None,
                      "time_days_p97_5": float(np.percentile(wide, 97.5)) if wide.size else None,
                      "in_time_days": False}
    n_floor = int(np.sum(tau_m2 <= 10.0**log_lo * (1 + 1e-9)))
    if n_floor > 0.025 * n_draws and resolved:
        warnings.append(f"{n_floor} of {n_draws} draws leave no diffusion once the beam and the growth width "
                        "of the boundary are allowed for: the lower end of the interval is open")
    if fo2_note:
        defaults_used.setdefault("fo2", fo2_note)
    for what, text in defaults_used.items():
        if what == "fo2":
            continue
        warnings.append(f"stated default used for {_DEFAULT_LABELS.get(what, what)}: {text}")
    budget_info = {"defaults_used": defaults_used, "law_choice": law_choice,
                   "shared_seed": shared_seed, "traverse_seed": traverse_seed,
                   "beam_sd_um": beam_sd, "growth_width_sd_um": growth_sd,
                   "partition_a_sd_j_mol": a_sd or None, "fo2_buffer": options.fo2_buffer,
                   "fo2_delta_log": options.fo2_delta_log if options.fo2_buffer else None,
                   "an_noise_and_partition_in_draws": applied_an_partition}

    # --- curves for plotting
    x = problem.x_um
    xc = np.linspace(x[0], x[-1], 300)
    b_curve = beam_matrix(problem.grid, xc, beam_um=problem.beam_um, shape=problem.beam_shape)
    cells_best, c0 = model.cells(best)
    curve = b_curve @ cells_best
    idx = np.clip(np.searchsorted(problem.grid.faces_um, xc) - 1, 0, problem.grid.n - 1)
    initial = c0[idx]
    if thetas.shape[0] > 1:
        sub = thetas[: min(thetas.shape[0], 60)]
        cells_many = getattr(model, "cells_many", None)
        if cells_many is not None:
            curves = cells_many(sub) @ b_curve.T
        else:
            curves = np.array([b_curve @ model.cells(th)[0] for th in sub])
        band_low = np.percentile(curves, 2.5, axis=0)
        band_high = np.percentile(curves, 97.5, axis=0)
    else:
        band_low = band_high = curve.copy()

    return FitResult(
        position_um=float(best[1]), element=problem.element, law=law.id, temperature_c=t0,
        temperature_sd_c=t_sd, log10_dt_m2=ld, time_days=td, resolved=resolved, warnings=warnings,
        time_draws_days=time_days, log10_dt_draws=log_dt_draws, distance_um=xc, model=curve,
        initial=initial, band_low=band_low, band_high=band_high, data_distance_um=x.copy(),
        data_value=problem.y.copy(), data_model=state.pred, residuals=problem.y - state.pred,
        data_sd=None if problem.sigma is None else np.asarray(problem.sigma, float).copy(),
        uncertainty_budget=budget, obliquity=obl, temperature_nodes=nodes, draws=n_draws,
        noise_method=noise_method, budget_info=budget_info,
    )
