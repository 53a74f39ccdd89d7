r"""The 1-D diffusion solver: mass-conservative finite volumes in space.

Two solvers share one discretisation.

``LinearDiffusion`` (the equation is linear in C)
    For a trace element in plagioclase with frozen An, docs/references.md §5:

    .. math::

        \partial_t C = \frac{1}{a}\partial_x\Big[a D\big(\partial_x C -
        \tfrac{A}{RT}\,C\,\partial_x X_{An}\big)\Big]
        = \frac{1}{a}\partial_x\Big[a D w\,\partial_x (C/w)\Big],
        \qquad w = e^{A X_{An}/RT},

    with ``a`` the face area (1, r, r²). Writing ``u = C/w`` and integrating
    over each cell gives ``m du/dt = -L u + b`` with ``m = V w`` diagonal and
    ``L`` symmetric tridiagonal (face conductances ``a D w`` over the distance
    between centres, with ``w`` at a face the exact value for ``ln w`` varying
    linearly between centres). The steady state is ``u = const``, i.e.
    ``C ∝ exp(A X_An/RT)`` on the grid exactly. ``S^{-1} L S^{-1}`` with
    ``S = diag(sqrt(m))`` is symmetric, so one call to
    :func:`scipy.linalg.eigh_tridiagonal` gives

    .. math:: u(\tau) = u_\infty + S^{-1} Q\, e^{-\Lambda\tau} Q^T S\,(u_0 - u_\infty)

    for every ``τ = D_ref t`` at the cost of two small matrix products: time is
    exact, only space is discretised. ``D = D_ref · d_rel(x)``.

    When a model is needed at only a few times (a refit at another
    temperature, a trial position of a boundary) the same ``e^{-τK}`` (``K =
    S^{-1} L S^{-1}``) is applied without any decomposition, through the
    Carathéodory–Fejér rational approximation of ``e^{-x}`` on ``[0, ∞)``
    (Trefethen, Weideman & Schmelzer 2006):

    .. math:: e^{-τK} v ≈ a_0 v + \operatorname{Re} \sum_{k=1}^{7} c_k\,(τK + p_k I)^{-1} v,

    seven complex tridiagonal solves (degree 14; uniform error below 1e-13 on
    ``[0, ∞)``, so this is exact in time too). Both paths agree to round-off,
    which grows with ``τ λ_max`` (the conditioning of ``e^{-τK}``); the bound is
    derived in tests/diffusion/test_solver_analytic.py.

``evolve_nonlinear`` (D depends on the diffusing quantity, e.g. Fe–Mg in olivine)
    The same fluxes with ``d_rel(C)`` at the faces (arithmetic mean of the two
    cells), integrated by Crank–Nicolson after a few backward-Euler start-up
    steps (Rannacher start, damps the oscillations a sharp step causes), with
    Picard iteration of the nonlinearity to a tolerance at every step and a
    tridiagonal solve (LAPACK ``gtsv`` through :mod:`scipy.linalg.lapack`).

Boundary conditions: the rim (first face) is ``open`` (held at a value, e.g.
in equilibrium with the melt) or ``closed`` (zero flux); the core side (last
face) likewise (default closed: a zero-flux centre, or a far-field edge placed
far enough away).

References
----------
Crank, J. (1975) The Mathematics of Diffusion, 2nd ed., Oxford.
Trefethen, L. N., Weideman, J. A. C., Schmelzer, T. (2006) Talbot quadratures
and rational approximations. BIT Numer. Math. 46, 653–670,
doi:10.1007/s10543-006-0077-9 (Carathéodory–Fejér approximation of e^x on
(−∞, 0]; error ≈ 9.28903^−n for degree n, after Cody, Meinardus & Varga 1969).
Costa, F., Chakraborty, S., Dohmen, R. (2003) Geochim. Cosmochim. Acta 67,
2189–2200, doi:10.1016/S0016-7037(02)01345-5.
"""

from __future__ import annotations

import functools

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.grid import Grid

