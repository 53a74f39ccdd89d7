"""The diffusion solver against Crank's analytical solutions, mass balance and steady states.

Reference values: Crank, J. (1975) The Mathematics of Diffusion, 2nd ed., as
listed with their check values in docs/references.md §6 (the values are reproduced
below from the series/erf formulas with scipy as an independent reference).
"""

import math

import numpy as np
import pytest
from scipy.special import erf, erfc

from zoneprofile.diffusion import LinearDiffusion, evolve_nonlinear, refined_grid, uniform_grid
from zoneprofile.diffusion.grid import Grid

R = 8.314462618  # CODATA 2018


def _richardson(f, n):
    """Second-order Richardson extrapolation from grids n and 2n."""
    coarse, fine = f(n), f(2 * n)
    return (4.0 * fine - coarse) / 3.0, coarse, fine


def test_semi_infinite_surface_held_erfc():
    # Crank (1975) p. 32: (C - C0)/(Cs - C0) = erfc(x / 2 sqrt(Dt)); check value
    # t = 100 s, x = 1e-4 m, D = 1e-10 m2/s -> 0.4795001221869535 (docs/references.md §6)
    expected = 0.4795001221869535
    assert erfc(0.5) == pytest.approx(expected, rel=1e-12)  # scipy reproduces the check value

    def solve(n):
        g = uniform_grid(1000.0, n)  # 1 mm in µm; centres at 100 µm for n = 500, 1000, ...
        c = LinearDiffusion(g, 1.0, rim="open").evolve(np.zeros(n), 1e-10 * 100 * 1e12, rim_value=1.0)
        return np.interp(100.0, g.centres_um, c)

    extrapolated, coarse, fine = _richardson(solve, 500)
    err_c, err_f = abs(coarse - expected), abs(fine - expected)
    assert 3.5 < err_c / err_f < 4.5  # second-order convergence
    assert extrapolated == pytest.approx(expected, rel=1e-6)


def test_diffusion_couple_midpoint_is_mean():
    # Crank (1975) eq. 2.14: C = (CL+CR)/2 + (CR-CL)/2 erf(x / 2 sqrt(Dt)); C(0) = mean for all t
    g = uniform_grid(200.0, 400)
    c0 = np.where(g.centres_um < 100.0, 2.0, 6.0)
    op = LinearDiffusion(g, 1.0)
    for tau in (1.0, 10.0, 100.0):
        c = op.evolve(c0, tau)
        assert np.interp(100.0, g.centres_um, c) == pytest.approx(4.0, rel=1e-12)
        ref = 4.0 + 2.0 * erf((g.centres_um - 100.0) / (2 * math.sqrt(tau)))
        assert np.max(np.abs(c - ref)) < 0.02 / tau  # O(h²/Dt) discretisation error


def test_finite_slab_in_infinite_medium():
    # Crank (1975) eq. 2.15: C = C0/2 [erf((h-x)/2√Dt) + erf((h+x)/2√Dt)];
    # h 10 µm, D 1e-18, t 1e7 s: C(0) 0.9746526813, C(h) 0.4999961279 (docs/references.md §6)
    tau = 1e-18 * 1e7 * 1e12  # µm²
    h = 10.0

    def solve(n):
        # symmetry plane at x = 0 (closed), far edge at 200 µm; centre-on-h needs h/dx + 1/2 integer
        dx = 100.0 / n
        g = uniform_grid(100.0, n, start_um=-dx / 2)  # a centre at 0 and at h
        g = Grid(np.concatenate([[0.0], g.faces_um[1:]]))  # first half-cell: centre face at 0
        c0 = g.cell_average(([h], [1.0, 0.0]))
        c = LinearDiffusion(g, 1.0).evolve(c0, tau)
        return np.interp([0.0, h], g.centres_um, c)

    ext, coarse, fine = _richardson(solve, 1000)
    assert ext[1] == pytest.approx(0.4999961279, rel=1e-6)
    assert fine[0] == pytest.approx(0.9746526813, rel=1e-4)  # first cell centre sits at dx/4
    assert abs(fine[1] - 0.4999961279) < abs(coarse[1] - 0.4999961279)


def _sheet_series(tau, a, x, terms=400):
    n = np.arange(terms)
    k = (2 * n + 1) * math.pi / (2 * a)
    return 1 - 4 / math.pi * np.sum((-1.0) ** n / (2 * n + 1) * np.exp(-k**2 * tau) * np.cos(k * x))


