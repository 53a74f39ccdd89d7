"""The optimisers of a boundary fit: coarse search, variable projection, least squares.

Shared by :mod:`~zoneprofile.diffusion.fitting`, the An-coupled tie
(:mod:`~zoneprofile.diffusion._an`) and the uncertainty refits
(:mod:`~zoneprofile.diffusion.uncertainty`), all of which import from here and
never the other way round. The models they take provide ``predict(theta)``
and, when linear in the values, ``basis_predictions``/``basis_predictions_batch``
and ``basis_jacobian_batch`` (:mod:`~zoneprofile.diffusion._problem`).
"""

from __future__ import annotations

import warnings as _warnings
from dataclasses import dataclass

import numpy as np

__all__ = []


def _coarse_start(model, y, weights, log_bounds, b_bounds, b_start, fixed_b):
    """Grid search over (log10 D·t, boundary), values by linear least squares."""
    logs = np.linspace(log_bounds[0] + 0.2, log_bounds[1] - 0.2, 25)
    if fixed_b:
        bs = [b_start]
    else:
        bs = np.unique(np.concatenate([np.linspace(b_bounds[0], b_bounds[1], 7), [b_start]]))
    if hasattr(model, "expect_evaluations"):
        model.expect_evaluations(logs.size * len(bs))
    best = (np.inf, None)
    yw = y * weights
    for b in bs:
        basis = model.basis_predictions_batch(logs, b) * weights  # (k, R, n)
        design = np.transpose(basis, (1, 2, 0))  # (R, n, k)
        sol = _lstsq_many(design, np.broadcast_to(yw, (logs.size, yw.size)))
        r = (design @ sol[:, :, None])[:, :, 0] - yw
        cost = np.sum(r * r, axis=1)
        i = int(np.argmin(cost))  # first of equal costs, as a scan in order of log10 D·t would keep
        if cost[i] < best[0]:
            best = (float(cost[i]), [logs[i], b, *sol[i]])
    return best[1]


def _lstsq_many(design, rhs):
    """Least-squares solutions of a stack of small problems: ``design`` (R, n, k), ``rhs`` (R, n) -> (R, k).

    Minimum-norm solutions through the SVD (as :func:`numpy.linalg.lstsq`), with
    singular values below ``eps·max(n, k)·s_max`` treated as zero.
    """
    u, sv, vt = np.linalg.svd(design, full_matrices=False)
    cut = np.finfo(float).eps * max(design.shape[1:]) * sv[:, :1]
    inv = np.where(sv > cut, 1.0 / np.where(sv > cut, sv, 1.0), 0.0)
    uty = (np.transpose(u, (0, 2, 1)) @ rhs[:, :, None])[:, :, 0]
    return (np.transpose(vt, (0, 2, 1)) @ (inv * uty)[:, :, None])[:, :, 0]


