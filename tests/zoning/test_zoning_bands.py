"""Oscillatory bands: wavelength and extent recovery, no band on noise, the statistics against general libraries."""

import numpy as np
import pytest
from scipy.signal import lombscargle

from zoneprofile.zoning import analyse_zoning, detect_bands, synthetic_case, synthetic_zoned_profile
from zoneprofile.zoning.oscillatory import local_sine_statistic


def _overlap(band, truth):
    lo, hi = max(band.start_um, truth["start_um"]), min(band.end_um, truth["end_um"])
    return max(hi - lo, 0.0) / (truth["end_um"] - truth["start_um"])


def test_six_micron_band_recovered_over_seeds():
    # self-consistency on invented data: a 6 µm band, semi-amplitude 1.5-3, noise sd 0.3-1
    for seed in range(6):
        x, y, truth = synthetic_case("band", seed)
        res = analyse_zoning(x, y)
        assert len(res.oscillatory_bands) == 1, seed
        band, true = res.oscillatory_bands[0], truth["bands"][0]
        assert band.wavelength_um == pytest.approx(6.0, rel=0.15)
        assert _overlap(band, true) >= 0.6, seed
        assert band.p_value < 0.01
        assert band.n_peaks >= 3
        assert res.steps == [], seed  # the swings are not steps


def test_band_between_four_steps_is_a_band_not_steps():
    for seed in range(3):
        x, y, truth = synthetic_case("steps+band", seed)
        res = analyse_zoning(x, y)
        assert len(res.oscillatory_bands) == 1
        assert res.oscillatory_bands[0].wavelength_um == pytest.approx(6.0, rel=0.15)
        assert len(res.steps) <= 5


def test_no_band_on_noise_alone():
    for seed in range(12):
        x, y, _ = synthetic_case("noise", seed)
        assert detect_bands(x, y - y.mean(), np.std(y, ddof=1)) == []


def test_local_statistic_matches_numpy_least_squares():
    # independent reference: numpy.linalg.lstsq fits of line vs line + sine in each window
    x, y, _ = synthetic_zoned_profile(seed=2, length_um=60, spacing_um=(0.7, 1.5), noise_sd=0.5,
                                      bands=[(10, 50, 5.0, 1.0)])
    sigma, lam, half = 0.5, 5.0, 7.5
    stat = local_sine_statistic(x, y, sigma, lam, half)
    for i in (5, 20, 35):
        m = np.abs(x - x[i]) <= half
        t = x[m] - x.mean()
        line = np.column_stack([np.ones(m.sum()), t])
        full = np.column_stack([line, np.sin(2 * np.pi * x[m] / lam), np.cos(2 * np.pi * x[m] / lam)])
        rss = [np.sum((y[m] - d @ np.linalg.lstsq(d, y[m], rcond=None)[0]) ** 2) for d in (line, full)]
        assert stat[i] == pytest.approx((rss[0] - rss[1]) / sigma**2, rel=1e-6)


def test_lomb_scargle_power_over_noise_variance_is_unit_exponential():
    # Scargle (1982): with the noise variance known, unnormalised power / σ² ~ Exp(1);
    # checked with scipy.signal.lombscargle on pure noise (mean 1, P(>3) = e^-3)
    rng = np.random.default_rng(0)
    x = np.sort(rng.uniform(0, 200, 150))
    values = []
    for _ in range(300):
        y = rng.normal(0, 2.0, x.size)
        power = lombscargle(x, y, np.array([2 * np.pi / 7.3, 2 * np.pi / 11.0]), floating_mean=True)
        values.append(power[0] / 4.0)
    values = np.array(values)
    assert values.mean() == pytest.approx(1.0, abs=0.15)
    assert np.mean(values > 3.0) == pytest.approx(np.exp(-3.0), abs=0.03)


def test_local_statistic_of_many_wavelengths_at_once_is_row_by_row():
    # invariant: the batched scan over wavelengths equals one call per wavelength
    x, y, _ = synthetic_zoned_profile(seed=5, length_um=120, spacing_um=(0.8, 1.6), noise_sd=0.5,
                                      bands=[(30, 80, 6.0, 1.5)])
    lams = np.geomspace(2.5, 25.0, 17)
    rows = local_sine_statistic(x, y, 0.5, lams, 1.5 * lams)
    assert rows.shape == (lams.size, x.size)
    for lam, row in zip(lams, rows):
        np.testing.assert_array_equal(row, local_sine_statistic(x, y, 0.5, lam, 1.5 * lam))