def test_plane_sheet_centre_and_uptake():
    # Crank (1975) p. 47-48: sheet -a<x<a, faces held at Cs; t 100 s, x 0, a 2e-4 m, D 1e-10:
    # C/Cs = 0.3145542331096479, M_t/M_inf = 0.562233541762138 (docs/references.md §6)
    a = 200.0
    tau = 1e-10 * 100 * 1e12
    assert _sheet_series(tau, a, 0.0) == pytest.approx(0.3145542331096479, rel=1e-10)

    def solve(n):
        g = uniform_grid(a, n)  # rim (face) at 0, centre of the sheet at a (closed)
        op = LinearDiffusion(g, 1.0, rim="open")
        c = op.evolve(np.zeros(n), tau, rim_value=1.0)
        centre = 1.5 * c[-1] - 0.5 * c[-2]  # value at the symmetry face (zero gradient)
        centre = c[-1] + (c[-1] - c[-2]) / 8.0  # quadratic through the symmetric profile
        return np.array([centre, op.mass(c) / a])

    ext, coarse, fine = _richardson(solve, 400)
    assert ext[0] == pytest.approx(0.3145542331096479, rel=1e-5)
    assert ext[1] == pytest.approx(0.562233541762138, rel=1e-6)
    assert abs(fine[1] - 0.562233541762138) < abs(coarse[1] - 0.562233541762138) / 3.5


def test_sphere_centre():
    # Crank (1975) p. 91: sphere radius a, surface at Cs, centre: 1 + 2 Σ (-1)^n exp(-D n² π² t/a²);
    # t 100 s, a 2e-4 m, D 1e-10 -> 0.8304935009764247 (docs/references.md §6)
    a, tau = 200.0, 1e4
    n = np.arange(1, 400)
    series = 1 + 2 * np.sum((-1.0) ** n * np.exp(-(n**2) * math.pi**2 * tau / a**2))
    assert series == pytest.approx(0.8304935009764247, rel=1e-12)

    def solve(m):
        g = uniform_grid(a, m, geometry="sphere", radius_um=a)
        c = LinearDiffusion(g, 1.0, rim="open").evolve(np.zeros(m), tau, rim_value=1.0)
        r = a - g.centres_um[-3:]
        coef = np.polyfit(r**2, c[-3:], 1)  # C(r) even in r near the centre
        return coef[1]

    ext, coarse, fine = _richardson(solve, 400)
    assert ext == pytest.approx(0.8304935009764247, rel=1e-5)
    assert abs(fine - 0.8304935009764247) < abs(coarse - 0.8304935009764247)


def test_cylinder_mass_conserved_and_uniform_limit():
    # invariant: closed cylinder conserves Σ V C and relaxes to the volume mean
    g = uniform_grid(100.0, 200, geometry="cylinder", radius_um=100.0)
    c0 = np.where(g.centres_um < 30.0, 1.0, 0.0)
    op = LinearDiffusion(g, 1.0)
    c = op.evolve(c0, np.array([10.0, 1e3, 1e6]))
    m0 = op.mass(c0)
    # round-off: the conserved mode has eigenvalue exactly 0 (set so), the eigensolver is exact for
    # K + E, ||E||₂ ≤ n u λ_max, and Q is orthogonal to n u (LAPACK Users' Guide §4.7, from memory);
    # the computed null vector is then off by ≤ ||E||₂ / λ_1 (Davis–Kahan sin θ theorem), which is
    # what is left once the other modes have decayed: |ΔM| ≤ c n u (1 + λ_max/λ_1) ||s||₂ ||v||₂,
    # M = s·v, v = (s/w) C, c = 10 (as in the rational-path bound below)
    v = op._to_sym * c0
    lam = op.eigenvalues
    bound = 10 * g.n * np.finfo(float).eps * (1 + lam[-1] / lam[1])
    bound *= np.linalg.norm(op._s) * np.linalg.norm(v) / m0
    assert np.all(np.abs(op.mass(c) - m0) <= bound * m0)
    assert np.allclose(c[:, -1], m0 / g.volumes.sum(), rtol=1e-9)


def test_convergence_order_two():
    # grid convergence of the numerical error against Crank eq. 2.14 (erf step)
    tau = 25.0
    errs = []
    for n in (100, 200, 400):
        g = uniform_grid(200.0, n)
        c0 = g.cell_average(([100.0], [0.0, 1.0]))
        c = LinearDiffusion(g, 1.0).evolve(c0, tau)
        ref = 0.5 + 0.5 * erf((g.centres_um - 100.0) / (2 * math.sqrt(tau)))
        errs.append(np.max(np.abs(c - ref)))
    orders = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
    assert np.all(orders > 1.8)


