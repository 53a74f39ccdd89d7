r"""Whole-crystal dating: every recharge boundary of one traverse in one forward model.

:func:`fit_crystal` fits the model of :mod:`zoneprofile.diffusion._crystal_model`
(zones grown one event at a time, instant growth, each zone in equilibrium
with its melt, every element diffusing through the crystal grown so far, An
frozen) to one or several elements at once and returns the ages of the
events and the gaps between them (the residence times between recharges).

Parameters of the fit (``x``): ``log10`` of the youngest age, ``log10`` of
each positive gap between successive events (so ages are ordered by
construction and every draw is positive), and the boundary positions (moved
within a small window around the given ones; the An data, which do not
diffuse, pin them where An steps). The melt value of every zone and element is
solved by linear least squares at every trial (variable projection).

Uncertainty (see ``docs/whole-crystal-model.md``):

- analytical noise: Laplace approximation in ``x`` (Gauss–Newton covariance
  from a finite-difference Jacobian at the optimum, scaled by the residual
  variance when no precision is given), ``draws`` normal draws;
- temperature: shared per-sample deviates (:mod:`zoneprofile.diffusion.draws`);
  times scale as ``D(T0)/D(T)`` (exact for a law whose composition term does
  not depend on T; the weak A/RT change of the equilibrium shape is not
  refitted). With several elements an age's factor is the information-weighted
  geometric mean of the elements' factors;
- law parameters with a published sd: the same scaling;
- section obliquity: the crystal's shared obliquity draws, times × cos²θ.

Statements per boundary and element: ``date``; ``upper_bound`` when the
profile is not wider than the resolution (Δχ² of the gap collapsed below
3.84); ``lower_bound`` when the element has reached equilibrium at that
boundary (Δχ² of an equilibrated profile below 3.84); ``none`` when both.
"""

from __future__ import annotations

import math

import numpy as np

from zoneprofile._limits import check_limit
from zoneprofile._validation import InputError
from zoneprofile.diffusion._crystal_model import (
    SECONDS_PER_DAY,
    UM2_PER_M2,
    AnZones,
    ElementModel,
    ZoneGrid,
    beam_for,
    forward_basis,
)
from zoneprofile._api import CrystalVocabulary  # summary / to_dict / to_frame / _repr_html_

__all__ = ["fit_crystal", "CrystalResult", "time_summary", "DELTA_CHI2_95"]

#: χ² quantile, one degree of freedom, 95 %
DELTA_CHI2_95 = 3.84
_Z975 = 1.959963984540054


# --------------------------------------------------------------------------- summaries
def time_summary(draws=None, statement="date", upper=None, lower=None):
    """The shared time summary (days): median, 95 % interval, statement and bounds."""
    out = {"median": None, "p2_5": None, "p97_5": None, "statement": statement,
           "upper_bound": None, "lower_bound": None}
    if statement == "date" and draws is not None:
        d = np.asarray(draws, float)
        d = d[np.isfinite(d)]
        if d.size:
            out["median"] = float(np.median(d))
            out["p2_5"] = float(np.percentile(d, 2.5))
            out["p97_5"] = float(np.percentile(d, 97.5))
    if statement == "upper_bound":
        out["upper_bound"] = None if upper is None else float(upper)
    if statement == "lower_bound":
        out["lower_bound"] = None if lower is None else float(lower)
    return out


class CrystalResult(CrystalVocabulary):
    """The fitted crystal; :meth:`to_record` gives ``record["crystal_model"]``."""

    def __init__(self, **kw):
        self.__dict__.update(kw)

    def to_record(self):
        return self.record

    def report(self) -> str:
        rec = self.record
        lines = [f"Whole-crystal model: {len(rec['boundaries'])} boundaries, elements "
                 f"{', '.join(rec['elements'])}, {rec['temperature_c']:g} °C, {rec['n_draws']} draws"]
        for b in rec["boundaries"]:
            lines.append(f"  {b['id']} at {b['position_um']:.1f} µm: age {_fmt(b['age_days'])}")
            for el, s in b["by_element"].items():
                lines.append(f"      {el}: {_fmt(s)}")
            c = b["concordance"]
            lines.append(f"      concordance: {c['status']}" + ("" if not c["reasons"] else
                                                                  "; " + "; ".join(c["reasons"])))
        for g in rec["gaps"]:
            lines.append(f"  gap {g['older']}→{g['younger']}: {_fmt(g['days'])}")
        for w in rec["warnings"]:
            lines.append(f"  warning: {w}")
        lines.append("  Diffusion timescales inform, and do not replace, hazard assessment, which belongs "
                     "to the responsible observatory and local authorities.")
        return "\n".join(lines)


def _fmt(s):
    st = s["statement"]
    if st == "date":
        return f"{s['median']:.3g} d (95 %: {s['p2_5']:.3g} – {s['p97_5']:.3g} d)"
    if st == "upper_bound":
        return f"< {s['upper_bound']:.3g} d (upper bound: profile not wider than the resolution)"
    if st == "lower_bound":
        return f"> {s['lower_bound']:.3g} d (lower bound: element at equilibrium)"
    return "no time (neither bounded above nor below)"