__all__ = ["LinearDiffusion", "evolve_nonlinear", "BOUNDARY_KINDS"]

BOUNDARY_KINDS = ("open", "closed")


def _check_kind(kind, name):
    if kind not in BOUNDARY_KINDS:
        raise InputError(f"{name} boundary must be 'open' or 'closed', got '{kind}'")
    return kind


def _log_mean(a, b):
    """Logarithmic mean (a - b)/(ln a - ln b), = a when a == b."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    out = a.copy()
    diff = np.abs(a - b) > 1e-12 * np.maximum(a, b)
    out[diff] = (a[diff] - b[diff]) / (np.log(a[diff]) - np.log(b[diff]))
    return out


@functools.lru_cache(maxsize=None)
def rational_exp_coefficients(degree=14):
    """Poles and weights of a rational approximation of ``e^{-x}`` on ``[0, ∞)``.

    Poles: Carathéodory–Fejér (CF) approximation of ``e^t`` on ``(−∞, 0]``,
    computed as in Trefethen, Weideman & Schmelzer (2006, Fig. 4.1): ``e^t``
    mapped to ``[−1, 1]`` by ``t = 9(s − 1)/(s + 1)``, Chebyshev coefficients by
    FFT, the CF singular vector of their Hankel matrix, and its roots outside
    the unit disc mapped back. Weights: linear least squares on ``e^{-x}`` at
    4000 points of ``[0, 10⁴]`` (the poles come in conjugate pairs, so one of
    each pair and real/imaginary parts of its weight suffice for real ``x``).

    Returns ``(a0, poles, weights)`` with
    ``e^{-x} ≈ a0 + Re Σ_k weights[k] / (x + poles[k])``, ``degree // 2`` poles.
    """
    from scipy.linalg import hankel, svd

    n, n_cheb, n_fft, scale = int(degree), 75, 1024, 9.0
    w = np.exp(2j * np.pi * np.arange(n_fft) / n_fft)
    t = w.real
    f_cheb = np.real(np.fft.fft(np.exp(scale * (t - 1.0) / (t + 1.0 + 1e-16)))) / n_fft
    _, _, vh = svd(hankel(f_cheb[1:n_cheb + 1]))
    roots = np.roots(vh[n].conj())
    q = roots[np.abs(roots) > 1.0]
    zeta = scale * (q - 1.0) ** 2 / (q + 1.0) ** 2  # poles of the approximant of e^t
    poles = zeta[zeta.imag > 0]  # e^{-x} = e^t at t = -x: terms 1/(x + p), one of each conjugate pair
    poles = poles[np.argsort(np.abs(poles))]
    x = np.concatenate([[0.0], np.geomspace(1e-8, 1e4, 4000)])
    g = 1.0 / (x[:, None] + poles[None, :])
    design = np.column_stack([np.ones_like(x), g.real, -g.imag])
    sol, *_ = np.linalg.lstsq(design, np.exp(-x), rcond=None)
    weights = sol[1:1 + poles.size] + 1j * sol[1 + poles.size:]
    return float(sol[0]), poles, weights


def _tridiag_matvec(diag, off, v):
    """``T v`` for a symmetric tridiagonal ``T`` (``v`` of shape (N,) or (N, k))."""
    out = diag.reshape((-1,) + (1,) * (v.ndim - 1)) * v
    off = off.reshape((-1,) + (1,) * (v.ndim - 1))
    out[:-1] += off * v[1:]
    out[1:] += off * v[:-1]
    return out


def _face_conductance(grid: Grid, d_rel, w, rim: str, core: str):
    """Face conductances a·D·w/Δx: interior (N-1,), rim face and core face."""
    h = grid.widths_um
    area = grid.face_areas
    # resistance of the path centre i -> centre i+1: half-cells in series,
    # w taken exact for ln w linear between centres (w_i w_j / logmean)
    w_face = w[:-1] * w[1:] / _log_mean(w[:-1], w[1:])
    resist = (0.5 * h[:-1] / d_rel[:-1] + 0.5 * h[1:] / d_rel[1:]) / w_face
    inner = area[1:-1] / resist
    rim_c = area[0] * d_rel[0] * w[0] / (0.5 * h[0]) if rim == "open" else 0.0
    core_c = area[-1] * d_rel[-1] * w[-1] / (0.5 * h[-1]) if core == "open" else 0.0
    return inner, rim_c, core_c


class LinearDiffusion:
    """Spectral solution of the linear (An-coupled) diffusion problem on a grid.

    Parameters
    ----------
    grid : Grid
    d_rel : array_like, shape (N,)
        D(x)/D_ref in every cell (> 0).
    weight : array_like, shape (N,), optional
        Equilibrium shape ``w = exp(A·X_An/RT)`` in every cell (default 1, i.e.
        plain diffusion).
    rim, core : {'open', 'closed'}
        Open: the face is held at a fixed concentration; closed: zero flux.

    Notes
    -----
    The eigendecomposition is done once here; :meth:`evolve` and the samplers
    from :meth:`sampler` reuse it for any time, initial condition and boundary
    value.
    """

    def __init__(self, grid: Grid, d_rel, *, weight=None, rim="closed", core="closed"):
        self.grid = grid
        n = grid.n
        d_rel = np.broadcast_to(np.asarray(d_rel, float), (n,)).copy()
        if not np.all(np.isfinite(d_rel)) or np.any(d_rel <= 0):
            raise InputError("relative diffusivities must be finite and > 0")
        w = np.ones(n) if weight is None else np.broadcast_to(np.asarray(weight, float), (n,)).copy()
        if not np.all(np.isfinite(w)) or np.any(w <= 0):
            raise InputError("equilibrium weights must be finite and > 0")
        self.rim = _check_kind(rim, "rim")
        self.core = _check_kind(core, "core")
        self.d_rel = d_rel
        self.weight = w
        inner, self._rim_c, self._core_c = _face_conductance(grid, d_rel, w, self.rim, self.core)
        diag = np.zeros(n)
        diag[:-1] += inner
        diag[1:] += inner
        diag[0] += self._rim_c
        diag[-1] += self._core_c
        m = grid.volumes * w
        s = np.sqrt(m)
        self._m = m
        self._s = s
        self._diag_l = diag
        self._off_l = -inner
        # the symmetric operator K = S^-1 L S^-1 (v = S u = (s/w) C)
        self._diag_k = diag / m
        self._off_k = -inner / (s[:-1] * s[1:])
        self._to_sym = s / w
        self._from_sym = w / s
        self._spectral = None  # (eigenvalues, Q, C-from-coefficients, coefficients-from-C), on first use

    # --- eigendecomposition (done once, on first use) -------------------------
    def _decompose(self):
        if self._spectral is None:
            from scipy.linalg import eigh_tridiagonal

            lam, q = eigh_tridiagonal(self._diag_k, self._off_k)
            lam = np.maximum(lam, 0.0)  # round-off can give -1e-18
            if self.rim == "closed" and self.core == "closed":
                lam[0] = 0.0  # the conserved mode: exactly zero, so mass holds at any time
            # C = w u = (w/s) v ; v = Q c ; these two matrices do all the work
            self._spectral = (lam, q, self._from_sym[:, None] * q, q.T * self._to_sym[None, :])
        return self._spectral

    @property
    def decomposed(self) -> bool:
        """Whether the eigendecomposition has been computed."""
        return self._spectral is not None

    @property
    def eigenvalues(self):
        return self._decompose()[0]

    @property
    def _q(self):
        return self._decompose()[1]

    @property
    def _out(self):  # C from spectral coefficients
        return self._decompose()[2]

    @property
    def _in(self):  # spectral coefficients from C
        return self._decompose()[3]

    # --- e^{-τK} without a decomposition ----------------------------------------
    def decay_rational(self, v, tau_um2):
        """``e^{-τK} v`` for vectors ``v`` in the symmetric variables (shape (N,) or (N, k)).

        Seven complex tridiagonal solves (LAPACK ``zgtsv``) with the rational
        approximation of :func:`rational_exp_coefficients`; no eigendecomposition.
        """
        from scipy.linalg.lapack import zgtsv

        v = np.asarray(v, float)
        tau = float(tau_um2)
        if tau <= 0.0:
            return v.copy()
        a0, poles, weights = rational_exp_coefficients()
        rhs = np.asfortranarray(v.reshape(v.shape[0], -1), dtype=complex)
        out = a0 * v.reshape(v.shape[0], -1)
        off = (tau * self._off_k).astype(complex)
        diag = tau * self._diag_k
        for p, c in zip(poles, weights):
            _, _, _, x, info = zgtsv(off, diag + p, off, rhs)
            if info != 0:  # pragma: no cover - τK + p is regular for a pole off the real axis
                raise RuntimeError(f"tridiagonal solve failed (info {info})")
            out += (c * x).real
        return out.reshape(v.shape)

    def apply_k(self, v):
        """``K v`` (the generator in the symmetric variables: ``d/dτ e^{-τK}v = −K e^{-τK}v``)."""
        return _tridiag_matvec(self._diag_k, self._off_k, np.asarray(v, float))

    # --- steady state -----------------------------------------------------
    def steady_state(self, rim_value=None, core_value=None):
        """The state the system relaxes to (C units); ``None`` when closed at both ends."""
        if self.rim == "closed" and self.core == "closed":
            return None
        if self.core == "closed":
            # zero flux at the core: the rim potential fills the crystal
            return self.weight * self._potential(rim_value, 0, "rim_value")
        b = np.zeros(self.grid.n)
        if self.rim == "open":
            b[0] += self._rim_c * self._potential(rim_value, 0, "rim_value")
        if self.core == "open":
            b[-1] += self._core_c * self._potential(core_value, -1, "core_value")
        ab = np.zeros((3, self.grid.n))
        ab[0, 1:] = self._off_l
        ab[1] = self._diag_l
        ab[2, :-1] = self._off_l
        from scipy.linalg import solve_banded

        u = solve_banded((1, 1), ab, b)
        return self.weight * u

    def _potential(self, value, index, name):
        if value is None:
            raise InputError(f"an open boundary needs {name}")
        return float(value) / self.weight[index]

    # --- evolution ----------------------------------------------------------
    def evolve(self, c0, tau_um2, *, rim_value=None, core_value=None, method="spectral"):
        """Concentration in every cell after ``τ = D_ref·t`` (µm²).

        ``tau_um2`` may be a scalar (result shape (N,)) or 1-D (shape (N, k)).
        ``method``: ``'spectral'`` (eigendecomposition, reused for every later
        call) or ``'rational'`` (no decomposition; for a few evaluations).
        """
        c0 = np.asarray(c0, float)
        tau = np.asarray(tau_um2, float)
        css = self.steady_state(rim_value, core_value)
        dc = c0 if css is None else c0 - css
        if method == "rational":
            v = self._to_sym * dc
            cols = [self._from_sym * self.decay_rational(v, t) for t in np.atleast_1d(tau)]
            out = cols[0] if tau.ndim == 0 else np.column_stack(cols)
            if css is not None and tau.ndim:
                css = css[:, None]
            return out if css is None else out + css
        if method != "spectral":
            raise InputError(f"method must be 'spectral' or 'rational', got '{method}'")
        coef = self._in @ dc
        decay = np.exp(-np.multiply.outer(self.eigenvalues, tau))
        if tau.ndim == 0:
            out = self._out @ (decay * coef)
        else:
            out = self._out @ (decay * coef[:, None])
            if css is not None:
                css = css[:, None]
        return out if css is None else out + css

    def sampler(self, matrix):
        """A fast evaluator of ``matrix @ C(τ)`` (e.g. beam-convolved values at data points).

        Parameters
        ----------
        matrix : ndarray, shape (n_points, N)
            Linear map from cell values to what is compared with data.

        Returns
        -------
        callable ``f(c0, tau_um2, rim_value=None, core_value=None) -> ndarray (n_points,)``
        """
        p_out = np.asarray(matrix, float) @ self._out
        m_in = self._in
        lam = self.eigenvalues
        mat = np.asarray(matrix, float)

        def evaluate(c0, tau_um2, rim_value=None, core_value=None):
            css = self.steady_state(rim_value, core_value)
            dc = c0 if css is None else c0 - css
            decay = np.exp(-lam * tau_um2)
            # modes decayed below e^-50 add nothing (eigenvalues ascend): skip them
            k = int(np.searchsorted(lam, 50.0 / tau_um2)) if tau_um2 > 0 else lam.size
            k = max(k, 1)
            values = p_out[:, :k] @ (decay[:k] * (m_in[:k] @ dc))
            return values if css is None else values + mat @ css

        return evaluate

    def mass(self, c):
        """Total amount ``Σ V_i C_i`` (same units as the grid's volumes × C)."""
        c = np.asarray(c, float)
        vol = self.grid.volumes if c.ndim == 1 else self.grid.volumes[:, None]
        return np.sum(vol * c, axis=0)


def _tridiag_apply(lower, diag, upper, x):
    y = diag * x
    y[1:] += lower * x[:-1]
    y[:-1] += upper * x[1:]
    return y


def evolve_nonlinear(grid: Grid, c0, tau_um2, d_rel_fn, *, rim="closed", rim_value=None,
                     n_steps=24, first_fraction=3e-2, startup_steps=3, tol=1e-9, max_iter=50):
    r"""Integrate ``∂C/∂τ = (1/a)∂x[a d_rel(C) ∂x C]`` to ``τ`` (µm²) implicitly.

    Parameters
    ----------
    grid : Grid
    c0 : array_like, shape (N,) or (N, R)
        Initial cell values; several columns are integrated side by side (one
        problem each, with its own ``τ`` and rim value).
    tau_um2 : float or array_like, shape (R,)
        ``τ = D_ref·t`` in µm² (``D = D_ref·d_rel(C)``).
    d_rel_fn : callable
        ``d_rel_fn(C) -> D/D_ref`` (vectorised elementwise, > 0).
    rim : {'open', 'closed'}
        Open: first face held at ``rim_value`` (a number, or one per column);
        the core face is zero flux.
    n_steps : int
        Number of time steps, geometrically spaced from ``first_fraction·τ``.
    startup_steps : int
        Backward-Euler steps before Crank–Nicolson (Rannacher start-up).
    tol : float
        Picard iterations stop when the largest change is below ``tol`` times
        the range of ``c0`` (each column on its own).

    Returns
    -------
    ndarray, shape of ``c0``

    Notes
    -----
    Each step solves ``(V + θΔτ L(C*)) C^{n+1} = (V − (1−θ)Δτ L(C^n)) C^n + Δτ b``
    and updates ``C*`` until it stops changing (Picard); θ = 1 for the start-up
    steps, ½ after (Crank–Nicolson). Mass is conserved by construction with
    closed faces.

    The columns are stacked into one block-tridiagonal system (zero coupling
    between blocks) and solved by one LAPACK ``gtsv`` call per Picard
    iteration; a column stops iterating when it has converged, so every column
    is the same (to round-off: the solves are the same eliminations) as when
    it is integrated alone.
    """
    from scipy.linalg.lapack import dgtsv as gtsv

    _check_kind(rim, "rim")
    c_in = np.asarray(c0, float)
    single = c_in.ndim == 1
    c = np.atleast_2d(c_in.T if not single else c_in).copy()  # (R, N)
    n_rows, n = c.shape
    tau = np.broadcast_to(np.asarray(tau_um2, float), (n_rows,)).copy()
    if not np.any(tau > 0):
        return c_in.copy()
    h = grid.widths_um
    area = grid.face_areas
    vol = grid.volumes
    dist = 0.5 * (h[:-1] + h[1:])
    scale = np.maximum(np.maximum(np.ptp(c, axis=1), np.max(np.abs(c), axis=1) * 1e-6), 1e-300)
    n_steps = max(int(n_steps), startup_steps + 1)
    times = np.concatenate([np.zeros((n_rows, 1)), tau[:, None] * np.geomspace(first_fraction, 1.0, n_steps)[None, :]],
                           axis=1)
    if rim == "closed":
        ub = np.zeros(n_rows)
    else:
        ub = np.broadcast_to(np.asarray(rim_value, float), (n_rows,)).copy()
    face_area = area[1:-1]
    moving = np.flatnonzero(tau > 0)

    def operator(state):
        d = d_rel_fn(state)
        cond = face_area * 0.5 * (d[:, :-1] + d[:, 1:]) / dist
        diag = np.empty(state.shape)
        diag[:, :-1] = cond
        diag[:, -1] = 0.0
        diag[:, 1:] += cond
        if rim == "open":
            rim_c = area[0] * d[:, 0] / (0.5 * h[0])
            diag[:, 0] += rim_c
        else:
            rim_c = zeros_rows[: state.shape[0]]
        return cond, diag, rim_c

    def solve(sub_rows, diag_rows, rhs_rows):
        """One gtsv call for the stacked symmetric systems (rows of shape (r, N)); overwrites its arguments."""
        r = diag_rows.shape[0]
        if r == 1:
            off = sub_rows.ravel()
        else:
            off = np.zeros((r, n))
            off[:, :-1] = sub_rows
            off = off.ravel()[:-1]
        _, _, _, x, info = gtsv(off, diag_rows.ravel(), off.copy(), rhs_rows.ravel(), 1, 1, 1, 1)
        if info != 0:  # pragma: no cover - the matrix is diagonally dominant
            raise RuntimeError(f"tridiagonal solve failed (info {info})")
        return x.reshape(r, n)

    c_m = c[moving]
    n_m = c_m.shape[0]
    zeros_rows = np.zeros(n_m)
    ub_m, scale_m, times_m = ub[moving], scale[moving], times[moving]
    limit_m = tol * scale_m
    cond_n, diag_n, rimc_n = operator(c_m)
    all_rows = np.arange(n_m)
    for k in range(n_steps):
        dt = (times_m[:, k + 1] - times_m[:, k])[:, None]
        theta = 1.0 if k < startup_steps else 0.5
        explicit = -diag_n * c_m
        explicit[:, 1:] += cond_n * c_m[:, :-1]
        explicit[:, :-1] += cond_n * c_m[:, 1:]
        if rim == "open":
            explicit[:, 0] += rimc_n * ub_m
        rhs = vol * c_m + (1.0 - theta) * dt * explicit
        theta_dt = theta * dt
        neg_theta_dt = -theta * dt
        guess = c_m
        cond, diag, rimc = cond_n, diag_n, rimc_n
        active = all_rows
        for _ in range(max_iter):
            if active.size == n_m:
                b = rhs.copy()
                if rim == "open":
                    b[:, 0] += theta_dt[:, 0] * rimc * ub_m
                new = solve(neg_theta_dt * cond, vol + theta_dt * diag, b)
                change = np.max(np.abs(new - guess), axis=1)
                guess = new
                cond, diag, rimc = operator(guess)
            else:
                b = rhs[active]
                tda = theta_dt[active]
                if rim == "open":
                    b[:, 0] += tda[:, 0] * rimc[active] * ub_m[active]
                new = solve(neg_theta_dt[active] * cond[active], vol + tda * diag[active], b)
                change = np.max(np.abs(new - guess[active]), axis=1)
                guess = guess.copy()
                guess[active] = new
                cond, diag, rimc = cond.copy(), diag.copy(), rimc.copy()
                cond[active], diag[active], rimc[active] = operator(new)
            active = active[change > limit_m[active]]
            if active.size == 0:
                break
        c_m = guess
        cond_n, diag_n, rimc_n = cond, diag, rimc
    c[moving] = c_m
    return c[0] if single else c.T