def _an_problem(n=400, closed=True):
    # docs/references.md §5 regression set-up: Sr, 1000 °C, A = -30.4 kJ/mol, X_An 0.4 -> 0.8 tanh step
    g = uniform_grid(100.0, n)
    x_an = 0.6 + 0.2 * np.tanh((g.centres_um - 50.0) / 3.0)
    w = np.exp(-30400.0 * x_an / (R * 1273.15))
    d_rel = 10 ** (-4.1 * (x_an - 0.6))  # Zellmer-type An dependence
    return g, x_an, LinearDiffusion(g, d_rel, weight=w, rim="closed" if closed else "open")


def test_an_coupled_mass_balance_closed():
    # invariant: closed system conserves Σ V C to <= 1e-9 relative (docs/references.md §5: 2e-10)
    g, x_an, op = _an_problem()
    c0 = np.full(g.n, 100.0)
    m0 = op.mass(c0)
    c = op.evolve(c0, np.array([1.0, 30.0, 1e3, 1e6]))
    assert np.max(np.abs(op.mass(c) - m0) / m0) <= 1e-9


def test_an_coupled_steady_state_is_exp_a_xan_over_rt():
    # docs/references.md §5: steady state C(An40)/C(An80) -> exact exp(A·(0.4-0.8)/RT) = 3.1542
    # (the regression value of a finite-difference solver is 3.1547; ours is exact on the grid)
    g, x_an, op = _an_problem()
    c = op.evolve(np.full(g.n, 100.0), 1e7)
    ratio = c[0] / c[-1]
    exact = math.exp(-30400.0 * (x_an[0] - x_an[-1]) / (R * 1273.15))
    assert exact == pytest.approx(3.1542, abs=1e-4)
    assert ratio == pytest.approx(exact, rel=1e-9)
    assert ratio == pytest.approx(3.1547, abs=1e-3)


def test_zero_a_constant_d_reduces_to_erf():
    # Crank (1975) eq. 2.14 with A = 0 and constant D (docs/references.md §5)
    g = uniform_grid(100.0, 800)
    op = LinearDiffusion(g, np.ones(g.n), weight=np.exp(0.0 * g.centres_um))
    c0 = g.cell_average(([50.0], [10.0, 20.0]))
    c = op.evolve(c0, 16.0)
    ref = 15.0 + 5.0 * erf((g.centres_um - 50.0) / 8.0)
    assert np.max(np.abs(c - ref)) < 2e-4


def test_sampler_matches_evolve():
    # self-consistency: the data-space evaluator equals B @ evolve
    g, x_an, op = _an_problem(closed=False)
    rng = np.random.default_rng(0)
    mat = rng.random((7, g.n))
    c0 = 50 + rng.random(g.n)
    f = op.sampler(mat)
    assert np.allclose(f(c0, 12.0, rim_value=40.0), mat @ op.evolve(c0, 12.0, rim_value=40.0), rtol=1e-12)


def test_nonlinear_constant_d_matches_erf():
    # Crank (1975) eq. 2.14 through the implicit solver (D constant)
    g = refined_grid(0.0, 400.0, 0.0, 120.0, 300)
    c0 = g.cell_average(([60.0], [80.0, 85.0]))
    c = evolve_nonlinear(g, c0, 25.0, lambda s: np.ones_like(s))
    ref = 82.5 + 2.5 * erf((g.centres_um - 60.0) / 10.0)
    assert np.max(np.abs(c - ref)[g.centres_um < 120]) < 2e-3


def test_nonlinear_against_scipy_method_of_lines():
    # independent reference: scipy.integrate.solve_ivp (BDF) on a uniform fine grid with
    # D(C) = 10^(3·(X_Fe - 0.15)) (Dohmen & Chakraborty 2007 composition term)
    from scipy.integrate import solve_ivp
    from scipy.sparse import diags

    L, n = 100.0, 500
    h = L / n
    xc = (np.arange(n) + 0.5) * h
    fo0 = np.where(xc < 50.0, 78.0, 88.0)

    def d_of(fo):
        return 10 ** (3 * ((1 - fo / 100) - 0.15))

    def rhs(t, c):
        d = d_of(c)
        df = 0.5 * (d[1:] + d[:-1])
        flux = -df * np.diff(c) / h
        out = np.zeros_like(c)
        out[:-1] -= flux / h
        out[1:] += flux / h
        return out

    pattern = diags([1.0, 1.0, 1.0], [-1, 0, 1], shape=(n, n))
    ref = solve_ivp(rhs, (0, 30.0), fo0, method="BDF", jac_sparsity=pattern, rtol=1e-9, atol=1e-9).y[:, -1]
    g = uniform_grid(L, n)
    ours = evolve_nonlinear(g, fo0, 30.0, d_of, n_steps=80)
    assert np.max(np.abs(ours - ref)) < 5e-3
    # mass conserved (closed)
    assert ours.sum() == pytest.approx(fo0.sum(), rel=1e-12)
    # and the profile is asymmetric (faster diffusion on the Fe-rich side), unlike an erf
    mid = 83.0
    assert abs(np.interp(mid, ours[::-1], xc[::-1]) - 50.0) > 0.3