# --------------------------------------------------------------------------- the objective
class _Objective:
    """Weighted residuals of the data given ``x`` (log10 youngest age, log10 gaps, positions)."""

    #: forward evaluations of one element, all objectives together (for the benchmark)
    element_evaluations = 0

    def __init__(self, zgrid, an_zones, an_data, elements, temperature_c, rim, positions0, window, log_bounds):
        self.zgrid = zgrid
        self.an_zones = an_zones
        self.an_data = an_data  # (x, values, weights, beam_um, beam_shape) or None
        self.elements = elements
        self.temperature_c = float(temperature_c)
        self.rim = rim
        self.n = len(positions0)
        self.positions0 = np.asarray(positions0, float)
        self.window = float(window)
        self.log_bounds = log_bounds
        self.zone_cells = zgrid.zone_of_cells()
        self._beam_cache = {}
        self.n_eval = 0

    # parameters
    def unpack(self, x):
        n = self.n
        logs = np.asarray(x[:n], float)
        young = 10.0 ** logs[0]
        gaps = 10.0 ** logs[1:]  # gap between event k and k + 1, oldest first
        ages = np.empty(n)
        ages[-1] = young
        for k in range(n - 2, -1, -1):
            ages[k] = ages[k + 1] + gaps[k]
        pos = self.positions0 + (np.asarray(x[n:], float) if self.window > 0 else 0.0)
        return ages, pos

    def bounds(self):
        lo_t, hi_t = self.log_bounds
        lo = [lo_t] * self.n + ([-self.window] * self.n if self.window > 0 else [])
        hi = [hi_t] * self.n + ([self.window] * self.n if self.window > 0 else [])
        return np.array(lo), np.array(hi)

    def _beam(self, key, faces, x, beam_um, shape):
        fk = (key, faces.tobytes())
        mat = self._beam_cache.get(fk)
        if mat is None:
            if len(self._beam_cache) > 64:
                self._beam_cache.clear()
            mat = beam_for(faces, x, beam_um, shape)
            self._beam_cache[fk] = mat
        return mat

    def state(self, x, elements=None, temperature_c=None):
        """Per element: (basis predictions (n+1, n_pts), c) and the An cells, at ``x``."""
        ages, pos = self.unpack(x)
        faces = self.zgrid.faces(pos)
        centres = 0.5 * (faces[1:] + faces[:-1])
        x_an = None if self.an_zones is None else self.an_zones.cells(centres, self.zone_cells)
        x_ref = None if self.an_zones is None else self.an_zones.x_ref
        t = self.temperature_c if temperature_c is None else temperature_c
        out = []
        for em in (self.elements if elements is None else elements):
            d_ref, d_rel, w, c = em.setup(t, x_an, x_ref)
            if w.size != self.zgrid.n:
                w = np.broadcast_to(w, (self.zgrid.n,)).copy()
            basis = forward_basis(self.zgrid, faces, ages, d_ref, d_rel, w, rim=self.rim)
            mat = self._beam(em.element, faces, em.x_um, em.beam_um, em.beam_shape)
            out.append((basis @ mat.T, c, basis, faces))
        return out, x_an, faces

    @staticmethod
    def solve_values(pred, y, weights):
        a = (pred * weights).T
        b = y * weights
        v, *_ = np.linalg.lstsq(a, b, rcond=None)
        if np.any(v < 0):
            from scipy.optimize import nnls

            v, _ = nnls(a, b)
        return v, a @ v - b

    #: (boundary index, least relative melt contrast) imposed on every element, or None
    forced = None

    @classmethod
    def solve_forced(cls, pred, y, weights, k, contrast):
        """Residuals with the melts of zones ``k`` and ``k + 1`` at least ``contrast`` apart (relative).

        The contrast is imposed exactly (``v_{k+1} = ρ·v_k``, ρ = 1 ± contrast, the better of
        the two): a boundary whose element has reached equilibrium then shows the time a
        contrast of that size needs to disappear.
        """
        best = None
        for rho in (1.0 + contrast, 1.0 / (1.0 + contrast)):
            merged = np.delete(pred, k + 1, axis=0)
            merged[k] = pred[k] + rho * pred[k + 1]
            _, r = cls.solve_values(merged, y, weights)
            if best is None or r @ r < best @ best:
                best = r
        return best

    def residuals(self, x):
        self.n_eval += 1
        _Objective.element_evaluations += len(self.elements)
        states, x_an, faces = self.state(x)
        parts = []
        for em, (pred, _c, _b, _f) in zip(self.elements, states):
            if self.forced is None:
                _, r = self.solve_values(pred, em.y, em.weights)
            else:
                r = self.solve_forced(pred, em.y, em.weights, *self.forced)
            parts.append(r)
        if self.an_data is not None and x_an is not None:
            ax, av, aw, abeam, ashape = self.an_data
            mat = self._beam("An", faces, ax, abeam, ashape)
            parts.append((mat @ (100.0 * x_an) - av) * aw)
        return np.concatenate(parts)

    def chi2(self, x):
        r = self.residuals(x)
        return float(r @ r)

    def curves(self, x, points=240, at=None):
        """The fitted profiles at ``x``, for figures: per element, ``distance_um`` (``points`` from the
        first to the last analysis, or ``at``), ``model`` (the profile as the spot sees it) and ``grown``
        (every zone as it grew, before any diffusion: the model's initial condition, cell by cell)."""
        ages, _ = self.unpack(x)
        states, x_an, faces = self.state(x)
        x_ref = None if self.an_zones is None else self.an_zones.x_ref
        out = {}
        for em, (pred, _c, basis, _f) in zip(self.elements, states):
            v, _ = self.solve_values(pred, em.y, em.weights)
            xs = (np.linspace(float(em.x_um.min()), float(em.x_um.max()), int(points)) if at is None
                  else np.asarray(at, float))
            mat = beam_for(faces, xs, em.beam_um, em.beam_shape)
            model = v @ (basis @ mat.T)
            _, d_rel, w, _ = em.setup(self.temperature_c, x_an, x_ref)
            w = np.broadcast_to(w, (self.zgrid.n,))
            grown_cells = v @ forward_basis(self.zgrid, faces, ages, 0.0, d_rel, w, rim=self.rim)
            cell = np.clip(np.searchsorted(faces, xs, side="right") - 1, 0, self.zgrid.n - 1)
            out[em.element] = {"distance_um": xs, "model": model, "grown": grown_cells[cell]}
        return out


