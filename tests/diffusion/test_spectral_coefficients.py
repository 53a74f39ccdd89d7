"""The spectral coefficients of a moved boundary, updated from the cells it crossed,
equal the full product computed afresh.

The update adds (basis(b) - basis(b_prev)) restricted to the changed cells times
the modal matrix: mathematically the same sum as the full product, in another
order. Rounding of an n-term sum is ≤ n·ε·Σ|terms| (Higham 2002, §4.2); with
N ≈ 300 cells, ε = 2.2e-16 and at most 256 updates chained between full products,
the relative error stays below 256 · 300 · 2.2e-16 ≈ 2e-11. The test allows 1e-10.
"""

from __future__ import annotations

import numpy as np
import pytest

from zoneprofile.diffusion._problem import LinearModel, Problem
from zoneprofile.diffusion.grid import refined_grid
from zoneprofile.diffusion.laws import default_law


def _model(geometry_pad=60.0):
    x = np.linspace(0.0, 60.0, 31)
    grid = refined_grid(0.0, 60.0 + geometry_pad, 0.0, 63.0, 300, growth=1.05)
    problem = Problem(element="Mg", mineral="plagioclase", law=default_law("Mg", "plagioclase"), grid=grid,
                      x_um=x, y=np.zeros_like(x), sigma=None, beam_um=3.0, beam_shape="gaussian", rim="open",
                      value_names=("outer", "inner"), coupling="an", x_an_cells=np.full(grid.n, 0.6),
                      partition_ab=(-26100.0, -25000.0), law_kwargs={}, reference={"x_an": 0.6})
    return LinearModel(problem, 1000.0, evaluator="spectral")


def _full(model, b):
    return (model.initial.basis(model.problem.grid, b) - model._css) @ model.operator._in.T


@pytest.mark.parametrize("step_um", [0.05, 0.7, 5.0])
def test_updated_coefficients_equal_the_full_product(step_um):
    model = _model()
    model.expect_evaluations(10**6)  # the eigendecomposition route
    rng = np.random.default_rng(7)
    b = 30.0
    worst, updated = 0.0, 0
    for _ in range(600):  # more than two refresh periods
        b = float(np.clip(b + rng.normal(0.0, step_um), 5.0, 55.0))
        got, want = model._coef(b), _full(model, b)
        worst = max(worst, float(np.max(np.abs(got - want)) / np.max(np.abs(want))))
        updated = max(updated, model._coef_updates)
    assert updated > 0  # the update route was taken
    assert worst < 1e-10


def test_a_repeated_boundary_returns_the_same_coefficients():
    model = _model()
    first = model._coef(20.0).copy()
    model._coef(20.3)
    assert np.allclose(model._coef(20.0), first, rtol=0, atol=1e-12 * np.max(np.abs(first)))