# --------------------------------------------------------------------------- rational evaluation of e^{-τK}
def test_rational_approximation_of_exp_is_uniform_to_1e13():
    # Trefethen, Weideman & Schmelzer (2006, BIT 46:653) give the CF approximation of e^t on
    # (-inf, 0] with error ~ 9.28903^-n (Cody, Meinardus & Varga 1969 rate): 9.28903^-14 = 2.8e-14.
    # Checked here against numpy's exp over 26 decades of x = -t.
    from zoneprofile.diffusion.solver import rational_exp_coefficients

    a0, poles, weights = rational_exp_coefficients()
    assert poles.size == 7 and np.all(poles.imag > 0)
    x = np.concatenate([[0.0], np.geomspace(1e-12, 1e14, 50001)])
    r = a0 + np.sum((weights[None, :] / (x[:, None] + poles[None, :])).real, axis=1)
    err = np.max(np.abs(r - np.exp(-x)))
    assert err < 1e-13
    assert err > 1e-16  # a rational function of degree 14 cannot be exact: the check can fail


# Round-off bound for comparing the two exact-in-time paths (derivation, in the symmetric variables
# v = S u of the solver; K symmetric positive semi-definite, eigenvalues in [0, λ_max], u = 2.2e-16):
#
# rational path  r(τK) v = a0 v + Re Σ_k c_k (τK + p_k I)^{-1} v
#   * approximation: ||r(τK) - e^{-τK}||₂ = max over the spectrum |r(x) - e^{-x}| ≤ E_rat = 1e-13
#     (K symmetric; E_rat checked above against numpy's exp over 26 decades);
#   * each solve: LAPACK gtsv is Gaussian elimination with partial pivoting, backward stable for a
#     tridiagonal matrix with growth factor ≤ 2 (Higham 2002, Accuracy and Stability of Numerical
#     Algorithms, 2nd ed., ch. 9; from memory): (A + ΔA) x̂ = v, ||ΔA||₂ ≤ c_ge u ||A||₂, with
#     c_ge = 10 (growth 2, three entries a row, complex arithmetic). A = τK + p_k I is normal, so
#     ||A^{-1}||₂ = 1/d_k, d_k = min_{x ≥ 0} |x + p_k| (= |p_k| for Re p_k ≥ 0, Im p_k otherwise) and
#     ||x̂ - x||₂ ≤ ||A^{-1}|| ||ΔA|| ||x̂|| ≤ c_ge u (τ λ_max + |p_k|) / d_k² · ||v||₂;
#     summed with the weights: E_solve(τ) = Σ_k |c_k| c_ge u (τ λ_max + |p_k|) / d_k².
#     This is the conditioning of the problem showing through: e^{-τK} has relative condition
#     number τ||K||₂ = τ λ_max for a normal matrix (Higham 2008, Functions of Matrices, §10.2; from
#     memory), so at τ λ_max = 4e7 no float64 method agrees with another to better than ~1e-8.
# spectral path  Q e^{-τΛ} Qᵀ v  (LAPACK symmetric tridiagonal eigensolver: eigenpairs exact for
#     K + E, ||E||₂ ≤ n u ||K||₂, Q orthogonal to n u; LAPACK Users' Guide §4.7, p(n) = n; from memory):
#     ||e^{-τ(K+E)} - e^{-τK}||₂ ≤ τ ||E||₂ for symmetric positive semi-definite K, plus the
#     non-orthogonality of Q: E_spec(τ) = c_ge n u (τ λ_max + 1).
# In concentration: C = (w/s) v, so ||ΔC||_∞ ≤ max(w/s) ||Δv||₂ with ||Δv||₂ ≤ (E_rat + E_solve +
# E_spec) ||v||₂; the mass Σ V C = Σ s v, so |ΔM| ≤ ||s||₂ ||Δv||₂ (rational path only: E_rat +
# E_solve). These are worst-case bounds: the differences measured on several BLAS kernels are
# 100-1000 times smaller; a wrong pole, weight or sign gives differences of order 1e-3 and above.
_C_GE = 10.0
_E_RAT = 1e-13
_U = np.finfo(float).eps