def _least_squares(obj, x0, lo, hi, max_nfev=300):
    from scipy.optimize import least_squares

    x0 = np.clip(np.asarray(x0, float), lo + 1e-9, hi - 1e-9)
    sol = least_squares(obj.residuals, x0, bounds=(lo, hi), method="trf", diff_step=1e-4,
                        x_scale=1.0, xtol=1e-5, ftol=1e-7, max_nfev=max_nfev)
    return sol.x, sol


def _coarse_start(obj, x0, lo, hi, cycles=2, nodes=9):
    """Coordinate scans of each log time over its range (positions fixed), ``cycles`` times."""
    x = np.array(x0, float)
    best = obj.chi2(x)
    for _ in range(cycles):
        for j in range(obj.n):
            grid = np.linspace(lo[j] + 0.05, hi[j] - 0.05, nodes)
            for g in grid:
                trial = x.copy()
                trial[j] = g
                c = obj.chi2(trial)
                if c < best:
                    best, x = c, trial
    return x, best


def _jacobian(obj, x, lo, hi, r0=None):
    """Central-difference Jacobian of the weighted residuals (one-sided at a bound)."""
    r0 = obj.residuals(x) if r0 is None else r0
    jac = np.empty((r0.size, x.size))
    for j in range(x.size):
        h = 2e-3 if j < obj.n else 0.02
        up = min(x[j] + h, hi[j])
        dn = max(x[j] - h, lo[j])
        xu, xd = x.copy(), x.copy()
        xu[j], xd[j] = up, dn
        jac[:, j] = (obj.residuals(xu) - obj.residuals(xd)) / (up - dn)
    return jac


# --------------------------------------------------------------------------- one fit
def _fit(obj, start_candidates, *, coarse=True):
    lo, hi = obj.bounds()
    best_x, best_c = None, np.inf
    for s in start_candidates:
        s = np.clip(np.asarray(s, float), lo, hi)
        if coarse:
            s, c = _coarse_start(obj, s, lo, hi)
        else:
            c = obj.chi2(s)
        if c < best_c:
            best_x, best_c = s, c
    x, sol = _least_squares(obj, best_x, lo, hi)
    r = sol.fun
    chi2 = float(r @ r)
    return x, chi2, r


def _laplace(obj, x, r, known_sd, fixed=()):
    """Covariance of ``x`` (Gauss–Newton), with parameters in ``fixed`` held (zero variance)."""
    lo, hi = obj.bounds()
    jac = _jacobian(obj, x, lo, hi, r0=r)
    dof = max(r.size - x.size, 1)
    s2 = 1.0 if known_sd else max(float(r @ r) / dof, 1e-300)
    free = np.array([j for j in range(x.size) if j not in set(fixed)], int)
    cov = np.zeros((x.size, x.size))
    if free.size:
        jf = jac[:, free]
        h = jf.T @ jf
        cov_f = s2 * np.linalg.pinv(h, rcond=1e-12)
        cov[np.ix_(free, free)] = cov_f
    return cov, s2, jac


def _crossing(f, a, b, level, iters=10):
    """x in [a, b] where f(x) = level, f(a) < level <= f(b) (bisection on the conditional Δχ²)."""
    for _ in range(iters):
        m = 0.5 * (a + b)
        if f(m) < level:
            a = m
        else:
            b = m
    return 0.5 * (a + b)


def _secant_crossing(dchi2, x0, v1, limit, iters=3):
    """Where the conditional Δχ² reaches 3.84 on the side of ``v1`` (within ``limit``).

    For a quadratic Δχ², √Δχ² is linear in the distance from the optimum, so a
    secant on √Δχ² − 1.96 from the optimum (where it is −1.96) converges in a
    few steps; it stays inside ``[x0, limit]``, where Δχ² at ``limit`` is known
    to exceed 3.84.
    """
    lo_v, lo_g = x0, -_Z975
    v = float(np.clip(v1, min(x0, limit), max(x0, limit)))
    for _ in range(iters):
        g = math.sqrt(max(dchi2(v), 0.0)) - _Z975
        if abs(g) < 0.05 or v == limit:
            break
        if g == lo_g:
            break
        nxt = lo_v + (v - lo_v) * (-lo_g) / (g - lo_g)
        if g < 0:
            lo_v, lo_g = v, g
        v = float(np.clip(nxt, min(x0, limit), max(x0, limit)))
    return v


