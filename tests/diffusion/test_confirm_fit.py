"""The last least-squares step of a boundary fit and its covariance (``_optimise._confirm_fit``).

The optimum and the standard errors were given by lmfit (``minimize(method=
"least_squares")``) until the fit called scipy's ``least_squares`` itself;
these tests hold the replacement to two independent references:

- lmfit 1.3 itself (a general fitting library, used here as the reference it
  was): the same residual, start, bounds and Jacobian give the same optimum and
  the same standard errors (lmfit's least_squares method: covariance
  ``inv(JᵀJ)`` scaled by the reduced χ², read in lmfit's ``minimizer.py``);
- numpy's ``polyfit(..., cov=True)`` for a model linear in its parameters,
  whose covariance is the textbook ``(AᵀWA)⁻¹·χ²/(n − p)`` (numpy's
  documentation of ``polyfit``).

Tolerances: the lmfit route performs the same floating-point operations in the
same order (same scipy solver, same inputs), so the agreement is to rounding
(1e-12 relative, well above the last-bit differences of re-running an SVD);
against polyfit the optimiser stops at its 1e-8 tolerances (ftol, xtol), so the
parameters agree to about 1e-7 relative and the standard errors, which depend
on the parameters only through the residual sum of squares, to 1e-6.
"""

import numpy as np
import pytest

from zoneprofile.diffusion._optimise import _confirm_fit


class _Poly:
    """y = Σ θ_k x^k (no ``jacobian_fd``: scipy's own forward differences)."""

    def __init__(self, x):
        self.x = x

    def predict(self, theta):
        return np.polyval(np.asarray(theta)[::-1], self.x)


def _olivine_model():
    from zoneprofile.diffusion import synthetic_boundary_profile
    from zoneprofile.diffusion._problem import NonlinearModel, Problem
    from zoneprofile.diffusion.fitting import _build_grid
    from zoneprofile.diffusion.laws import default_law

    d, _ = synthetic_boundary_profile(seed=2, element="FeMg", mineral="olivine", temperature_c=1170.0,
                                      time_days=30.0, boundary_um=50.0, outer=80.0, inner=88.0, an_outer=None,
                                      an_inner=None, noise_sd=0.3, fo2_pa=1e-6, beam_um=2.0, rim="closed")
    law = default_law("FeMg", "olivine")
    x, y = d["distance_um"], d["value"]
    grid = _build_grid(x, True, "planar", None, 2.0, "gaussian", 200)
    problem = Problem(element="FeMg", mineral="olivine", law=law, grid=grid, x_um=x, y=y, sigma=None, beam_um=2.0,
                      beam_shape="gaussian", rim="closed", value_names=("fo_outer", "fo_inner"), nonlinear=True,
                      law_kwargs={"fo2_pa": 1e-6}, reference={"x_fe": 0.16})
    model = NonlinearModel(problem, 1170.0)
    start = np.array([np.log10(float(law.d_m2_s(1170.0, x_fe=0.16, fo2_pa=1e-6)) * 25.0 * 86400.0), 50.3, 80.2,
                      87.8])
    lower, upper = start - [3.0, 10.0, 20.0, 20.0], np.minimum(start + [3.0, 10.0, 10.0, 10.0], 100.0)
    return model, y, np.full(y.size, 1.0 / 0.3), start, lower, upper


def _lmfit_reference(model, y, weights, names, start, lower, upper, vary):
    """The call the fit made before (lmfit's least_squares method, the paired Jacobian as Dfun)."""
    import warnings

    lmfit = pytest.importorskip("lmfit")
    from zoneprofile.diffusion._optimise import _ResidualAndJacobian

    params = lmfit.Parameters()
    for name, v, lo, hi, var in zip(names, start, lower, upper, vary):
        params.add(name, value=float(np.clip(v, lo, hi)), min=lo, max=hi, vary=var)
    kws = {}
    if hasattr(model, "jacobian_fd"):
        free = np.flatnonzero(vary)
        paired = _ResidualAndJacobian(model, y, weights, free, np.asarray(lower)[free], np.asarray(upper)[free])

        def resid(p):
            return paired.residual(np.array([p[n].value for n in names], float))

        kws["Dfun"] = lambda p: paired.jacobian(np.array([p[n].value for n in names], float))
    else:
        def resid(p):
            return (model.predict([p[n].value for n in names]) - y) * weights
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return lmfit.minimize(resid, params, method="least_squares", **kws)


