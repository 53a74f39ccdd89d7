"""Map calibration: robust line, uncertainties, counting statistics, refusals."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from zoneprofile import InputError
from zoneprofile.maps import calibrate_map, spot_signals, synthetic_zoned_map
from zoneprofile.maps.calibration import fit_line_robust


def _spots(sp):
    return pd.DataFrame({"row": np.arange(len(sp)) + 2, "label": sp["spot"], "x_px": sp["x_px"], "y_px": sp["y_px"],
                         "value": sp["An"], "spot_um": sp["spot_um"], "phase": ""})


def test_least_squares_matches_scipy_linregress():
    # independent reference: scipy.stats.linregress (slope, intercept and their standard errors)
    rng = np.random.default_rng(3)
    x = rng.uniform(40, 80, 9)
    y = 11.0 * x + 130 + rng.normal(0, 6, x.size)
    (b, a), cov, _ = fit_line_robust(x, y, robust=False)
    ref = stats.linregress(x, y)
    assert a == pytest.approx(ref.slope, rel=1e-10)
    assert b == pytest.approx(ref.intercept, rel=1e-10)
    assert np.sqrt(cov[1, 1]) == pytest.approx(ref.stderr, rel=1e-8)
    assert np.sqrt(cov[0, 0]) == pytest.approx(ref.intercept_stderr, rel=1e-8)


def test_huber_resists_an_outlier_like_theil_sen():
    # independent reference: scipy.stats.theilslopes (median of pairwise slopes)
    rng = np.random.default_rng(4)
    x = np.linspace(45, 80, 12)
    y = 12.0 * x + 150 + rng.normal(0, 5, x.size)
    y[5] += 300  # a spot on a crack
    (b, a), _, w = fit_line_robust(x, y, robust=True)
    ts = stats.theilslopes(y, x)
    ols = stats.linregress(x, y)
    assert abs(a - 12.0) < abs(ols.slope - 12.0)
    assert a == pytest.approx(ts.slope, rel=0.03)
    assert w[5] < 0.2 and np.all(np.delete(w, 5) > 0.5)


def test_calibration_recovered_within_reported_uncertainty():
    # self-consistency on seeded synthetic maps: |estimate - truth| / sd is ~N(0, 1)
    z_slope, z_int = [], []
    for seed in range(12):
        img, sp, truth = synthetic_zoned_map(seed=seed, shape=(220, 220), core_depth_um=None,
                                             layers=((0, 55), (15, 75), (35, 64)), return_maps=False)
        cal = calibrate_map(img, _spots(sp), pixel_um=1.0)
        z_slope.append((cal.slope - truth["slope"]) / cal.slope_sd)
        z_int.append((cal.intercept - truth["intercept"]) / cal.intercept_sd)
        assert cal.r2 > 0.98 and cal.n == 12
    z_slope, z_int = np.abs(z_slope), np.abs(z_int)
    # a t variable with 10 degrees of freedom: |t| > 5 has probability ~5e-4
    assert np.all(z_slope < 5) and np.all(z_int < 5)
    # about 93 % within 2 sd for t(10); allow sampling scatter over 12 maps
    assert np.mean(z_slope < 2) >= 0.75 and np.mean(z_int < 2) >= 0.75


def test_counting_sd_matches_poisson_scatter():
    # numpy's Poisson generator: variance = mean, so calibrated single-pixel sd = sqrt(S) / slope
    rng = np.random.default_rng(7)
    an = np.repeat([50.0, 60.0, 70.0, 80.0], 50)[None, :].repeat(200, axis=0)
    img = rng.poisson(12.0 * an + 150).astype(np.uint16)
    xs = np.array([25, 75, 125, 175, 30, 80])
    sp = pd.DataFrame({"row": range(2, 8), "label": "s", "x_px": xs, "y_px": [100.0] * 6,
                       "value": [50, 60, 70, 80, 50, 60], "spot_um": 9.0, "phase": ""})
    cal = calibrate_map(img, sp, pixel_um=1.0)
    block = img[:, 60:90].astype(float)  # An 60 zone
    emp = cal.to_composition(block).std(ddof=1)
    model = float(np.mean(cal.sd(block.mean(), n_pixels=1)))
    assert model == pytest.approx(emp, rel=0.05)
    # the sd of a mean of n pixels falls as 1/sqrt(n) down to the calibration floor
    floor = float(np.sqrt(cal.calibration_var(cal.to_composition(block.mean()))))
    assert float(cal.sd(block.mean(), n_pixels=1e9)) == pytest.approx(floor, rel=1e-6)


def test_float_map_gain_estimated_from_noise():
    # a map of counts divided by a dwell of 0.1 s (counts per second): g = 0.1 counts per unit
    rng = np.random.default_rng(8)
    an = np.repeat([55.0, 75.0], 100)[None, :].repeat(150, axis=0)
    cps = (rng.poisson(12.0 * an + 150) / 0.1).astype(np.float32)
    sp = pd.DataFrame({"row": range(2, 6), "label": "s", "x_px": [20, 60, 120, 170], "y_px": [70.0] * 4,
                       "value": [55, 55, 75, 75], "spot_um": 7.0, "phase": ""})
    cal = calibrate_map(cps, sp, pixel_um=1.0, integer_counts=False)
    assert cal.counts_per_unit == pytest.approx(0.1, rel=0.15)


def test_spot_window_is_a_disc():
    data = np.zeros((21, 21))
    data[10, 10] = 1.0
    mean, n, _ = spot_signals(data, [10.0], [10.0], 2.0)
    # pixel centres within 2 px of the centre: 13 pixels (1 + 4 + 4 + 4)
    assert n[0] == 13 and mean[0] == pytest.approx(1 / 13)


def test_fewer_than_three_spots_refused():
    img = np.arange(100, dtype=np.uint16).reshape(10, 10)
    sp = pd.DataFrame({"row": [2, 3], "label": "s", "x_px": [1.0, 5.0], "y_px": [1.0, 5.0], "value": [50.0, 60.0],
                       "spot_um": np.nan, "phase": ""})
    with pytest.raises(InputError, match="at least 3 spot"):
        calibrate_map(img, sp, pixel_um=1.0)


def test_no_spread_refused():
    img = np.arange(100, dtype=np.uint16).reshape(10, 10)
    sp = pd.DataFrame({"row": [2, 3, 4], "label": "s", "x_px": [1.0, 5.0, 8.0], "y_px": [1.0, 5.0, 8.0],
                       "value": [60.0, 60.0, 60.0], "spot_um": np.nan, "phase": ""})
    with pytest.raises(InputError, match="same An"):
        calibrate_map(img, sp, pixel_um=1.0)