def _statements(obj, x, chi2, s2, res_var_um2, d_max, sd_c=None, min_contrast=0.1):
    """Per time parameter: 'date', 'upper_bound', 'lower_bound' or 'none', and the crossing values.

    The conditional Δχ² (melt values refitted, the other parameters held) at
    the collapsed end (gap → lower limit) and at the equilibrated end (upper
    limit) of each log time; Δχ² < 3.84 at an end leaves that side open. Where
    both are open because the element shows no contrast at all, the check is
    repeated with a melt contrast of at least ``min_contrast`` imposed (a lower
    bound when such a contrast would show at young ages).
    """
    lo, hi = obj.bounds()
    out = []
    for j in range(obj.n):
        def dchi2(v, j=j):
            t = x.copy()
            t[j] = v
            return (obj.chi2(t) - chi2) / s2

        # collapsed: the profile is no wider than the resolution, √(2 D t) ≤ resolution sd
        t_res = res_var_um2 / (2.0 * d_max * UM2_PER_M2) / SECONDS_PER_DAY
        low_end = max(lo[j], min(math.log10(max(t_res, 1e-300)) - 0.3, x[j] - 0.3))
        open_low = x[j] <= lo[j] + 0.05 or dchi2(low_end) < DELTA_CHI2_95
        open_high = x[j] >= hi[j] - 0.05 or dchi2(hi[j]) < DELTA_CHI2_95
        info = {"open_low": bool(open_low), "open_high": bool(open_high), "upper_x": None, "lower_x": None}
        if open_low and not open_high:
            info["upper_x"] = _crossing(lambda v: dchi2(v), x[j], hi[j], DELTA_CHI2_95, iters=7)
        if open_high and open_low and min_contrast:
            # no contrast seen at this boundary: a zone grown from another melt would have had one.
            # With a contrast of at least min_contrast imposed, a young age shows a step the data do
            # not have; the age above which it would have been erased is a lower bound
            k = obj.n - 1 if j == 0 else j - 1
            obj.forced = (k, float(min_contrast))
            try:
                if dchi2(low_end) >= DELTA_CHI2_95 and dchi2(hi[j]) < DELTA_CHI2_95:
                    open_low = False
                    info["open_low"] = False
                    info["forced_contrast"] = float(min_contrast)
                    info["lower_x"] = _crossing(lambda v: -dchi2(v), low_end, hi[j], -DELTA_CHI2_95, iters=8)
            finally:
                obj.forced = None
        elif open_high and not open_low:
            # lower bound: the smallest value still within Δχ² < 3.84, coming from below
            info["lower_x"] = _crossing(lambda v: -dchi2(v), low_end, x[j], -DELTA_CHI2_95, iters=7)
        if not open_low and not open_high:
            # the likelihood-ratio interval on each side (a Gaussian in log time can be far too
            # narrow on the side where the profile approaches the resolution or equilibrium)
            step = _Z975 * (sd_c[j] if sd_c is not None and np.isfinite(sd_c[j]) and sd_c[j] > 0 else 0.3)
            info["lr_low"] = _secant_crossing(dchi2, x[j], x[j] - step, low_end)
            info["lr_high"] = _secant_crossing(dchi2, x[j], x[j] + step, hi[j])
        out.append(info)
    return out


# --------------------------------------------------------------------------- public
def _local_noise_sd(y, noise, floor_fraction=0.2):
    """Relative noise sd of each point: proportional to the value, with a floor.

    Laser analyses of trace elements well above the detection limit scatter in proportion to
    the concentration (common practice for LA-ICP-MS); one noise value for a whole profile
    overweights its rich part (a rim richer by half got weights 1.45 × too large in the
    validation population, and too tight bounds there). The shape is ``hypot(y, f·median(y))``
    with ``f = floor_fraction`` (a project choice, so that points near the blank are not
    overweighted), scaled to the profile's own point-to-point scatter ``noise`` at the median
    level; the fit rescales all weights by the element's residual scatter afterwards.
    """
    y = np.asarray(y, float)
    med = float(np.median(y))
    if not np.all(np.isfinite(y)) or med <= 0 or np.any(y < 0):
        return np.full(y.size, noise)
    shape = np.hypot(y, floor_fraction * med) / math.hypot(med, floor_fraction * med)
    return noise * shape


