r"""Spatial resolution: what an analysis spot sees of a profile.

A spot centred at ``x_j`` reports the profile averaged with the spot's
sensitivity along the traverse. We build the linear map ``B`` (points × cells)
from cell values to reported values once per grid, so comparing a model with
data costs one matrix product.

- ``gaussian`` (electron beam, interaction volume): the weight of cell
  ``[f_i, f_{i+1}]`` is ``Φ((f_{i+1} − x_j)/σ) − Φ((f_i − x_j)/σ)``.
- ``square`` (LA-ICP-MS slit or square spot): the overlap of the cell with
  ``[x_j − W/2, x_j + W/2]``.
- no beam: linear interpolation between cell centres (point analyses).

Rows are normalised to one, so a spot half outside the modelled crystal sees
only the crystal.

Convention: ``beam_um`` is the spot **diameter** as an analyst quotes it. For
the Gaussian it is taken as the full width at half maximum, so
``σ = beam_um / (2 √(2 ln 2)) = beam_um / 2.3548``; for the square spot it is
the full width (variance ``W²/12``).

A Gaussian of standard deviation σ on an erf profile gives again an erf with
``D·t* = D·t + σ²/2`` (Ganguly, Bhattacharya & Chakraborty 1988, Am. Mineral.
73:901–909): the variances add.
"""

from __future__ import annotations

import math

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.grid import Grid

__all__ = ["BEAM_SHAPES", "FWHM_PER_SIGMA", "beam_sigma_um", "beam_variance_um2", "beam_matrix"]

BEAM_SHAPES = ("gaussian", "square")
FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


def beam_sigma_um(beam_um, shape="gaussian") -> float:
    """Standard deviation (µm) of the spot's sensitivity along the traverse."""
    if beam_um is None or beam_um == 0:
        return 0.0
    if shape == "gaussian":
        return float(beam_um) / FWHM_PER_SIGMA
    if shape == "square":
        return float(beam_um) / math.sqrt(12.0)
    raise InputError(f"unknown beam shape '{shape}'; choose one of: {', '.join(BEAM_SHAPES)}")


def beam_variance_um2(beam_um, shape="gaussian") -> float:
    """Variance (µm²) added to a profile by the spot."""
    return beam_sigma_um(beam_um, shape) ** 2


def beam_matrix(grid: Grid, points_um, *, beam_um=None, shape="gaussian") -> np.ndarray:
    """Linear map from cell values to the values spots at ``points_um`` report.

    Parameters
    ----------
    grid : Grid
    points_um : array_like
        Spot centres (µm from the rim).
    beam_um : float, optional
        Spot diameter (Gaussian FWHM or square full width); None or 0 for point
        analyses.
    shape : {'gaussian', 'square'}

    Returns
    -------
    ndarray, shape (n_points, N)
    """
    x = np.asarray(points_um, float)
    faces = grid.faces_um
    if shape not in BEAM_SHAPES:
        raise InputError(f"unknown beam shape '{shape}'; choose one of: {', '.join(BEAM_SHAPES)}")
    if beam_um is None or beam_um == 0:
        centres = grid.centres_um
        n = grid.n
        idx = np.clip(np.searchsorted(centres, x) - 1, 0, n - 2)
        frac = np.clip((x - centres[idx]) / (centres[idx + 1] - centres[idx]), 0.0, 1.0)
        mat = np.zeros((x.size, n))
        rows = np.arange(x.size)
        mat[rows, idx] = 1.0 - frac
        mat[rows, idx + 1] += frac
        return mat
    if beam_um < 0:
        raise InputError(f"beam size must be >= 0 µm, got {beam_um:g}")
    if shape == "gaussian":
        from scipy.special import ndtr

        sigma = beam_sigma_um(beam_um, shape)
        cdf = ndtr((faces[None, :] - x[:, None]) / sigma)
        mat = np.diff(cdf, axis=1)
    else:
        half = 0.5 * float(beam_um)
        lo = np.maximum(faces[None, :-1], x[:, None] - half)
        hi = np.minimum(faces[None, 1:], x[:, None] + half)
        mat = np.clip(hi - lo, 0.0, None)
    total = mat.sum(axis=1, keepdims=True)
    if np.any(total <= 0):
        raise InputError("a spot lies entirely outside the modelled crystal")
    return mat / total
