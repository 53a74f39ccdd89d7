"""The non-linear (olivine Fe–Mg) path: stacked implicit integration, paired residual and Jacobian.

Independent references: scipy.optimize.least_squares with its own forward
differences (``jac='2-point'``) for the Jacobian the fit is given; a fine-step
run of the same implicit scheme (2000 steps from 1e-5·τ, Picard tolerance 1e-13) for the
time stepping; integrating each column alone for the stacked solves. D(Fo)
follows the composition term of Dohmen & Chakraborty (2007),
D ∝ 10^(3·(X_Fe − 0.1)). The profiles are invented (seeded forward model):
self-consistency tests.
"""

import numpy as np
import pytest
from scipy.optimize import least_squares

from zoneprofile.diffusion import evolve_nonlinear, refined_grid, synthetic_boundary_profile
from zoneprofile.diffusion._problem import NonlinearModel, Problem, _forward_steps
from zoneprofile.diffusion.fitting import _ResidualAndJacobian, _build_grid, _least_squares
from zoneprofile.diffusion.laws import default_law


def _d_fo(fo):
    return 10 ** (3 * ((1 - fo / 100) - 0.1))


def _columns(grid, rng, count=6):
    cols, taus, rims = [], [], []
    for _ in range(count):
        b = 30 + 40 * rng.random()
        cols.append(np.where(grid.centres_um < b, 78 + rng.random(), 86 + rng.random()))
        taus.append(10 ** rng.uniform(-1, 3))
        rims.append(77.0 + rng.random())
    return np.column_stack(cols), np.array(taus), np.array(rims)


@pytest.mark.parametrize("rim", ["open", "closed"])
def test_stacked_columns_equal_single_integrations(rim):
    # one gtsv call on the block-tridiagonal stack: the same eliminations as each column alone
    g = refined_grid(0.0, 400.0, 0.0, 120.0, 200, growth=1.1)
    c0, taus, rims = _columns(g, np.random.default_rng(5))
    taus[2] = 0.0  # a column not moved at all stays as it is
    many = evolve_nonlinear(g, c0, taus, _d_fo, rim=rim, rim_value=rims)
    for k in range(c0.shape[1]):
        one = evolve_nonlinear(g, c0[:, k], taus[k], _d_fo, rim=rim, rim_value=rims[k])
        assert np.array_equal(many[:, k], one)
    assert np.array_equal(many[:, 2], c0[:, 2])
    if rim == "closed":  # mass conserved column by column
        assert np.allclose(g.volumes @ many, g.volumes @ c0, rtol=1e-12)


@pytest.mark.slow  # 3.5 s CPU on an idle core, 19 s with the machine shared
def test_default_steps_against_a_fine_step_reference():
    # 24 geometric steps from 3 % of τ (3 backward-Euler start-up steps) against 2000 steps from
    # 1e-5·τ, over seven decades of τ on a fit's grid: below 2e-3 Fo for an 8 Fo step and well below
    # the earlier 60 steps from 1e-4·τ (measured: 1.7e-3 vs 2.9e-3 Fo at worst)
    x = np.arange(1.0, 110.0, 2.0)
    grid = _build_grid(x, True, "planar", None, 2.0, "gaussian", 400)
    c0 = np.where(grid.centres_um < 50.0, 80.0, 88.0)
    worst_new = worst_old = 0.0
    for rim in ("open", "closed"):
        for log_tau in (-2.5, -1.5, -0.5, 0.5, 1.5, 2.5, 3.5, 4.5):
            tau = 10.0 ** log_tau
            fine = evolve_nonlinear(grid, c0, tau, _d_fo, rim=rim, rim_value=80.0, n_steps=2000, first_fraction=1e-5,
                                    startup_steps=4, tol=1e-13)
            new = evolve_nonlinear(grid, c0, tau, _d_fo, rim=rim, rim_value=80.0)
            old = evolve_nonlinear(grid, c0, tau, _d_fo, rim=rim, rim_value=80.0, n_steps=60, first_fraction=1e-4,
                                   startup_steps=4)
            worst_new = max(worst_new, float(np.max(np.abs(new - fine))))
            worst_old = max(worst_old, float(np.max(np.abs(old - fine))))
    assert worst_new < 2e-3
    assert worst_new < 0.7 * worst_old