def fit_crystal(profiles, *, mineral, positions_um, temperature_c, temperature_sd_c=0.0, an_distance_um=None,
                an=None, an_beam_um=None, an_beam_shape="gaussian", rim="open", laws=None,
                partition="bindeman1998", draws=1000, seed=0, temperature_seed=None, obliquity="section",
                position_window_um=None, cell_um=None, fo2_pa=None, pressure_mpa=None, min_melt_contrast=0.1):
    """Fit the whole-crystal model to one traverse and date every event.

    Parameters
    ----------
    profiles : dict
        ``element -> {"distance_um", "value", "sd" (optional), "beam_um", "beam_shape"}``.
    mineral : str
    positions_um : sequence of float
        The recharge boundaries, oldest (innermost, largest distance) first.
    temperature_c, temperature_sd_c : float
    an_distance_um, an : array_like, optional
        Frozen An (mol%) along the traverse; needed for plagioclase trace elements.
    rim : {'open', 'closed'}
    laws : dict, optional
        ``element -> law id`` (default laws otherwise).
    draws : int
    seed : int
        Seed of the crystal's own draws (noise, section obliquity).
    temperature_seed : int, optional
        Seed of the shared temperature deviates (one per sample, see
        :func:`~zoneprofile.diffusion.draws.sample_seed`); ``seed`` when None.
    obliquity : 'section', None or float
        ``'section'``: the default obliquity draws of an unmeasured section
        (:func:`~zoneprofile.diffusion.draws.section_obliquity_deg`); a number:
        a measured angle (degrees); None: no correction.
    position_window_um : float, optional
        How far each boundary may move (default: the larger of the spot sd and
        half the point spacing, at most 40 % of the nearest neighbour's distance).
    min_melt_contrast : float
        Least relative change of an element's melt concentration at a recharge,
        used only where an element shows no contrast at a boundary (equilibrium):
        the lower bound is the time a contrast this large needs to disappear
        (default 0.1; a project default, not a published value).

    Returns
    -------
    CrystalResult
    """
    import time as _time

    from zoneprofile.diffusion.draws import section_obliquity_deg, shared_normals
    from zoneprofile.diffusion.laws import ELEMENTS, MINERALS, default_law, get_law, normalise_element, \
        normalise_mineral
    from zoneprofile.minerals.registry import needs_an as an_needed
    from zoneprofile.diffusion.resolution import beam_sigma_um, beam_variance_um2
    from zoneprofile.diffusion._steps import _noise_sd

    t_start = _time.perf_counter()
    mi = normalise_mineral(mineral)
    if mi not in MINERALS:
        raise InputError(f"unknown mineral '{mineral}'; choose one of: {', '.join(MINERALS)}")
    t0 = float(temperature_c)
    t_sd = float(temperature_sd_c or 0.0)
    check_limit("temperature_c", t0, "temperature")  # zoneprofile/_limits.py
    if not math.isfinite(t_sd) or t_sd < 0:
        raise InputError(f"temperature uncertainty must be >= 0 °C, got {temperature_sd_c}")
    if rim not in ("open", "closed"):
        raise InputError(f"rim must be 'open' or 'closed' for the whole-crystal model, got '{rim}'")
    draws = int(draws)
    if draws < 10:
        raise InputError(f"draws must be at least 10, got {draws}")
    if not profiles:
        raise InputError("no element to fit: give at least one element profile")
    pos = np.asarray([float(p) for p in positions_um], float)
    if pos.size == 0:
        raise InputError("no boundary to date: give at least one boundary position")
    if not np.all(np.isfinite(pos)) or np.any(pos <= 0):
        raise InputError("boundary positions must be finite and > 0 µm from the rim")
    if pos.size > 1 and np.any(np.diff(pos) >= 0):
        k = int(np.flatnonzero(np.diff(pos) >= 0)[0])
        raise InputError(
            f"inconsistent event order: boundaries must be given oldest (innermost) first, but "
            f"{pos[k]:g} µm comes before {pos[k + 1]:g} µm; an outer zone cannot be older than an inner one")
    warnings = []

    # ---- elements, laws, data
    laws = dict(laws or {})
    elements = []
    needs_an = False
    spacing_all, beam_var_all, x_max = [], [], 0.0
    for name, prof in profiles.items():
        el = normalise_element(name)
        if el not in ELEMENTS:
            raise InputError(f"unknown element '{name}'; choose one of: {', '.join(ELEMENTS)}")
        law = get_law(laws[name]) if laws.get(name) else default_law(el, mi)
        if law.element != el:
            raise InputError(f"law {law.id} is for {law.element}, not {el}; choose a law for {el}")
        if el == "FeMg" and mi == "olivine" and "x_fe" in law.needs:
            raise InputError("Fe–Mg in olivine (D depends on Fo) is not in the whole-crystal model yet; "
                             "date its boundaries one by one (fit without --crystal)")
        if law.mineral != mi:
            warnings.append(f"law {law.id} was calibrated on {law.mineral}, not {mi}")
        x = np.asarray(prof["distance_um"], float)
        y = np.asarray(prof["value"], float)
        keep = np.isfinite(x) & np.isfinite(y)
        x, y = x[keep], y[keep]
        sd = prof.get("sd")
        if sd is not None:
            sd = np.broadcast_to(np.asarray(sd, float), keep.shape)[keep]
            if np.any(~np.isfinite(sd)) or np.any(sd <= 0):
                raise InputError(f"{el}: value_sd must be finite and > 0")
        if x.size < 6:
            raise InputError(f"{el}: a profile needs at least 6 points, got {x.size}")
        if np.any(np.diff(x) <= 0):
            raise InputError(f"{el}: distances must increase from the rim")
        if np.any(y < 0):
            raise InputError(f"{el}: negative concentration {y[y < 0][0]:g}; concentrations must be >= 0")
        coupled = an_needed(el, mi)
        needs_an = needs_an or coupled or "x_an" in law.needs
        partition_ab = None
        if coupled:
            from zoneprofile.diffusion.partition import partition_parameters

            partition_ab = tuple(float(v) for v in partition_parameters(el, model=partition))
        noise = _noise_sd(y) if sd is None else None
        if sd is None:
            floor = 1e-3 * max(float(np.ptp(y)), 1e-12)
            weights = 1.0 / np.maximum(_local_noise_sd(y, noise), floor)
        else:
            weights = 1.0 / sd
        beam = prof.get("beam_um")
        shape = prof.get("beam_shape") or "gaussian"
        beam_sigma_um(beam, shape)  # validates the shape
        em = ElementModel(el, law, x, y, weights, beam, shape, coupling="an" if coupled else None,
                          partition_ab=partition_ab,
                          law_kwargs={"fo2_pa": fo2_pa,
                                      "pressure_pa": None if pressure_mpa is None else float(pressure_mpa) * 1e6})
        em.known_sd = sd is not None
        em.spacing = float(np.median(np.diff(x)))
        em.res_var = beam_variance_um2(beam, shape) + em.spacing ** 2 / 12.0
        if beam is None:
            warnings.append(f"{el}: no spot size given; the model was compared with the data point by point")
        elements.append(em)
        spacing_all.append(em.spacing)
        beam_var_all.append(beam_variance_um2(beam, shape))
        x_max = max(x_max, float(x[-1]))
    names = [em.element for em in elements]
    if len(set(names)) != len(names):
        raise InputError("an element is given twice")
    if np.any(pos >= x_max):
        raise InputError(f"boundary {pos[pos >= x_max][0]:g} µm lies beyond the profile (to {x_max:g} µm)")
    res_sd = math.sqrt(min(em.res_var for em in elements))
    if pos.size > 1:
        sep = -np.diff(pos)
        k = int(np.argmin(sep))
        if sep[k] < 2.0 * res_sd:
            raise InputError(
                f"boundaries at {pos[k]:g} and {pos[k + 1]:g} µm are {sep[k]:.2g} µm apart, closer than twice the "
                f"resolution ({res_sd:.2g} µm sd): the data cannot tell them apart; give one of them")
    if pos.size == 1:
        warnings.append("one boundary: the whole-crystal model reduces to a single-boundary fit (no gaps)")

    # ---- An
    an_zones = an_data = None
    if needs_an:
        if an is None:
            raise InputError(f"{', '.join(names)} in {mi} need An (mol%) along the traverse")
        av = np.asarray(an, float)
        ax = np.asarray(an_distance_um, float) if an_distance_um is not None else elements[0].x_um
        ok = np.isfinite(ax) & np.isfinite(av)
        ax, av = ax[ok], av[ok]
        if ax.size < 2 or np.any(np.diff(ax) <= 0):
            raise InputError("An distances must increase from the rim (at least 2 points)")
        if np.any((av < 0) | (av > 100)):
            raise InputError("An must lie between 0 and 100 mol%")
        # points within 3 spot sd of a boundary see the other zone (a 10 mol% step biases a point
        # 1.5 sd away by 0.7 mol%, 3 sd away by 0.01 mol%): a biased line makes a spurious An
        # gradient at the boundary, which the fit takes for diffusion (docs/whole-crystal-model.md)
        sig_an = beam_sigma_um(an_beam_um, an_beam_shape)
        guard = (3.0 * sig_an, 2.0 * sig_an, 1.5 * sig_an)
        an_zones = AnZones(ax, av, pos, x_max, guard)
        if np.ptp(av) > 0 and ax.size >= 6:
            an_sd = max(_noise_sd(av), 0.3)
            an_data = (ax, av, np.full(ax.size, 1.0 / an_sd), an_beam_um, an_beam_shape)
        steps = an_zones.step_sizes()
        for k, s in enumerate(steps):
            if s < 1.0:
                warnings.append(f"B{k + 1} at {pos[k]:g} µm: An hardly steps there ({s:.2g} mol%); its position "
                                "is set by the dated elements alone")

    # ---- grid
    min_h = min(math.sqrt(v) for v in beam_var_all) if any(v > 0 for v in beam_var_all) else min(spacing_all)
    span = x_max
    h = cell_um if cell_um is not None else min(min(spacing_all) / 2.0, max(min_h / 2.0, span / 300.0))
    h = max(float(h), span / 600.0)
    pad = 0.1 * span + 4.0 * math.sqrt(max(beam_var_all + [0.0]))
    end = x_max + pad
    zgrid = ZoneGrid(pos, end, h)

    # position window
    if position_window_um is None:
        win = max(res_sd, 0.5 * min(spacing_all))
    else:
        win = float(position_window_um)
    gaps_um = np.diff(np.concatenate([[0.0], pos[::-1]]))
    win = min(win, 0.4 * float(np.min(gaps_um)), 0.4 * (end - pos[0]))

    # ranges of log10 time (days): from a profile a twentieth of a cell wide to one twice the traverse
    x_ref = None if an_zones is None else an_zones.x_ref
    d_all = [float(em.d_ref(t0, x_ref)) for em in elements]
    lo_t = math.log10((0.05 * h) ** 2 / UM2_PER_M2 / max(d_all) / SECONDS_PER_DAY)
    hi_t = math.log10((2.0 * span) ** 2 / UM2_PER_M2 / min(d_all) / SECONDS_PER_DAY)

    def make(els):
        return _Objective(zgrid, an_zones, an_data, els, t0, rim, pos, win, (lo_t, hi_t))

    n = pos.size
    rng = np.random.default_rng(int(seed) & (2**63 - 1))

    # ---- one fit per element (its own ages), then the joint fit
    def start_for(em):
        d = float(em.d_ref(t0, x_ref))
        t_res = em.res_var / (2.0 * d * UM2_PER_M2) / SECONDS_PER_DAY
        s = np.full(n, math.log10(max(t_res, 10.0 ** lo_t)) + 0.3)
        return np.concatenate([s, np.zeros(n if win > 0 else 0)])

    per_element = {}
    for em in elements:
        obj = make([em])
        x, chi2, r = _fit(obj, [start_for(em)])
        if not em.known_sd:
            # no precision given: weight this element by its own residual scatter (here and in the
            # joint fit); the An residuals keep the weight of An's own point-to-point scatter
            r_el = r[:em.y.size]
            s2 = float(r_el @ r_el) / max(em.y.size - (n + 1) - n, 1)
            em.weights = em.weights / math.sqrt(max(s2, 1e-300))
            obj = make([em])
            r = obj.residuals(x)
            chi2 = float(r @ r)
        per_element[em.element] = {"x": x, "chi2": chi2, "r": r, "obj": obj}

    if len(elements) > 1:
        joint = make(elements)
        starts = [pe["x"] for pe in per_element.values()]
        starts.append(np.mean(starts, axis=0))
        xj, chi2j, rj = _fit(joint, starts, coarse=False)
    else:
        joint = per_element[names[0]]["obj"]
        xj, chi2j, rj = per_element[names[0]]["x"], per_element[names[0]]["chi2"], per_element[names[0]]["r"]

    # ---- shared draws: temperature, law parameters, obliquity
    t_seed = int(seed) if temperature_seed is None else int(temperature_seed)
    z_t = shared_normals(t_seed, draws, "temperature")
    t_draw = np.maximum(t0 + t_sd * z_t, 1.0)
    factors = {}
    for em in elements:
        perturb = {}
        for pname, psd in (getattr(em.law, "parameter_sd", {}) or {}).items():
            if psd and np.isfinite(psd) and psd > 0:
                perturb[pname] = shared_normals(t_seed, draws, f"law {em.law.id} {pname}") * float(psd)
        d0 = float(em.d_ref(t0, x_ref))
        factors[em.element] = d0 / np.asarray(em.d_ref(t_draw, x_ref, perturb=perturb or None), float)
    if obliquity == "section":
        theta = section_obliquity_deg(int(seed), draws)
        obl_factor = np.cos(np.radians(theta)) ** 2
        obl_info = {"kind": "section default", "median_deg": float(np.median(theta))}
    elif obliquity is None:
        obl_factor = np.ones(draws)
        obl_info = None
    else:
        obl_factor = np.full(draws, math.cos(math.radians(float(obliquity))) ** 2)
        obl_info = {"kind": "measured", "deg": float(obliquity)}

    # ---- per-element summaries (own ages)
    def fit_draws(obj, x, cov, statements):
        vals, vecs = np.linalg.eigh(cov)
        z = rng.standard_normal((draws, x.size))
        xs = x + (z * np.sqrt(np.clip(vals, 0.0, None))) @ vecs.T
        lo_t, hi_t = obj.log_bounds
        for j, st in enumerate(statements):
            if st.get("lr_low") is not None:
                # stretch each side of the draws to at least the likelihood-ratio interval
                sd_m = math.sqrt(max(cov[j, j], 1e-300))
                dev = xs[:, j] - x[j]
                s_lo = max(1.0, (x[j] - st["lr_low"]) / (_Z975 * sd_m))
                s_hi = max(1.0, (st["lr_high"] - x[j]) / (_Z975 * sd_m))
                xs[:, j] = x[j] + np.where(dev < 0, dev * s_lo, dev * s_hi)
            # a time left open on one side: its draws stay on the side the data allow
            lo_j = lo_t if st["lower_x"] is None else st["lower_x"]
            hi_j = hi_t if st["upper_x"] is None else st["upper_x"]
            xs[:, j] = np.clip(xs[:, j], lo_j, hi_j)
        young = 10.0 ** xs[:, 0]
        gaps = 10.0 ** xs[:, 1:obj.n]
        return young, gaps, cov

    def ages_from(young, gaps, f_by_event):
        """Ages (draws, n) oldest first; each gap scaled by the factor of the event that opens it."""
        nn = gaps.shape[1] + 1
        g_scaled = gaps * f_by_event[:, :nn - 1]
        y_scaled = young * f_by_event[:, nn - 1]
        ages = np.empty((young.size, nn))
        ages[:, -1] = y_scaled
        for k in range(nn - 2, -1, -1):
            ages[:, k] = ages[:, k + 1] + g_scaled[:, k]
        return ages, g_scaled

    def bound_value(obj, x, j, xval, f_event, upper):
        """Age of event (param j) with param j at ``xval``, spread by the factors: 97.5 % / 2.5 %."""
        t = x.copy()
        t[j] = xval
        ages, _ = obj.unpack(t)
        k = obj.n - 1 if j == 0 else j - 1
        vals = ages[k] * f_event
        return float(np.percentile(vals, 97.5 if upper else 2.5))

    def gap_bound(x, j, xval, f_event, upper):
        vals = 10.0 ** xval * f_event
        return float(np.percentile(vals, 97.5 if upper else 2.5))

    def summarise(obj, x, chi2, r, known, f_event):
        """Event ages and gaps (summaries), the noise-only log sd of each age, and the age draws."""
        d_max = max(float(em.d_ref(t0, x_ref)) for em in obj.elements)
        res_var = min(em.res_var for em in obj.elements)
        s2 = 1.0
        if not known:
            dof = max(r.size - x.size, 1)
            s2 = max(chi2 / dof, 1e-300)
        cov, _, jac = _laplace(obj, x, r, known)
        # conditional sd of each time (the others held): the first secant step of the LR checks
        sd_c = np.sqrt(s2 / np.maximum(np.sum(jac * jac, axis=0), 1e-300))
        sts = _statements(obj, x, chi2, s2, res_var, d_max, sd_c=sd_c, min_contrast=min_melt_contrast)
        young, gaps, cov = fit_draws(obj, x, cov, sts)
        ages, g_scaled = ages_from(young, gaps, f_event * obl_factor[:, None])
        # event k's own time parameter: young for the last event, gap k for the others
        age_s, gap_s, info = [], [], []
        for k in range(obj.n):
            j = 0 if k == obj.n - 1 else k + 1
            st = sts[j]
            fk = f_event[:, k] * obl_factor
            if st["open_low"] and st["open_high"]:
                a = time_summary(statement="none")
                g = time_summary(statement="none")
            elif st["open_low"]:
                a = time_summary(statement="upper_bound", upper=bound_value(obj, x, j, st["upper_x"], fk, True))
                g = time_summary(statement="upper_bound", upper=gap_bound(x, j, st["upper_x"], fk, True))
            elif st["open_high"]:
                a = time_summary(statement="lower_bound", lower=bound_value(obj, x, j, st["lower_x"], fk, False))
                g = time_summary(statement="lower_bound", lower=gap_bound(x, j, st["lower_x"], fk, False))
            else:
                a = time_summary(ages[:, k])
                g = time_summary(g_scaled[:, k] if k < obj.n - 1 else ages[:, k])
            age_s.append(a)
            gap_s.append(g)
            sd_log = math.sqrt(max(cov[j, j], 0.0))
            info.append({"sd_log10_param": sd_log, "statement": a["statement"]})
        # an event whose own time (the gap it opens) is only bounded above still has its age between the
        # younger event's and that bound: ages are ordered, so P(t_k < a) <= P(t_k+1 < a) and the younger
        # event's 2.5 % point is one of this age too; with the 97.5 % bound it makes a 95 % interval
        for k in range(obj.n - 2, -1, -1):
            a, younger = age_s[k], age_s[k + 1]
            if (a["statement"] == "upper_bound" and younger["statement"] == "date" and a["upper_bound"] is not None
                    and younger["p2_5"] is not None and younger["p2_5"] < a["upper_bound"]):
                lo_k, hi_k = younger["p2_5"], a["upper_bound"]
                age_s[k] = {**a, "statement": "date", "median": float(np.clip(np.median(ages[:, k]), lo_k, hi_k)),
                            "p2_5": lo_k, "p97_5": hi_k, "interval_from": "younger event and upper bound"}
                info[k]["statement"] = "date from bounds"
        return age_s, gap_s[:-1], info, ages

    by_element = {}
    for em in elements:
        pe = per_element[em.element]
        f_ev = np.repeat(factors[em.element][:, None], n, axis=1)
        age_s, gap_s, info, ages = summarise(pe["obj"], pe["x"], pe["chi2"], pe["r"], True, f_ev)
        by_element[em.element] = {"ages": age_s, "gaps": gap_s, "info": info, "draws": ages}

    # ---- joint: each event's temperature factor is the information-weighted mean of the elements'
    if len(elements) > 1:
        f_joint = np.empty((draws, n))
        for k in range(n):
            wts = []
            for em in elements:
                inf = by_element[em.element]["info"][k]
                sdl = inf["sd_log10_param"]
                wts.append(0.0 if inf["statement"] != "date" or sdl <= 0 else 1.0 / sdl ** 2)
            wts = np.array(wts)
            if wts.sum() <= 0:
                wts = np.ones(len(elements))
            wts = wts / wts.sum()
            f_joint[:, k] = np.exp(sum(wk * np.log(factors[em.element]) for wk, em in zip(wts, elements)))
        age_j, gap_j, _, ages_j = summarise(joint, xj, chi2j, rj, True, f_joint)
    else:
        b = by_element[names[0]]
        age_j, gap_j, ages_j = b["ages"], b["gaps"], b["draws"]

    ages_fit, pos_fit = joint.unpack(xj)
    # the part of each age's log10 spread that every crystal of the sample shares (its temperature and
    # law-parameter draws): population events compare crystals with the rest and add this part back
    f_shared = f_joint if len(elements) > 1 else factors[names[0]][:, None].repeat(n, axis=1)
    record_b = []
    for k in range(n):
        per = {el: by_element[el]["ages"][k] for el in names}
        conc = _concordance({el: (per[el], by_element[el]["draws"][:, k]) for el in names})
        record_b.append({"id": f"B{k + 1}", "position_um": float(pos[k]), "fitted_position_um": float(pos_fit[k]),
                         "age_days": age_j[k], "by_element": per, "concordance": conc,
                         "shared_sd_log10": float(np.std(np.log10(f_shared[:, k])))})
        if conc["status"] == "discordant":
            from zoneprofile.diffusion._checks import _growth_reasons

            warnings.append(f"B{k + 1}: growth or diffusion? the elements' ages disagree beyond their combined "
                            f"95 % intervals; {_growth_reasons()}")
    gaps_rec = [{"older": f"B{k + 1}", "younger": f"B{k + 2}", "days": gap_j[k]} for k in range(n - 1)]
    record = {
        "boundaries": record_b, "gaps": gaps_rec, "elements": names, "temperature_c": t0,
        "temperature_sd_c": t_sd, "n_draws": draws, "warnings": warnings, "method": "whole-crystal",
        "rim": rim, "obliquity": obl_info, "position_window_um": win, "cell_um": h, "grid_cells": zgrid.n,
        "chi2": chi2j, "n_points": int(rj.size),
        "best_ages_days_at_nominal_temperature": [float(a) for a in ages_fit],
        # the best joint fit drawn by the figures (5 significant digits: far below any analytical precision)
        "curves": {el: {k: [float(f"{v:.5g}") for v in arr] for k, arr in c.items()}
                   for el, c in joint.curves(xj).items()},
        "laws": {em.element: em.law.id for em in elements},
        "uncertainty": "Laplace approximation (Gauss–Newton covariance) in log10 youngest age, log10 gaps and "
                       "positions; temperature, law parameters and section obliquity by shared draws",
        "timing_s": None,
    }
    record["timing_s"] = _time.perf_counter() - t_start
    return CrystalResult(record=record, joint_x=xj, objective=joint, age_draws_days=ages_j, per_element=per_element,
                         by_element_draws={el: by_element[el]["draws"] for el in names})