def _rational_solve_error(tau, lam_max):
    from zoneprofile.diffusion.solver import rational_exp_coefficients

    _, poles, weights = rational_exp_coefficients()
    d = np.where(poles.real >= 0, np.abs(poles), poles.imag)
    return float(np.sum(np.abs(weights) * _C_GE * _U * (tau * lam_max + np.abs(poles)) / d**2))


@pytest.mark.parametrize("closed", [True, False])
def test_rational_evolution_equals_spectral(closed):
    # self-consistency of the two exact-in-time paths: rational (seven tridiagonal solves)
    # and spectral (eigendecomposition) on the An-coupled operator, from a sharp step;
    # tolerance: the round-off bound derived above, for each τ
    g, x_an, op = _an_problem(closed=closed)
    c0 = g.cell_average(([50.0], [30.0, 90.0]))
    taus = np.array([1e-4, 0.3, 12.0, 400.0, 1e5])
    rim_value = None if closed else 40.0
    spectral = op.evolve(c0, taus, rim_value=rim_value)
    fresh = LinearDiffusion(g, op.d_rel, weight=op.weight, rim=op.rim)
    rational = fresh.evolve(c0, taus, rim_value=rim_value, method="rational")
    assert not fresh.decomposed  # no eigendecomposition was needed
    css = op.steady_state(rim_value)
    v_norm = np.linalg.norm(op._to_sym * (c0 if css is None else c0 - css))
    lam_max = float(op.eigenvalues.max())
    e_solve = np.array([_rational_solve_error(t, lam_max) for t in taus])
    e_spec = _C_GE * g.n * _U * (taus * lam_max + 1.0)
    bound = np.max(op._from_sym) * (_E_RAT + e_solve + e_spec) * v_norm
    diff = np.max(np.abs(rational - spectral), axis=0)
    assert np.all(diff <= bound), (diff, bound)
    assert bound[0] < 1e-8 * np.max(np.abs(c0))  # the bound is tight where the problem is well conditioned
    # and the rational path conserves mass in a closed system too
    if closed:
        m0 = fresh.mass(c0)
        mass_bound = np.linalg.norm(fresh._s) * (_E_RAT + e_solve) * v_norm / m0
        assert np.all(np.abs(fresh.mass(rational) - m0) / m0 <= mass_bound)


def test_rational_generator_derivative():
    # d/dτ e^{-τK} v = -K e^{-τK} v: the analytic derivative against a central difference
    # (step 1e-3: truncation ~1e-10, round-off of the 1e-13 approximation / step ~1e-10)
    # and against the eigendecomposition, -Q Λ e^{-Λτ} Qᵀ v
    g, x_an, op = _an_problem(closed=False)
    rng = np.random.default_rng(3)
    v = rng.random(g.n)
    tau, h = 5.0, 1e-3
    num = (op.decay_rational(v, tau + h) - op.decay_rational(v, tau - h)) / (2 * h)
    ana = -op.apply_k(op.decay_rational(v, tau))
    scale = np.max(np.abs(ana))
    assert np.max(np.abs(num - ana)) < 1e-6 * scale
    lam, q = op.eigenvalues, op._q
    spectral = -(q @ (lam * np.exp(-lam * tau) * (q.T @ v)))
    assert np.max(np.abs(spectral - ana)) < 1e-8 * scale


def test_rational_evolution_matches_crank_erf():
    # Crank (1975) eq. 2.14 through the rational path (same tolerance as the spectral check above)
    g = uniform_grid(200.0, 400)
    c0 = np.where(g.centres_um < 100.0, 2.0, 6.0)
    op = LinearDiffusion(g, 1.0)
    for tau in (1.0, 10.0, 100.0):
        c = op.evolve(c0, tau, method="rational")
        ref = 4.0 + 2.0 * erf((g.centres_um - 100.0) / (2 * math.sqrt(tau)))
        assert np.max(np.abs(c - ref)) < 0.02 / tau
    with pytest.raises(Exception, match="method"):
        op.evolve(c0, 1.0, method="implicit")
