r"""The 1-D diffusion solver: mass-conservative finite volumes in space.

Two solvers share one discretisation.

``LinearDiffusion`` (the equation is linear in C)
    For a trace element in plagioclase with frozen An, REFERENCES.md §5:

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
Costa, F., Chakraborty, S., Dohmen, R. (2003) Geochim. Cosmochim. Acta 67,
2189–2200, doi:10.1016/S0016-7037(02)01345-5.
"""

from __future__ import annotations

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
        from scipy.linalg import eigh_tridiagonal

        lam, q = eigh_tridiagonal(diag / m, -inner / (s[:-1] * s[1:]))
        lam = np.maximum(lam, 0.0)  # round-off can give -1e-18
        if self.rim == "closed" and self.core == "closed":
            lam[0] = 0.0  # the conserved mode: exactly zero, so mass holds at any time
        self.eigenvalues = lam
        self._q = q
        # C = w u = (w/s) v ; v = Q c ; these two matrices do all the work
        self._out = (w / s)[:, None] * q  # C from spectral coefficients
        self._in = q.T * (s / w)[None, :]  # spectral coefficients from C

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
    def evolve(self, c0, tau_um2, *, rim_value=None, core_value=None):
        """Concentration in every cell after ``τ = D_ref·t`` (µm²).

        ``tau_um2`` may be a scalar (result shape (N,)) or 1-D (shape (N, k)).
        """
        c0 = np.asarray(c0, float)
        tau = np.asarray(tau_um2, float)
        css = self.steady_state(rim_value, core_value)
        dc = c0 if css is None else c0 - css
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
            values = p_out @ (np.exp(-lam * tau_um2) * (m_in @ dc))
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
                     n_steps=60, first_fraction=1e-4, startup_steps=4, tol=1e-9, max_iter=50):
    r"""Integrate ``∂C/∂τ = (1/a)∂x[a d_rel(C) ∂x C]`` to ``τ`` (µm²) implicitly.

    Parameters
    ----------
    grid : Grid
    c0 : array_like, shape (N,)
        Initial cell values.
    tau_um2 : float
        ``τ = D_ref·t`` in µm² (``D = D_ref·d_rel(C)``).
    d_rel_fn : callable
        ``d_rel_fn(C) -> D/D_ref`` (vectorised, > 0).
    rim : {'open', 'closed'}
        Open: first face held at ``rim_value``; the core face is zero flux.
    n_steps : int
        Number of time steps, geometrically spaced from ``first_fraction·τ``.
    startup_steps : int
        Backward-Euler steps before Crank–Nicolson (Rannacher start-up).
    tol : float
        Picard iterations stop when the largest change is below ``tol`` times
        the range of ``c0``.

    Returns
    -------
    ndarray, shape (N,)

    Notes
    -----
    Each step solves ``(V + θΔτ L(C*)) C^{n+1} = (V − (1−θ)Δτ L(C^n)) C^n + Δτ b``
    and updates ``C*`` until it stops changing (Picard); θ = 1 for the start-up
    steps, ½ after (Crank–Nicolson). Mass is conserved by construction with
    closed faces.
    """
    from scipy.linalg.lapack import dgtsv as gtsv

    _check_kind(rim, "rim")
    c = np.asarray(c0, float).copy()
    tau = float(tau_um2)
    if tau <= 0:
        return c
    n = grid.n
    h = grid.widths_um
    area = grid.face_areas
    vol = grid.volumes
    dist = 0.5 * (h[:-1] + h[1:])
    scale = max(np.ptp(c), np.max(np.abs(c)) * 1e-6, 1e-300)
    n_steps = max(int(n_steps), startup_steps + 1)
    times = np.concatenate([[0.0], tau * np.geomspace(first_fraction, 1.0, n_steps)])
    ub = 0.0 if rim == "closed" else float(rim_value)

    def operator(state):
        d = d_rel_fn(state)
        cond = area[1:-1] * 0.5 * (d[:-1] + d[1:]) / dist
        diag = np.zeros(n)
        diag[:-1] += cond
        diag[1:] += cond
        rim_c = area[0] * d[0] / (0.5 * h[0]) if rim == "open" else 0.0
        diag[0] += rim_c
        return cond, diag, rim_c

    cond_n, diag_n, rimc_n = operator(c)
    for k in range(n_steps):
        dt = times[k + 1] - times[k]
        theta = 1.0 if k < startup_steps else 0.5
        explicit = -_tridiag_apply(-cond_n, diag_n, -cond_n, c)
        explicit[0] += rimc_n * ub
        rhs = vol * c + (1.0 - theta) * dt * explicit
        guess = c
        cond, diag, rimc = cond_n, diag_n, rimc_n
        for _ in range(max_iter):
            sub = -theta * dt * cond
            b = rhs.copy()
            b[0] += theta * dt * rimc * ub
            # LAPACK gtsv: tridiagonal solve without the wrapper overhead of solve_banded
            _, _, _, new, info = gtsv(sub, vol + theta * dt * diag, sub.copy(), b, 1, 1, 1, 1)
            if info != 0:  # pragma: no cover - the matrix is diagonally dominant
                raise RuntimeError(f"tridiagonal solve failed (info {info})")
            change = np.max(np.abs(new - guess))
            guess = new
            cond, diag, rimc = operator(guess)
            if change <= tol * scale:
                break
        c = guess
        cond_n, diag_n, rimc_n = cond, diag, rimc
    return c
