"""A reference forward model for tests: a crystal that grows zone by zone while an element diffuses.

Written for the tests, independent of the project's solver: explicit finite
differences (FTCS, Crank 1975 §8.2) on a uniform grid, constant D, planar.
Before the oldest event the crystal is the core, uniform. At each event a zone
grows at once (growth taken as instant) in equilibrium with the new melt; the
rim (the outer face of the newest zone) is then held at that zone's value (an
open rim, in equilibrium with its melt) and the far core end has no flux.
Stability: the explicit step ``dt ≤ h²/(2D)`` (von Neumann), here ``0.4·h²/D``.
Measured values are the profile convolved with a Gaussian spot (FWHM given)
and sampled at the spot centres.
"""

import math

import numpy as np

FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


def grow_and_diffuse(boundaries_um, ages_s, values, d_m2_s, *, length_um, h_um=0.25):
    """Concentration on a uniform grid after growth events and diffusion.

    boundaries_um: positions of the zone boundaries from the final rim, oldest (innermost) first.
    ages_s: time since each boundary formed (s), oldest first, decreasing.
    values: core value, then the value of each zone grown at each event (len = len(boundaries)+1).
    Returns (x_um, c).
    """
    x = np.arange(0.5 * h_um, length_um, h_um)
    c = np.full(x.size, float(values[0]))
    d_um2_s = d_m2_s * 1e12
    dt_max = 0.4 * h_um**2 / d_um2_s
    # the crystal before the oldest event: the core, its rim at the oldest boundary
    rim = boundaries_um[0]
    ages = list(ages_s) + [0.0]
    for k in range(len(boundaries_um)):
        # event k: the zone between the next boundary (or the final rim) and the current rim grows
        outer = boundaries_um[k + 1] if k + 1 < len(boundaries_um) else 0.0
        c[(x >= outer) & (x < rim)] = values[k + 1]
        rim = outer
        live = x >= rim
        duration = ages[k] - ages[k + 1]
        n = max(int(math.ceil(duration / dt_max)), 1)
        r = d_um2_s * (duration / n) / h_um**2
        u = c[live].copy()
        edge = float(values[k + 1])  # the open rim: held at the newest zone's value
        for _ in range(n):
            left = np.concatenate(([2.0 * edge - u[0]], u[:-1]))  # ghost cell: value `edge` on the rim face
            right = np.concatenate((u[1:], [u[-1]]))  # no flux at the core end
            u = u + r * (left - 2.0 * u + right)
        c[live] = u
    return x, c


def measure(x_fine, c_fine, spots_um, fwhm_um):
    """Values a Gaussian spot of ``fwhm_um`` measures at ``spots_um`` (a profile that is flat beyond its end)."""
    sigma = fwhm_um / FWHM_PER_SIGMA
    h = x_fine[1] - x_fine[0]
    out = np.empty(len(spots_um))
    for i, s in enumerate(spots_um):
        w = np.exp(-0.5 * ((x_fine - s) / sigma) ** 2)
        # beyond the rim there is no crystal: the spot averages over the crystal part only
        out[i] = np.sum(w * c_fine) / np.sum(w)
    del h
    return out
