"""Small pieces of the diffusion stage and the inputs fit_boundary refuses (in-process, fast)."""

import math

import numpy as np
import pytest

from zoneprofile._validation import InputError
from zoneprofile.diffusion import (
    FitResult,
    LinearCooling,
    TablePath,
    beam_matrix,
    find_boundaries,
    fit_boundary,
    refined_grid,
    simulate_boundary,
    uniform_grid,
)
from zoneprofile.diffusion.grid import Grid
from zoneprofile.diffusion.resolution import beam_sigma_um


def _step(n=30, spacing=2.0, at=30.0):
    x = np.arange(n) * spacing
    return x, np.where(x < at, 900.0, 600.0)


def test_public_surface_reexports_laws_and_partitioning():
    import zoneprofile.diffusion as d

    for name in ("LAWS", "get_law", "default_law", "partition_coefficient", "partition_parameters",
                 "fit_boundary", "simulate_boundary", "FitResult"):
        assert hasattr(d, name)


def test_beam_width_conventions():
    # FWHM = 2 sqrt(2 ln 2) σ for a Gaussian; a top hat of width W has variance W²/12 (common practice)
    assert beam_sigma_um(2.3548200450309493) == pytest.approx(1.0)
    assert beam_sigma_um(6.0, "square") ** 2 == pytest.approx(3.0)
    g = uniform_grid(100.0, 1000)
    m = beam_matrix(g, [50.0, 0.0], beam_um=10.0, shape="square")
    assert np.allclose(m.sum(axis=1), 1.0)
    assert np.count_nonzero(m[0]) == 100  # 10 µm of 0.1 µm cells
    assert np.count_nonzero(m[1]) == 50  # half the spot is outside the crystal


def test_cell_average_is_volume_weighted_in_a_sphere():
    # invariant: the mean of a step over a sphere equals its volume fraction
    g = uniform_grid(10.0, 7, geometry="sphere", radius_um=10.0)
    c = g.cell_average(([5.0], [1.0, 0.0]))  # 1 in the outer shell r > 5
    assert np.sum(c * g.volumes) / np.sum(g.volumes) == pytest.approx(1 - 0.5**3)


def test_refined_grid_reaches_its_ends():
    g = refined_grid(0.0, 500.0, 20.0, 80.0, 120)
    assert g.faces_um[0] == 0.0 and g.faces_um[-1] == 500.0
    assert np.all(np.diff(g.faces_um) > 0)
    with pytest.raises(InputError):
        Grid(np.array([0.0, 1.0, 1.0]))


def test_find_boundaries_picks_the_largest_steps():
    x = np.arange(0, 100, 1.0)
    y = np.where(x < 30, 1.0, 5.0) + np.where(x < 70, 0.0, 2.0)
    assert find_boundaries(x, y, count=2) == [29.5, 69.5]


def test_path_tables_are_checked():
    with pytest.raises(InputError, match="start at 0"):
        TablePath((1.0, 2.0), (900.0, 800.0))
    with pytest.raises(InputError):
        TablePath((0.0, 2.0), (900.0, 1800.0))
    with pytest.raises(InputError):
        LinearCooling(900.0, -1.0)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(element="Zn", mineral="plagioclase"), "unknown element"),
        (dict(element="Sr", mineral="garnet"), "unknown mineral"),
        (dict(element="Sr", mineral="plagioclase", temperature_c=-1), "valid: from 400 to 1500 °C"),
        (dict(element="Sr", mineral="plagioclase", temperature_c=1601), "valid: from 400 to 1500 °C"),
        (dict(element="Sr", mineral="plagioclase", an=None), "needs An"),
        (dict(element="Sr", mineral="plagioclase", boundary_um=400.0), "outside the profile"),
        (dict(element="Sr", mineral="plagioclase", boundary_um=3.0), "too few points"),
        (dict(element="Sr", mineral="plagioclase", draws=3), "draws"),
        (dict(element="Sr", mineral="plagioclase", law="zellmer1999-sr-plag", rim="sideways"), "rim"),
        (dict(element="Ti", mineral="quartz", law="costa2003-mg-plag"), "not Ti"),
    ],
)
def test_fit_boundary_refuses(kwargs, message):
    x, y = _step()
    base = dict(temperature_c=1000.0, an=np.full(x.size, 60.0), draws=50, noise_refits=0)
    base.update(kwargs)
    with pytest.raises(InputError, match=message):
        fit_boundary(x, y, **base)