def _olivine_model(rim="open"):
    data, _ = synthetic_boundary_profile(seed=7, element="FeMg", mineral="olivine", temperature_c=1150.0,
                                         time_days=20.0, boundary_um=50.0, outer=80.0, inner=88.0, an_outer=None,
                                         an_inner=None, noise_sd=0.3, fo2_pa=1e-6, beam_um=2.0, rim=rim)
    x, y = data["distance_um"], data["value"]
    grid = _build_grid(x, True, "planar", None, 2.0, "gaussian", 400)
    law = default_law("FeMg", "olivine")
    problem = Problem(element="FeMg", mineral="olivine", law=law, grid=grid, x_um=x, y=y, sigma=None, beam_um=2.0,
                      beam_shape="gaussian", rim=rim, value_names=("fo_outer", "fo_inner"), nonlinear=True,
                      law_kwargs={"fo2_pa": 1e-6}, reference={"x_fe": 0.16})
    return NonlinearModel(problem, 1150.0), y


@pytest.mark.parametrize("rim", ["open", "closed"])
def test_cells_many_rows_equal_cells(rim):
    model, _ = _olivine_model(rim)
    thetas = np.array([[-10.3, 49.0, 80.1, 87.9], [-10.8, 51.5, 79.6, 88.2], [-9.9, 50.2, 80.4, 88.0]])
    many = model.cells_many(thetas)
    for th, row in zip(thetas, many):
        assert np.array_equal(row, model.cells(th)[0])
    assert np.array_equal(model.predict_many(thetas)[1], model.predict(thetas[1]))


def test_forward_steps_are_scipys():
    # a forward difference at a point next to a bound is reversed (scipy's 1-sided scheme): the
    # Jacobian least_squares computes itself from these steps is the one given to it here
    x0 = np.array([-10.0, 5.0, 0.0])
    lb, ub = np.array([-12.0, 5.0 - 1e-3, -1.0]), np.array([-10.0 + 1e-9, 5.0 + 1e-12, 1.0])
    h = _forward_steps(x0, lb, ub)
    eps = np.finfo(float).eps ** 0.5
    assert h[0] == pytest.approx(-eps * 10.0)  # reversed: the forward step leaves the bound
    assert h[1] == pytest.approx(-eps * 5.0)
    assert h[2] == pytest.approx(eps)  # at zero: +√ε·1


@pytest.mark.parametrize("rim", ["open", "closed"])
def test_paired_jacobian_gives_the_same_fit_as_scipys_differences(rim):
    # scipy.optimize.least_squares with jac='2-point' (its own forward differences) as the reference:
    # the same path, bit for bit, with the neighbours integrated beside the residual
    model, y = _olivine_model(rim)
    weights = np.ones_like(y)
    lower = np.array([-14.0, 40.0, 60.0, 60.0])
    upper = np.array([-7.0, 60.0, 100.0, 100.0])
    start = np.array([-10.0, 52.0, 80.5, 87.5])

    def resid(theta):
        return (model.predict(theta) - y) * weights

    ref = least_squares(resid, start, bounds=(lower, upper), x_scale="jac", max_nfev=8)
    ours, sol = _least_squares(model, y, weights, start, lower, upper, max_nfev=8)
    assert np.array_equal(ours, ref.x)
    assert np.array_equal(sol.jac, ref.jac)
    paired = _ResidualAndJacobian(model, y, weights, np.arange(4), lower, upper)
    assert np.array_equal(paired.residual(ref.x), resid(ref.x))
    assert paired.jacobian(ref.x).flags.f_contiguous  # the layout of scipy's own differences


def test_olivine_fit_reports_the_implicit_solver():
    data, truth = synthetic_boundary_profile(seed=9, element="FeMg", mineral="olivine", temperature_c=1180.0,
                                             time_days=40.0, boundary_um=50.0, outer=80.0, inner=88.0,
                                             an_outer=None, an_inner=None, noise_sd=0.3, fo2_pa=1e-6, beam_um=2.0)
    from zoneprofile.diffusion import fit_boundary

    r = fit_boundary(data["distance_um"], data["value"], element="FeMg", mineral="olivine", temperature_c=1180.0,
                     fo2_pa=1e-6, beam_um=2.0, draws=200, direction="[001]")  # the profile's own axis
    assert r.time_days["p2_5"] <= 40.0 <= r.time_days["p97_5"]
    assert np.all(r.band_low <= r.model + 1e-9) and np.all(r.band_high >= r.model - 1e-9)
