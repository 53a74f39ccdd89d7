"""A T–t path is fitted on the path: the temperature given beside it plays no part.

Invariants (no outside reference needed for these): with the same data and
path, the result does not depend on ``temperature_c`` (it once moved 17.0 d ->
11.6 d between 1050 and 900 °C); a path held at one temperature gives the
isothermal fit at that temperature (``∫D dt = D·t``); and the effective
temperature solves ``D(T_eff) = mean of D along the path`` (checked against
scipy's ``quad`` on the Arrhenius law itself).
"""

import numpy as np
import pytest
from scipy.integrate import quad

from zoneprofile.diffusion import TablePath, default_law, fit_boundary, synthetic_boundary_profile
from zoneprofile.diffusion._pathfit import effective_temperature_c


@pytest.fixture(scope="module")
def profile():
    data, _ = synthetic_boundary_profile(seed=1, element="Mg", mineral="plagioclase", temperature_c=1000.0,
                                         time_days=30.0, outer=12000.0, inner=8000.0, an_outer=72.0,
                                         an_inner=52.0, beam_um=3.0, noise_fraction=0.01)
    return data


def _fit(data, **kw):
    return fit_boundary(data["distance_um"], data["value"], element="Mg", mineral="plagioclase", an=data["An"],
                        beam_um=3.0, draws=200, noise_refits=10, **kw)


def test_the_temperature_beside_a_path_plays_no_part(profile):
    path = TablePath((0.0, 60.0), (1050.0, 950.0))
    a = _fit(profile, temperature_c=1050.0, path=path)
    b = _fit(profile, temperature_c=900.0, path=path)
    assert a.time_days["median"] == pytest.approx(b.time_days["median"], rel=1e-9)
    assert 950.0 < a.setup["path_shape_temperature_c"] < 1050.0
    assert sum("fitted on the path" in w for w in a.warnings) == 1
    assert not any("starting temperature" in w for w in a.warnings)


def test_a_constant_path_is_the_isothermal_fit(profile):
    flat = _fit(profile, temperature_c=700.0, path=TablePath((0.0, 500.0), (1000.0, 1000.0)))
    iso = _fit(profile, temperature_c=1000.0)
    # same model and draws; the path integral on a 4000-point time grid (trapezoid) is exact for constant D
    assert flat.time_days["best"] == pytest.approx(iso.time_days["best"], rel=1e-3)


def test_effective_temperature_against_quad():
    law = default_law("Sr", "plagioclase")
    path = TablePath((0.0, 40.0), (1080.0, 960.0))

    def d(temps):
        return law.d_m2_s(np.asarray(temps, float), x_an=0.6)

    te = effective_temperature_c(path, d, 30.0)
    mean, _ = quad(lambda t: float(d(np.interp(t, path.time_days, path.temperature_c))), 0.0, 30.0)
    assert float(d(np.array([te]))[0]) == pytest.approx(mean / 30.0, rel=1e-4)
