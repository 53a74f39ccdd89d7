"""The fast inner loop of a fit: model derivatives, the two evaluators, variable-projection refits.

Independent references: central differences of the model itself (for the
analytic derivatives) and ``scipy.optimize.least_squares`` on the full problem
(all four parameters free, finite-difference Jacobian) for the variable
projection (Golub & Pereyra 1973: the projected problem has the same minimum).
The data are invented (seeded forward model); these are self-consistency tests.
"""

import math

import numpy as np
import pytest
from scipy.optimize import least_squares

from zoneprofile.diffusion import get_law, partition_parameters, synthetic_boundary_profile
from zoneprofile.diffusion._problem import Problem
from zoneprofile.diffusion.fitting import _build_grid, _coarse_start, _projected_fit, _refit_projected
from zoneprofile.diffusion.grid import refined_grid


def _mg_problem(rim="open", seed=0, geometry="planar"):
    """An-coupled Mg in plagioclase (Costa et al. 2003 law, Bindeman et al. 1998 partitioning)."""
    data, truth = synthetic_boundary_profile(seed=seed, element="Mg", mineral="plagioclase", temperature_c=900.0,
                                             time_days=30.0, boundary_um=40.0, outer=12000.0, inner=8000.0,
                                             an_outer=72.0, an_inner=52.0, beam_um=4.0, noise_fraction=0.015)
    x, y = data["distance_um"], data["value"]
    radius = 300.0 if geometry != "planar" else None
    grid = _build_grid(x, True, geometry, radius, 4.0, "gaussian", 400)
    x_an = np.interp(grid.centres_um, x, data["An"] / 100.0)
    problem = Problem(element="Mg", mineral="plagioclase", law=get_law("costa2003-mg-plag"), grid=grid, x_um=x,
                      y=y, sigma=None, beam_um=4.0, beam_shape="gaussian", rim=rim,
                      value_names=("melt_outer", "melt_inner"), coupling="an", x_an_cells=x_an,
                      partition_model="bindeman1998", partition_ab=tuple(partition_parameters("Mg")),
                      reference={"x_an": 0.62})
    return problem, truth


def _step_problem(geometry="sphere"):
    """Ti in quartz, plain step (no coupling), curved geometry."""
    data, truth = synthetic_boundary_profile(seed=2, element="Ti", mineral="quartz", temperature_c=800.0,
                                             time_days=3000.0, outer=80.0, inner=40.0, beam_um=5.0,
                                             noise_fraction=0.02)
    x, y = data["distance_um"], data["value"]
    grid = _build_grid(x, True, geometry, 400.0, 5.0, "gaussian", 400)
    problem = Problem(element="Ti", mineral="quartz", law=get_law("cherniak2007-ti-quartz"), grid=grid, x_um=x, y=y,
                      sigma=None, beam_um=5.0, beam_shape="gaussian", rim="closed", value_names=("outer", "inner"))
    return problem, truth


