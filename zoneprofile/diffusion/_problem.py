"""The set-up of one boundary fit: data, grid, law, coupling, and models per temperature.

Private: :mod:`zoneprofile.diffusion.fitting` builds a :class:`Problem` and asks
it for a model at a temperature; a model maps the fitted parameter vector
``[log10_dt_m2, boundary_um, value_outer, value_inner]`` to what the spots at
the data positions would report.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from zoneprofile.diffusion.grid import Grid
from zoneprofile.diffusion.initial import MeltEquilibriumInitial, StepInitial
from zoneprofile.diffusion.laws import R_J_MOL_K
from zoneprofile.diffusion.resolution import beam_matrix
from zoneprofile.diffusion.solver import LinearDiffusion, evolve_nonlinear

UM2_PER_M2 = 1e12


@dataclass
class Problem:
    """Everything fixed during a fit except the temperature (SI for D, µm for space)."""

    element: str
    mineral: str
    law: object
    grid: Grid
    x_um: np.ndarray  # data positions
    y: np.ndarray  # data values
    sigma: np.ndarray | None  # 1-sigma per point, or None
    beam_um: float | None
    beam_shape: str
    rim: str  # 'open' or 'closed' at the first face
    value_names: tuple
    coupling: str | None = None  # 'an' for plagioclase trace elements
    x_an_cells: np.ndarray | None = None
    partition_model: str | None = None
    partition_ab: tuple | None = None  # (A, B) J/mol
    nonlinear: bool = False
    law_kwargs: dict = field(default_factory=dict)  # fo2_pa, pressure_pa, direction, x_fe (const)
    reference: dict = field(default_factory=dict)  # composition at which D_ref is taken
    _B: np.ndarray | None = None

    @property
    def data_matrix(self):
        if self._B is None:
            self._B = beam_matrix(self.grid, self.x_um, beam_um=self.beam_um, shape=self.beam_shape)
        return self._B

    # ------------------------------------------------------------------ D
    def law_composition(self, **over):
        comp = dict(self.law_kwargs)
        comp.update(over)
        return {k: v for k, v in comp.items() if v is not None}

    def d_ref(self, temperature_c, perturb=None):
        """D (m²/s) at the reference composition; broadcasts over temperatures/draws."""
        comp = self.law_composition(**self.reference)
        return self.law.d_m2_s(temperature_c, perturb=perturb, **comp)

    def shape_depends_on_temperature(self) -> bool:
        if self.coupling == "an" and self.partition_ab is not None and self.partition_ab[0] != 0:
            return True
        return not bool(getattr(self.law, "temperature_separable", True))

    def model(self, temperature_c, evaluator="auto"):
        """The model at one temperature; ``evaluator`` only for the linear model (see :class:`LinearModel`)."""
        if self.nonlinear:
            return NonlinearModel(self, temperature_c)
        return LinearModel(self, temperature_c, evaluator=evaluator)


_LN10 = float(np.log(10.0))
#: modes with λτ above this have decayed below e^-50 and are skipped
_DECAYED = 50.0


class LinearModel:
    """The linear (spectral or rational) model at one temperature.

    Predictions are linear in the values: ``predict(θ) = Σ_k v_k·A_k(log10 D·t,
    boundary)`` with ``A_k`` the prediction for a unit value ``k`` (the held rim
    value of an open rim is linear in the values too). Two evaluators of the
    same operator (:class:`~zoneprofile.diffusion.solver.LinearDiffusion`):

    - ``'spectral'``: one eigendecomposition, then every evaluation is two small
      matrix products (the spectral coefficients of each unit initial profile
      are kept for the last boundary position asked for);
    - ``'rational'``: no decomposition; seven complex tridiagonal solves per
      time (the right choice for a model asked for a handful of times: a refit
      at another temperature or at a trial boundary position);
    - ``'auto'`` (default): rational until the evaluations asked for would cost
      more than one decomposition, spectral from then on.

    Both are exact in time (they agree to ~1e-12); derivatives with respect to
    log10 D·t are analytic (``d e^{-τK}/dτ = −K e^{-τK}``), with respect to the
    boundary exact for the cell-averaged step (piecewise linear in the position).
    """

    #: rational evaluations (one time each) worth about one eigendecomposition
    AUTO_LIMIT = 48

    def __init__(self, problem: Problem, temperature_c: float, evaluator: str = "auto"):
        if evaluator not in ("auto", "spectral", "rational"):
            raise ValueError(f"evaluator must be 'auto', 'spectral' or 'rational', got {evaluator!r}")
        p = problem
        self.problem = p
        grid = p.grid
        t_k = float(temperature_c) + 273.15
        d_ref = float(p.d_ref(temperature_c))
        if p.x_an_cells is not None and ("x_an" in getattr(p.law, "needs", ()) or p.coupling == "an"):
            d = p.law.d_m2_s(temperature_c, **p.law_composition(x_an=p.x_an_cells))
        else:
            comp = p.law_composition(**p.reference)
            d = np.full(grid.n, float(p.law.d_m2_s(temperature_c, **comp)))
        d_rel = np.broadcast_to(np.asarray(d, float) / d_ref, (grid.n,))
        if p.coupling == "an":
            a_j, b_j = p.partition_ab
            w = np.exp(a_j * (p.x_an_cells - p.x_an_cells.mean()) / (R_J_MOL_K * t_k))
            k_cells = np.exp((a_j * p.x_an_cells + b_j) / (R_J_MOL_K * t_k))
            self.initial = MeltEquilibriumInitial(k_cells, k_cells[0], value_names=p.value_names)
        else:
            w = None
            self.initial = StepInitial(value_names=p.value_names)
        self.temperature_c = float(temperature_c)
        self.d_ref_m2_s = d_ref
        self.operator = LinearDiffusion(grid, d_rel, weight=w, rim=p.rim, core="closed")
        self._B = p.data_matrix
        self._rim_basis = self.initial.rim_basis(grid)
        n_values = self._rim_basis.size
        # steady state of each unit value: an open rim holds its value, which then fills the crystal
        css = np.zeros((n_values, grid.n))
        if p.rim == "open":
            for k in range(n_values):
                state = self.operator.steady_state(float(self._rim_basis[k]))
                if state is not None:
                    css[k] = state
        self._css = css
        self._css_pred = css @ self._B.T  # (n_values, n_points)
        self._evaluator = evaluator
        self._n_rational = 0
        self._p_out = None
        self._coef_cache = (None, None)
        self._coef_basis, self._coef_updates = None, 0

    # ------------------------------------------------------------------ evaluator choice
    @property
    def spectral(self) -> bool:
        """Whether evaluations go through the eigendecomposition."""
        return self._p_out is not None

    def expect_evaluations(self, count):
        """Tell the model ``count`` evaluations (times) are coming; decides the evaluator for 'auto'."""
        if self._p_out is not None or self._evaluator == "rational":
            return
        if self._evaluator == "spectral" or self._n_rational + int(count) > self.AUTO_LIMIT:
            self._p_out = self._B @ self.operator._out
        else:
            self._n_rational += int(count)

    def _dc(self, boundary):
        """Unit initial profiles minus their steady states, shape (n_values, N)."""
        return self.initial.basis(self.problem.grid, boundary) - self._css

    #: full products between incremental updates of the spectral coefficients (bounds rounding drift)
    _COEF_REFRESH = 256

    def _coef(self, boundary):
        """Spectral coefficients of the unit initial profiles, shape (n_values, N).

        A moved boundary changes the basis in the few cells between the old and the
        new position only, so the coefficients are updated from those cells
        (O(N · cells)) instead of the full product (O(N²)); a full product every
        ``_COEF_REFRESH`` updates keeps the sum's rounding at machine precision.
        """
        b = float(boundary)
        cached_b, coef = self._coef_cache
        if cached_b == b:
            return coef
        basis = self.initial.basis(self.problem.grid, b)
        m_in = self.operator._in
        if cached_b is not None and self._coef_updates < self._COEF_REFRESH:
            delta = basis - self._coef_basis
            cells = np.flatnonzero(np.any(delta != 0.0, axis=0))
            if 8 * cells.size <= basis.shape[1]:
                coef = coef + delta[:, cells] @ m_in[:, cells].T
                self._coef_updates += 1
                self._coef_basis, self._coef_cache = basis, (b, coef)
                return coef
        coef = (basis - self._css) @ m_in.T
        self._coef_updates = 0
        self._coef_basis, self._coef_cache = basis, (b, coef)
        return coef

    def _dbasis(self, boundary):
        """d(unit initial profiles)/d(boundary): (n_values, N), nonzero in the cut cell only."""
        return self.initial.basis_derivative(self.problem.grid, boundary)

    # ------------------------------------------------------------------ evaluations
    def basis_jacobian_batch(self, log10_dts, boundary, *, wrt_boundary=False, derivatives=True):
        """Predictions for unit values at several log10 D·t (one boundary) and their derivatives.

        Returns ``(A, dA_dlog, dA_dboundary)``, each of shape (n_values, R, n_points)
        (``dA_dlog`` None unless ``derivatives``; ``dA_dboundary`` None unless
        ``wrt_boundary``).
        """
        logs = np.atleast_1d(np.asarray(log10_dts, float))
        tau = 10.0 ** logs * UM2_PER_M2
        self.expect_evaluations(logs.size)
        if self._p_out is not None:
            lam = self.operator.eigenvalues
            tmin = float(np.min(tau))
            m = lam.size if tmin <= 0 else max(int(np.searchsorted(lam, _DECAYED / tmin)), 1)
            lam_m = lam[:m]
            decay = np.exp(-lam_m[:, None] * tau[None, :])  # (m, R)
            p_out_t = self._p_out[:, :m].T  # (m, n)
            coef = self._coef(boundary)[:, :m]
            amp = decay[None, :, :] * coef[:, :, None]  # (k, m, R)
            a = self._css_pred[:, None, :] + np.transpose(amp, (0, 2, 1)) @ p_out_t  # (k, R, n)
            da = db = None
            if derivatives:
                da = np.transpose(amp * lam_m[None, :, None], (0, 2, 1)) @ p_out_t
                da *= -(_LN10 * tau)[None, :, None]
            if wrt_boundary:
                dbasis = self._dbasis(boundary)
                cells = np.flatnonzero(np.any(dbasis != 0.0, axis=0))
                dcoef = dbasis[:, cells] @ self.operator._in[:m, cells].T  # (k, m)
                db = np.transpose(decay[None, :, :] * dcoef[:, :, None], (0, 2, 1)) @ p_out_t
            return a, da, db
        op = self.operator
        x = (op._to_sym * self._dc(boundary)).T  # (N, k)
        n_k = x.shape[1]
        if wrt_boundary:
            x = np.hstack([x, (op._to_sym * self._dbasis(boundary)).T])
        bw = self._B * op._from_sym[None, :]
        a = np.empty((n_k, logs.size, self._B.shape[0]))
        da = np.empty_like(a) if derivatives else None
        db = np.empty_like(a) if wrt_boundary else None
        for r, t in enumerate(tau):
            v = op.decay_rational(x, t)
            pred = bw @ v  # (n_points, k [+ k])
            a[:, r, :] = self._css_pred + pred[:, :n_k].T
            if derivatives:
                da[:, r, :] = -(_LN10 * t) * (bw @ op.apply_k(v[:, :n_k])).T
            if wrt_boundary:
                db[:, r, :] = pred[:, n_k:].T
        return a, da, db

    def basis_predictions_batch(self, log10_dts, boundary):
        """Predictions for unit values at several log10 D·t: shape (n_values, R, n_points)."""
        return self.basis_jacobian_batch(log10_dts, boundary, derivatives=False)[0]

    def basis_predictions(self, log10_dt, boundary):
        """Predictions for unit values, shape (n_values, n_points) (linear in the values)."""
        return self.basis_jacobian_batch([log10_dt], boundary, derivatives=False)[0][:, 0, :]

    def basis_jacobian(self, log10_dt, boundary, *, wrt_boundary=False):
        """``(A, dA/dlog10 D·t, dA/dboundary or None)``, each (n_values, n_points)."""
        a, da, db = self.basis_jacobian_batch([log10_dt], boundary, wrt_boundary=wrt_boundary)
        return a[:, 0, :], da[:, 0, :], None if db is None else db[:, 0, :]

    def predict(self, theta):
        log10_dt, boundary, *values = theta
        return np.asarray(values, float) @ self.basis_predictions(log10_dt, boundary)

    def _rim(self, values):
        return float(np.dot(values, self._rim_basis)) if self.problem.rim == "open" else None

    def cells(self, theta):
        log10_dt, boundary, *values = theta
        values = np.asarray(values, float)
        c0 = values @ self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        method = "spectral" if self._p_out is not None else "rational"
        return self.operator.evolve(c0, tau, rim_value=self._rim(values), method=method), c0

    def cells_many(self, thetas):
        """Cell values for several parameter sets, shape (R, N) (one product for a shared boundary)."""
        thetas = np.asarray(thetas, float)
        if self._p_out is None or np.ptp(thetas[:, 1]) > 0:
            return np.array([self.cells(th)[0] for th in thetas])
        lam = self.operator.eigenvalues
        tau = 10.0 ** thetas[:, 0] * UM2_PER_M2
        coef = self._coef(thetas[0, 1])  # (k, N)
        values = thetas[:, 2:]  # (R, k)
        amp = np.exp(-lam[:, None] * tau[None, :]) * (coef.T @ values.T)  # (N, R)
        return (self.operator._out @ amp).T + values @ self._css


class NonlinearModel:
    """Implicit stepping for D depending on the diffusing quantity (Fo in olivine).

    The solution is not linear in the values, so there is no variable
    projection here; what makes the fit affordable is that several parameter
    sets are integrated side by side (:meth:`cells_many`, one stacked
    tridiagonal solve per Picard iteration, see
    :func:`~zoneprofile.diffusion.solver.evolve_nonlinear`): the finite-difference
    Jacobian of a fit (:meth:`jacobian_fd`) and the band of model curves cost
    about what two or three single evaluations cost.
    """

    def __init__(self, problem: Problem, temperature_c: float):
        p = problem
        self.problem = p
        self.temperature_c = float(temperature_c)
        self.d_ref_m2_s = float(p.d_ref(temperature_c))
        self.initial = StepInitial(value_names=p.value_names)
        # tabulate log10 D(Fo)/D_ref once; Fo in mol%, X_Fe = 1 - Fo/100
        fo = np.linspace(0.0, 100.0, 2001)
        comp = p.law_composition(x_fe=np.clip(1.0 - fo / 100.0, 0.0, 1.0))
        self._fo = fo
        self._log_rel = np.log10(p.law.d_m2_s(temperature_c, **comp) / self.d_ref_m2_s)
        self._B = p.data_matrix

    def d_rel(self, fo):
        return 10.0 ** np.interp(fo, self._fo, self._log_rel)

    def cells(self, theta):
        log10_dt, boundary, *values = theta
        values = np.asarray(values, float)
        c0 = values @ self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        rim = float(values[0]) if self.problem.rim == "open" else None
        return evolve_nonlinear(self.problem.grid, c0, tau, self.d_rel, rim=self.problem.rim, rim_value=rim), c0

    def cells_many(self, thetas):
        """Cell values for several parameter sets, shape (R, N), integrated side by side.

        Each row is what :meth:`cells` gives for it (the same arithmetic).
        """
        thetas = np.atleast_2d(np.asarray(thetas, float))
        grid = self.problem.grid
        c0 = np.array([th[2:] @ self.initial.basis(grid, th[1]) for th in thetas])  # (R, N)
        # one scalar power per row, as in :meth:`cells` (numpy's array power may differ in the last bit)
        tau = np.array([10.0 ** th[0] * UM2_PER_M2 for th in thetas])
        rim = thetas[:, 2].copy() if self.problem.rim == "open" else None
        return evolve_nonlinear(grid, c0.T, tau, self.d_rel, rim=self.problem.rim, rim_value=rim).T

    def predict(self, theta):
        return self._B @ self.cells(theta)[0]

    def predict_many(self, thetas):
        """Predictions at the data positions for several parameter sets, shape (R, n_points)."""
        # one product per row, as :meth:`predict` does (a matrix-matrix product sums in another
        # order, and forward differences magnify a 1e-14 difference to ~1e-6)
        return np.array([self._B @ c for c in self.cells_many(thetas)])

    def jacobian_fd(self, theta, free, y, weights, lower, upper, f0=None, with_residual=False):
        """Forward-difference Jacobian of the weighted residual ``(predict − y)·weights``.

        The steps are those of :func:`scipy.optimize.least_squares` with
        ``jac='2-point'`` (relative step √ε·max(1, |p|), reversed or shortened
        at a bound), so a fit given this Jacobian takes the same path; the
        perturbed parameter sets (and the base point unless ``f0``, the
        residual there, is given) are integrated side by side. ``free``:
        indices of the varying parameters, ``lower``/``upper`` their bounds.
        Returns the Jacobian ``(n_points, len(free))``, and the residual at
        ``theta`` beside it when ``with_residual``.
        """
        theta = np.asarray(theta, float)
        free = np.asarray(free, int)
        x0 = theta[free]
        lb = np.broadcast_to(np.asarray(lower, float), x0.shape)
        ub = np.broadcast_to(np.asarray(upper, float), x0.shape)
        h = _forward_steps(x0, lb, ub)
        base = f0 is None or with_residual
        sets = np.tile(theta, (free.size + base, 1))
        for j, i in enumerate(free):
            sets[j, i] = x0[j] + h[j]
        res = (self.predict_many(sets) - y) * weights
        if base:
            f0 = res[-1]
        # column by column into a transposed array, the memory layout scipy's own differences
        # have (the linear algebra of the trust-region step then rounds the same way)
        jac_t = np.empty((free.size, y.size))
        for j, i in enumerate(free):
            jac_t[j] = (res[j] - f0) / (sets[j, i] - x0[j])
        return (jac_t.T, f0) if with_residual else jac_t.T


def _forward_steps(x0, lb, ub):
    """Forward-difference steps as :func:`scipy.optimize.least_squares` takes them (``'2-point'``).

    √ε·sign(x)·max(1, |x|) (sign +1 at 0), reversed when it would leave the
    bounds and fits on the other side, else the distance to the farther bound.
    """
    x0 = np.asarray(x0, float)
    sign = (x0 >= 0).astype(float) * 2 - 1
    h = np.finfo(float).eps ** 0.5 * sign * np.maximum(1.0, np.abs(x0))
    if np.all((lb == -np.inf) & (ub == np.inf)):
        return h
    lower_dist, upper_dist = x0 - lb, ub - x0
    x = x0 + h
    violated = (x < lb) | (x > ub)
    fitting = np.abs(h) <= np.maximum(lower_dist, upper_dist)
    adj = h.copy()
    adj[violated & fitting] *= -1
    forward = (upper_dist >= lower_dist) & ~fitting
    adj[forward] = upper_dist[forward]
    backward = (upper_dist < lower_dist) & ~fitting
    adj[backward] = -lower_dist[backward]
    return adj