@pytest.mark.parametrize("fixed", [False, True])
def test_nonlinear_fit_matches_lmfit(fixed):
    model, y, w, start, lower, upper = _olivine_model()
    vary = [True, not fixed, True, True]
    if fixed:
        lower[1], upper[1] = start[1] - 1e-6, start[1] + 1e-6
    names = ["log10_dt_m2", "boundary_um", "fo_outer", "fo_inner"]
    ours = _confirm_fit(model, y, w, names, start, lower, upper, vary)
    ref = _lmfit_reference(model, y, w, names, start, lower, upper, vary)
    np.testing.assert_allclose(ours.theta, [ref.params[n].value for n in names], rtol=1e-12)
    np.testing.assert_allclose(ours.stderr, [ref.params[n].stderr for n in names], rtol=1e-10)
    np.testing.assert_allclose(ours.covar, ref.covar, rtol=1e-10)
    assert ours.var_names == ref.var_names
    assert ours.redchi == pytest.approx(ref.redchi, rel=1e-12)
    assert ours.stderr[0] > 0
    if fixed:  # a fixed parameter has a standard error of 0, as lmfit reports it
        assert ours.stderr[1] == 0.0


def test_linear_model_matches_lmfit_and_polyfit():
    rng = np.random.default_rng(7)
    x = np.linspace(0.0, 10.0, 40)
    truth = np.array([2.0, -0.7, 0.05])
    sd = np.full(x.size, 0.2)
    y = _Poly(x).predict(truth) + rng.normal(0.0, 0.2, x.size)
    names = ["c0", "c1", "c2"]
    lower, upper = np.full(3, -100.0), np.full(3, 100.0)
    ours = _confirm_fit(_Poly(x), y, 1.0 / sd, names, [1.0, 0.0, 0.0], lower, upper, [True] * 3)
    ref = _lmfit_reference(_Poly(x), y, 1.0 / sd, names, [1.0, 0.0, 0.0], lower, upper, [True] * 3)
    np.testing.assert_allclose(ours.theta, [ref.params[n].value for n in names], rtol=1e-12)
    np.testing.assert_allclose(ours.stderr, [ref.params[n].stderr for n in names], rtol=1e-10)
    # numpy: weights 1/sd, covariance scaled by χ²/(n − p) (numpy.polyfit documentation, cov=True)
    coef, cov = np.polyfit(x, y, 2, w=1.0 / sd, cov=True)
    np.testing.assert_allclose(ours.theta, coef[::-1], rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(ours.covar, cov[::-1, ::-1], rtol=1e-6)
    assert ours.chi2 == pytest.approx(float(np.sum(((_Poly(x).predict(coef[::-1]) - y) / sd) ** 2)), rel=1e-9)


def test_singular_jacobian_gives_no_covariance():
    """Two parameters the data cannot tell apart: JᵀJ is singular, no covariance, no standard errors (as lmfit)."""

    class _Same:
        def predict(self, theta):
            return (theta[0] + theta[1]) * np.ones(5)

    y = np.array([1.0, 1.1, 0.9, 1.0, 1.05])
    args = (_Same(), y, np.ones(5), ["a", "b"], [0.3, 0.3], [-5.0, -5.0], [5.0, 5.0], [True, True])
    out = _confirm_fit(*args)
    ref = _lmfit_reference(*args)
    assert out.theta[0] + out.theta[1] == pytest.approx(np.mean(y), rel=1e-6)
    assert out.covar is None and out.stderr == (None, None)
    assert getattr(ref, "covar", None) is None and [ref.params[n].stderr for n in "ab"] == [None, None]