@pytest.mark.parametrize("geometry", ["planar", "cylinder", "sphere"])
def test_fraction_beyond_derivative_matches_central_difference(geometry):
    grid = refined_grid(0.0, 200.0, 10.0, 90.0, 80, geometry=geometry, radius_um=None if geometry == "planar"
                        else 200.0)
    for pos in (10.37, 41.3, 77.77):
        h = 1e-6
        num = (grid.fraction_beyond([pos + h])[0] - grid.fraction_beyond([pos - h])[0]) / (2 * h)
        ana = grid.fraction_beyond_derivative(pos)
        assert np.count_nonzero(ana) == 1
        assert np.allclose(ana, num, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("evaluator", ["spectral", "rational"])
@pytest.mark.parametrize("maker", [_mg_problem, _step_problem])
def test_model_derivatives_match_central_differences(evaluator, maker):
    problem, truth = maker()
    model = problem.model(900.0 if problem.element == "Mg" else 800.0, evaluator=evaluator)
    lg, b = truth["log10_dt_m2"], 40.3
    a, da, db = model.basis_jacobian(lg, b, wrt_boundary=True)
    h = 1e-5
    num_log = (model.basis_predictions(lg + h, b) - model.basis_predictions(lg - h, b)) / (2 * h)
    hb = 1e-5  # inside one cell: the cell-averaged step is linear in the position there
    num_b = (model.basis_predictions(lg, b + hb) - model.basis_predictions(lg, b - hb)) / (2 * hb)
    scale = np.max(np.abs(a))
    assert np.max(np.abs(da - num_log)) < 1e-6 * scale
    assert np.max(np.abs(db - num_b)) < 1e-6 * scale
    assert model.spectral == (evaluator == "spectral")


def test_evaluators_agree_and_auto_decomposes_when_worth_it():
    problem, truth = _mg_problem()
    spectral = problem.model(900.0, evaluator="spectral")
    rational = problem.model(900.0, evaluator="rational")
    logs = truth["log10_dt_m2"] + np.array([-3.0, -1.0, 0.0, 0.5, 2.0])
    a_s = spectral.basis_predictions_batch(logs, 40.0)
    a_r = rational.basis_predictions_batch(logs, 40.0)
    assert np.max(np.abs(a_s - a_r)) < 1e-10 * np.max(np.abs(a_s))
    auto = problem.model(900.0)
    auto.basis_predictions_batch(logs, 40.0)
    assert not auto.spectral  # five evaluations: no decomposition
    auto.expect_evaluations(auto.AUTO_LIMIT)
    assert auto.spectral
    assert np.max(np.abs(auto.basis_predictions_batch(logs, 40.0) - a_s)) < 1e-12 * np.max(np.abs(a_s))
    # the cells of several parameter sets at once equal one at a time
    thetas = np.array([[truth["log10_dt_m2"] + d, 40.0, 11000.0 + 100 * d, 8100.0] for d in (-0.2, 0.0, 0.3)])
    many = spectral.cells_many(thetas)
    one = np.array([spectral.cells(th)[0] for th in thetas])
    assert np.max(np.abs(many - one)) < 1e-9 * np.max(np.abs(one))


def _full_least_squares(model, y, start, lower, upper, vary):
    """The reference: scipy least_squares on all free parameters (finite-difference Jacobian)."""
    free = np.flatnonzero(vary)
    theta = np.array(start, float)

    def resid(p):
        th = theta.copy()
        th[free] = p
        return model.predict(th) - y

    x0 = np.clip(theta[free], lower[free] + 1e-9, upper[free] - 1e-9)
    sol = least_squares(resid, x0, bounds=(lower[free], upper[free]), x_scale="jac", xtol=1e-12, ftol=1e-12,
                        gtol=1e-12)
    out = theta.copy()
    out[free] = sol.x
    return out, 2.0 * sol.cost


@pytest.mark.parametrize("evaluator", ["spectral", "rational"])
@pytest.mark.parametrize("free_boundary", [False, True])
def test_projected_fit_equals_full_least_squares(evaluator, free_boundary):
    problem, truth = _mg_problem()
    model = problem.model(900.0, evaluator=evaluator)
    y = problem.y
    w = np.ones_like(y)
    lower = np.array([truth["log10_dt_m2"] - 3.0, 37.0, 0.0, 0.0])
    upper = np.array([truth["log10_dt_m2"] + 3.0, 43.0, 1e6, 1e6])
    vary = [True, free_boundary, True, True]
    start = _coarse_start(model, y, w, (lower[0], upper[0]), (37.0, 43.0), 40.5, not free_boundary)
    ours, cost = _projected_fit(model, y, w, start, lower, upper, vary)
    ref, ref_cost = _full_least_squares(model, y, start, lower, upper, np.array(vary))
    assert cost[0] <= ref_cost * (1 + 1e-8)  # at least as good a minimum
    assert ours[0, 0] == pytest.approx(ref[0], abs=2e-5)  # log10 D·t
    assert ours[0, 1] == pytest.approx(ref[1], abs=2e-4)  # µm
    assert np.allclose(ours[0, 2:], ref[2:], rtol=1e-4)
    # the truth is recovered to the usual precision (log10 D·t within 0.1; REFERENCES-style check
    # in test_fit_recovery; here only a sanity bound on a single noisy profile)
    assert abs(ours[0, 0] - truth["log10_dt_m2"]) < 0.15


def test_projected_fit_vectorised_equals_one_at_a_time_and_honours_bounds():
    problem, truth = _step_problem()
    model = problem.model(800.0, evaluator="spectral")
    y = problem.y
    w = np.full(y.size, 1.0 / 0.8)
    rng = np.random.default_rng(7)
    ys = y[None, :] + rng.normal(0.0, 0.8, (6, y.size))
    lg = truth["log10_dt_m2"]
    lower = np.array([lg - 4.0, 35.0, 0.0, 0.0])
    upper = np.array([lg + 4.0, 45.0, 200.0, 200.0])
    vary = [True, True, True, True]
    start = np.array([lg + 0.3, 40.5, 80.0, 40.0])
    together, costs = _projected_fit(model, ys, w, start, lower, upper, vary)
    for k in range(ys.shape[0]):
        alone = _refit_projected(model, ys[k], w, start, lower, upper, vary)
        assert np.allclose(alone, together[k], rtol=1e-6, atol=1e-5)
        r = (model.predict(together[k]) - ys[k]) * w
        assert costs[k] == pytest.approx(float(r @ r), rel=1e-10)
    # an upper bound below the optimum of log10 D·t: the fit stops on the bound
    capped = upper.copy()
    capped[0] = lg - 1.0
    held, _ = _projected_fit(model, y, w, start - np.array([1.5, 0, 0, 0]), lower, capped, vary)
    assert held[0, 0] == pytest.approx(capped[0], abs=1e-12)
    assert math.isfinite(held[0, 1]) and lower[1] <= held[0, 1] <= upper[1]