from zoneprofile.diffusion._checks import CONCORDANCE_REASONS as _REASONS  # noqa: E402 - shared with fit


def _concordance(per):
    """Concordance of the elements' own ages at one boundary (paired draws share temperature and obliquity)."""
    dated = {el: (s, d) for el, (s, d) in per.items()}
    if len(dated) < 2:
        return {"status": "one element", "reasons": []}
    els = list(dated)
    discord = []
    for i in range(len(els)):
        for j in range(i + 1, len(els)):
            (sa, da), (sb, db) = dated[els[i]], dated[els[j]]
            bad = False
            if sa.get("interval_from") or sb.get("interval_from"):
                # an interval made of bounds has no draws of its own: the intervals must overlap
                bad = sa["statement"] == sb["statement"] == "date" and (sa["p2_5"] > sb["p97_5"]
                                                                        or sb["p2_5"] > sa["p97_5"])
                if sa["statement"] != "date" or sb["statement"] != "date":
                    for s1, s2 in ((sa, sb), (sb, sa)):
                        if s1["statement"] == "date" and s2["statement"] == "upper_bound" and s2["upper_bound"]:
                            bad = bad or s1["p2_5"] > s2["upper_bound"]
                        if s1["statement"] == "date" and s2["statement"] == "lower_bound" and s2["lower_bound"]:
                            bad = bad or s1["p97_5"] < s2["lower_bound"]
            elif sa["statement"] == "date" and sb["statement"] == "date":
                ratio = np.log(np.asarray(da, float) / np.asarray(db, float))
                ratio = ratio[np.isfinite(ratio)]
                if ratio.size:
                    lo, hi = np.percentile(ratio, [2.5, 97.5])
                    bad = lo > 0 or hi < 0
            else:
                for s1, s2 in ((sa, sb), (sb, sa)):
                    if s1["statement"] == "date" and s2["statement"] == "upper_bound" and s2["upper_bound"]:
                        bad = bad or s1["p2_5"] > s2["upper_bound"]
                    if s1["statement"] == "date" and s2["statement"] == "lower_bound" and s2["lower_bound"]:
                        bad = bad or s1["p97_5"] < s2["lower_bound"]
            if bad:
                discord.append(f"{els[i]} and {els[j]}")
    if not discord:
        return {"status": "concordant", "reasons": []}
    return {"status": "discordant", "reasons": [f"ages of {', '.join(discord)} disagree"] + list(_REASONS)}
