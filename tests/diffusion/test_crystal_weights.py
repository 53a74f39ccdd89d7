"""Weights of laser values in the whole-crystal model (zoneprofile.diffusion.crystal._local_noise_sd).

Reference: with relative noise (sd ∝ concentration; common practice for LA-ICP-MS well above the
detection limit) the weighted residuals of the rich and the poor half of a profile have the same
variance; their ratio then follows Fisher's F distribution (scipy.stats.f), which sets the
tolerance. One weight for the whole profile (the earlier rule) fails it: the ratio is the squared
ratio of the levels.
"""

import numpy as np
from scipy.stats import f as fisher_f

from zoneprofile.diffusion._steps import _noise_sd
from zoneprofile.diffusion.crystal import _local_noise_sd


def test_relative_noise_gives_homogeneous_weighted_residuals():
    rng = np.random.default_rng(7)
    x = np.arange(0.0, 300.0, 2.5)
    truth = np.where(x < 40.0, 900.0, 300.0) + 0.2 * x  # a rich rim zone, three times the core
    y = truth * (1.0 + 0.03 * rng.standard_normal(x.size))
    sd = _local_noise_sd(y, _noise_sd(y))
    z = (y - truth) / sd
    rich, poor = z[truth > 600.0], z[truth < 600.0]
    ratio = np.var(rich, ddof=0) / np.var(poor, ddof=0)
    lo, hi = fisher_f.ppf([0.005, 0.995], rich.size, poor.size)
    assert lo <= ratio <= hi, (ratio, lo, hi)
    # the single weight of the earlier rule: variance ratio about (900/300)² = 9, far outside
    z_old = (y - truth) / _noise_sd(y)
    assert np.var(z_old[truth > 600.0]) / np.var(z_old[truth < 600.0]) > hi


def test_no_reweighting_of_values_that_are_not_concentrations():
    y = np.array([-1.0, 0.5, 2.0, 3.0])
    assert np.all(_local_noise_sd(y, 0.7) == 0.7)