def _projected_fit(model, ys, weights, start, lower, upper, vary, *, max_iter=60):
    """Variable-projection fits of a linear-in-values model to the rows of ``ys`` at once.

    Only log10 D·t (and the boundary, when ``vary[1]``) are iterated; the values
    are the linear least-squares solution at every step (Golub & Pereyra 1973).
    The iteration is Levenberg–Marquardt on the projected residual with
    Kaufman's (1975) Jacobian ``(I − P_A)·(∂A/∂p)·v`` from the analytic
    derivatives of the model, inside the bounds (steps are clipped to them).
    It stops when a step changes the parameters by less than ``1e-6·(1 + |p|)``
    or the sum of squares by less than 1e-10 of itself.

    ``ys`` (R, n); returns the parameter vectors (R, len(start)) and the
    weighted sums of squares (R,).
    """
    ys = np.atleast_2d(np.asarray(ys, float))
    n_rows = ys.shape[0]
    free = [0] + ([1] if vary[1] else [])
    q = len(free)
    lo = np.asarray(lower, float)[free]
    hi = np.asarray(upper, float)[free]
    theta0 = np.array(start, float)
    p = np.tile(np.clip(theta0[free], lo, hi), (n_rows, 1))
    yw = ys * weights

    def evaluate(pp, rows):
        """values, sums of squares, gradient and Gauss–Newton matrix at pp (len(rows), q)."""
        if q == 1 or np.ptp(pp[:, 1]) == 0:
            b = theta0[1] if q == 1 else pp[0, 1]
            a, da, db = model.basis_jacobian_batch(pp[:, 0], b, wrt_boundary=q == 2)
            derivs = [da] + ([db] if q == 2 else [])
        else:
            parts = [model.basis_jacobian_batch([pr[0]], pr[1], wrt_boundary=True) for pr in pp]
            a = np.concatenate([pt[0] for pt in parts], axis=1)
            derivs = [np.concatenate([pt[j] for pt in parts], axis=1) for j in (1, 2)]
        # (k, r, n) -> (r, n, k), weighted
        design = np.transpose(a, (1, 2, 0)) * weights[None, :, None]
        y_r = yw[rows]
        u, sv, vt = np.linalg.svd(design, full_matrices=False)
        cut = np.finfo(float).eps * max(design.shape[1:]) * sv[:, :1]
        keep = sv > cut
        inv = np.where(keep, 1.0 / np.where(keep, sv, 1.0), 0.0)
        uk = u * keep[:, None, :]
        uty = (np.transpose(u, (0, 2, 1)) @ y_r[:, :, None])[:, :, 0]
        v = (np.transpose(vt, (0, 2, 1)) @ (inv * uty)[:, :, None])[:, :, 0]  # (r, k)
        resid = (design @ v[:, :, None])[:, :, 0] - y_r
        cost = np.sum(resid * resid, axis=1)
        jac = np.empty((len(rows), y_r.shape[1], q))
        for j, d in enumerate(derivs):
            g = np.sum(d * v.T[:, :, None], axis=0) * weights[None, :]  # (r, n): (∂A/∂p_j) v
            proj = (uk @ (np.transpose(uk, (0, 2, 1)) @ g[:, :, None]))[:, :, 0]
            jac[:, :, j] = g - proj
        grad = (np.transpose(jac, (0, 2, 1)) @ resid[:, :, None])[:, :, 0]  # = ((∂A/∂p) v)ᵀ r, r ⟂ range(A)
        hess = np.transpose(jac, (0, 2, 1)) @ jac
        return v, cost, grad, hess

    rows = np.arange(n_rows)
    values, cost, grad, hess = evaluate(p, rows)
    mu = np.full(n_rows, 1e-3)
    active = np.ones(n_rows, bool)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        # a parameter held at a bound by a gradient pointing outward takes no part in the step
        g = grad[idx].copy()
        held = ((p[idx] <= lo) & (g > 0)) | ((p[idx] >= hi) & (g < 0))
        g[held] = 0.0
        h = hess[idx] * ~(held[:, :, None] | held[:, None, :])
        diag = np.einsum("rii->ri", h)
        scale = np.where(held, 1.0, np.maximum(diag, 1e-300))
        lhs = h + (mu[idx, None, None] * np.eye(q)[None] + held[:, :, None] * np.eye(q)[None]) * scale[:, :, None]
        try:
            step = -np.linalg.solve(lhs, g[:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            step = -g / scale
        trial = np.clip(p[idx] + step, lo, hi)
        moved = np.max(np.abs(trial - p[idx]), axis=1)
        v_t, c_t, g_t, h_t = evaluate(trial, idx)
        better = c_t < cost[idx]
        acc = idx[better]
        p[acc], values[acc], cost_old = trial[better], v_t[better], cost[acc]
        cost[acc], grad[acc], hess[acc] = c_t[better], g_t[better], h_t[better]
        mu[acc] = np.maximum(mu[acc] / 4.0, 1e-9)
        mu[idx[~better]] *= 8.0
        done = np.zeros(n_rows, bool)
        # no step left (converged, or held at a bound): the iteration converges linearly with a
        # ratio of a few per cent, so after a step below 1e-6·(1 + |p|) the parameters are within
        # ~1e-7 of the optimum (log10 D·t: a 2e-7 relative change of time)
        done[idx[moved <= 1e-6 * (1.0 + np.max(np.abs(p[idx]), axis=1))]] = True
        done[acc[(cost_old - cost[acc]) <= 1e-10 * cost_old]] = True
        done[idx[~better][mu[idx[~better]] > 1e12]] = True
        active &= ~done
    thetas = np.tile(theta0, (n_rows, 1))
    thetas[:, free] = p
    thetas[:, 2:] = values
    return thetas, cost


def _refit_projected(model, y, weights, start, lower, upper, vary):
    """Refit of a linear-in-values model by variable projection (fast refits).

    Only log10 D·t (and the boundary, when it varies) are iterated; the two values
    are solved by linear least squares at every step. Returns the full parameter
    vector.
    """
    thetas, _ = _projected_fit(model, y[None, :], weights, start, lower, upper, vary)
    return thetas[0]


class _ResidualAndJacobian:
    """Weighted residual and forward-difference Jacobian of a non-linear model, evaluated together.

    :func:`scipy.optimize.least_squares` (``trf``) asks for the Jacobian at
    nearly every point where it evaluated the residual (each accepted step).
    Here the residual's parameter set and its forward-difference neighbours
    (the steps ``jac='2-point'`` would take,
    :meth:`~zoneprofile.diffusion._problem.NonlinearModel.jacobian_fd`) are
    integrated side by side in one call, and the Jacobian is kept for when it
    is asked for: the same numbers as the separate evaluations, for about the
    cost of two single integrations instead of ``1 + p``. ``free``: indices of
    the varying parameters; ``lower``/``upper``: their bounds. Both methods
    take the full parameter vector.
    """

    def __init__(self, model, y, weights, free, lower, upper):
        self.model, self.y, self.weights = model, y, weights
        self.free = np.asarray(free, int)
        self.lower, self.upper = np.asarray(lower, float), np.asarray(upper, float)
        self._theta = self._resid = self._jac = None

    def _evaluate(self, theta):
        if self._theta is None or not np.array_equal(self._theta, theta):
            res = self.model.jacobian_fd(theta, self.free, self.y, self.weights, self.lower, self.upper,
                                         with_residual=True)
            self._theta = theta.copy()
            self._jac, self._resid = res

    def residual(self, theta):
        theta = np.array(theta, float)
        self._evaluate(theta)
        return self._resid.copy()

    def jacobian(self, theta):
        theta = np.array(theta, float)
        self._evaluate(theta)
        return self._jac.copy(order="K")


def _least_squares(model, y, weights, start, lower, upper, *, max_nfev=400):
    from scipy.optimize import least_squares

    x0 = np.clip(start, lower + 1e-9 * (upper - lower), upper - 1e-9 * (upper - lower))
    resid, jac = (lambda theta: (model.predict(theta) - y) * weights), "2-point"
    if hasattr(model, "jacobian_fd"):
        paired = _ResidualAndJacobian(model, y, weights, np.arange(x0.size), lower, upper)
        resid, jac = paired.residual, paired.jacobian
    sol = least_squares(resid, x0, jac=jac, bounds=(lower, upper), x_scale="jac", max_nfev=max_nfev)
    return sol.x, sol


@dataclass(frozen=True)
class BestFit:
    """The confirmed optimum of a boundary fit and the covariance of its varying parameters.

    ``theta``: every parameter (fixed ones at their start); ``vary``: which of
    them were fitted; ``covar``: covariance of the varying ones, ``inv(JᵀJ)·χ²/(n − p)``
    (None when ``JᵀJ`` is singular); ``stderr``: per parameter, the square root
    of its covariance diagonal, 0 for a fixed one, None for all when there is
    no covariance; ``chi2`` and ``redchi`` at ``theta``.
    """

    names: tuple
    theta: np.ndarray
    vary: np.ndarray
    covar: np.ndarray | None
    stderr: tuple
    chi2: float
    redchi: float
    nfev: int
    success: bool
    message: str

    @property
    def var_names(self) -> list:
        return [n for n, v in zip(self.names, self.vary) if v]


def _confirm_fit(model, y, weights, names, start, lower, upper, vary) -> BestFit:
    """Least squares from a good start, bounds honoured, with the covariance of the varying parameters.

    :func:`scipy.optimize.least_squares` (trust-region reflective, tolerances
    1e-8, ``x_scale`` 1) on the varying parameters, the others held at their
    start; the start is clipped into the bounds. Models that are not linear in
    the values (no projection) give the forward-difference Jacobian that
    ``jac='2-point'`` would take, integrated side by side with the residual
    (:class:`_ResidualAndJacobian`).

    The covariance is the Gauss–Newton one, ``C = (JᵀJ)⁻¹ · χ²/(n − p)``, with J
    the Jacobian at the solution (the one ``least_squares`` returns) and the
    reduced χ² of the weighted residuals (n points, p varying parameters; the
    scaling makes it hold when the weights are only relative) — the convention
    of lmfit's ``least_squares`` method (``scale_covar=True``), which
    tests/diffusion/test_confirm_fit.py checks number for number.
    """
    from scipy.optimize import least_squares

    names = tuple(names)
    lower = np.asarray(lower, float)
    upper = np.asarray(upper, float)
    vary = np.asarray(vary, bool)
    theta0 = np.array([float(np.clip(v, lo, hi)) for v, lo, hi in zip(start, lower, upper)])
    free = np.flatnonzero(vary)
    p = free.size

    def full(x):
        theta = theta0.copy()
        theta[free] = x
        return theta

    if hasattr(model, "jacobian_fd"):
        # not linear in the values (no projection): the forward-difference Jacobian that
        # least_squares would take, its parameter sets integrated side by side with the residual
        paired = _ResidualAndJacobian(model, y, weights, free, lower[free], upper[free])

        def resid(x):
            return paired.residual(full(x))

        def jac(x):
            return paired.jacobian(full(x))
    else:
        def resid(x):
            return (model.predict(full(x)) - y) * weights

        jac = "2-point"
    with _warnings.catch_warnings():
        _warnings.simplefilter("ignore")
        sol = least_squares(resid, theta0[free], jac=jac, bounds=(lower[free], upper[free]), method="trf",
                            max_nfev=2000 * (p + 1))
    theta = full(sol.x)
    r = resid(sol.x)
    chi2 = float(np.sum(r * r))
    redchi = chi2 / max(1, r.size - p)
    covar = None
    stderr = (None,) * len(names)
    try:
        covar = np.linalg.inv(sol.jac.T @ sol.jac) * redchi
    except np.linalg.LinAlgError:
        pass
    else:
        errs = np.zeros(len(names))
        with np.errstate(invalid="ignore"):  # a negative diagonal (numerically singular): NaN, as lmfit gives
            errs[free] = np.sqrt(np.diag(covar))
        stderr = tuple(float(e) for e in errs)
    return BestFit(names=names, theta=theta, vary=vary, covar=covar, stderr=stderr, chi2=chi2, redchi=redchi,
                   nfev=int(sol.nfev), success=bool(sol.success), message=str(sol.message))


def _profile_upper_log10_dt(model, y, weights, best, chi2, s2, log_hi, level=3.84):
    """Largest log10 D·t with Δχ² ≤ ``level`` (values refitted; profile likelihood, 95 %).

    Linear-in-values models only (None otherwise); the upper bound reported for a
    boundary that is not resolved.
    """
    if not hasattr(model, "basis_predictions"):
        return None
    from scipy.optimize import brentq

    def excess(lg):
        basis = model.basis_predictions(lg, best[1]) * weights[None, :]
        v, *_ = np.linalg.lstsq(basis.T, y * weights, rcond=None)
        r = basis.T @ v - y * weights
        return float((r @ r - chi2) / s2) - level

    lo = float(best[0])
    hi = lo
    while hi < log_hi:
        hi = min(hi + 0.25, log_hi)
        if excess(hi) > 0:
            return float(brentq(excess, max(lo, hi - 0.25), hi, xtol=1e-3))
    return float(log_hi)