def test_fit_boundary_refuses_flat_and_negative_profiles():
    x, y = _step()
    with pytest.raises(InputError, match="flat"):
        fit_boundary(x, np.full(x.size, 500.0), element="Ti", mineral="quartz", temperature_c=800)
    y = y.copy()
    y[3] = -1.0
    with pytest.raises(InputError, match="negative"):
        fit_boundary(x, y, element="Ti", mineral="quartz", temperature_c=800)


def test_simulate_boundary_long_time_mirrors_an():
    # docs/references.md §5: the long-time state is C ∝ exp(A·X_An/RT), not flat (Bindeman et al. 1998 A)
    from zoneprofile.diffusion import partition_parameters

    x = np.array([10.0, 90.0])
    an = lambda d: np.where(np.asarray(d) < 50.0, 40.0, 80.0)  # noqa: E731
    c = simulate_boundary(x, element="Sr", mineral="plagioclase", temperature_c=1000.0, time_days=1e7,
                          boundary_um=50.0, inner=300.0, outer=300.0, an=an)
    a, _ = partition_parameters("Sr")
    assert c[0] / c[1] == pytest.approx(math.exp(a * (0.4 - 0.8) / (8.314462618 * 1273.15)), rel=1e-6)


def test_result_round_trip_and_report():
    from zoneprofile.diffusion import synthetic_boundary_profile

    data, truth = synthetic_boundary_profile(seed=2, element="Ti", mineral="quartz", temperature_c=850.0,
                                             time_days=2000.0, outer=20.0, inner=60.0, beam_um=2.0)
    r = fit_boundary(data["distance_um"], data["value"], element="Ti", mineral="quartz", temperature_c=850.0,
                     temperature_sd_c=20.0, beam_um=2.0, draws=400, noise_refits=8)
    assert isinstance(r, FitResult)
    d = r.to_dict()
    assert d["time_days"]["p2_5"] <= d["time_days"]["median"] <= d["time_days"]["p97_5"]
    assert r.time_draws_days.shape == (400,)
    # temperature dominates the budget for a well-resolved profile (±20 °C ≈ 0.2 log units)
    assert d["uncertainty_budget_log10_time_sd"]["temperature"] > d["uncertainty_budget_log10_time_sd"][
        "analytical_noise"]
    text = r.report()
    assert "log10 D·t" in text and "hazard" in text


def test_auto_boundary_keeps_to_its_own_zones():
    # two diffused steps (Crank eq. 2.14 erf each, far apart): the largest is dated on the part of the
    # profile beyond the other step's diffused zone (its centre + 2.5 s, s = √(2·D·t) = √32 µm), so the
    # other step does not bias it
    from scipy.special import erf

    x = np.arange(0.5, 160.0, 1.0)
    dt = 16.0  # µm²
    y = 20.0 + 10.0 * (1 + erf((x - 40.0) / (2 * math.sqrt(dt)))) / 2 + 30.0 * (
        1 + erf((x - 110.0) / (2 * math.sqrt(dt)))) / 2
    y = y + np.random.default_rng(0).normal(0, 0.2, x.size)
    r = fit_boundary(x, y, element="Ti", mineral="quartz", temperature_c=800.0, draws=50, noise_refits=5)
    assert r.position_um == pytest.approx(110.0, abs=0.5)
    assert r.setup["segment_um"][0] >= 40.0 + 2.5 * math.sqrt(2 * dt) - 1.0
    assert r.setup["window"]["dated_alone"] is True
    assert 10 ** (r.log10_dt_m2["best"] + 12) == pytest.approx(dt, rel=0.1)


def test_square_spot_matches_quadrature_on_an_erf():
    # a square LA-ICP-MS spot of width W reports the mean of the profile over [x - W/2, x + W/2];
    # scipy.integrate.quad on the analytical erf (Crank eq. 2.14) is the independent reference
    from scipy.integrate import quad
    from scipy.special import erf

    g = uniform_grid(200.0, 4000)
    f = lambda s: 0.5 + 0.5 * erf((s - 100.0) / 6.0)  # noqa: E731
    cells = f(g.centres_um)
    pts = np.array([90.0, 97.0, 100.0, 104.5])
    seen = beam_matrix(g, pts, beam_um=12.0, shape="square") @ cells
    ref = [quad(f, p - 6.0, p + 6.0)[0] / 12.0 for p in pts]
    assert np.allclose(seen, ref, atol=2e-5)
