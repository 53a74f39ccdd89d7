"""Small least-squares helpers shared by the zoning detectors (private)."""

from __future__ import annotations

import numpy as np

__all__ = ["ols", "median_spacing"]


def ols(design: np.ndarray, y: np.ndarray):
    """Ordinary least squares by the normal equations (small, well-posed designs).

    Returns ``(coefficients, residual sum of squares, (XᵀX)⁻¹)``; the last is
    None when the design is rank-deficient (then the coefficients come from a
    pseudo-inverse).
    """
    xtx = design.T @ design
    try:
        # Hadamard ratio det/prod(diag) is 1 for orthogonal columns, 0 when collinear
        diag = np.diag(xtx)
        if np.any(diag <= 0) or np.linalg.det(xtx) / np.prod(diag) < 1e-12:
            raise np.linalg.LinAlgError
        cov = np.linalg.inv(xtx)
    except np.linalg.LinAlgError:
        coef = np.linalg.pinv(design) @ y
        resid = y - design @ coef
        return coef, float(resid @ resid), None
    coef = cov @ (design.T @ y)
    resid = y - design @ coef
    return coef, float(resid @ resid), cov


def median_spacing(x: np.ndarray) -> float:
    """Median gap between neighbouring points (µm)."""
    return float(np.median(np.diff(x))) if x.size > 1 else float("nan")


def side_points(x, position_um, half_width_um, *, lo_um=-np.inf, hi_um=np.inf, max_points=6):
    """Indices of up to ``max_points`` points on each side of a boundary, outside its slope.

    Returns ``(rim_side, core_side)``: the points nearest to the boundary but
    farther than ``half_width_um`` from it, and inside ``[lo_um, hi_um]``.
    """
    rim = np.flatnonzero((x < position_um - half_width_um) & (x >= lo_um))[::-1][:max_points]
    core = np.flatnonzero((x > position_um + half_width_um) & (x <= hi_um))[:max_points]
    return rim, core


def side_change(values, rim, core, noise_sd=None):
    """Change (rim-side mean minus core-side mean) and its standard error.

    NaN values are left out. The scatter used for the error is the larger of
    the pooled sample scatter and ``noise_sd``. Returns (change, se, n_rim,
    n_core); NaNs when a side has no value.
    """
    a = values[rim]
    b = values[core]
    a = a[np.isfinite(a)]
    b = b[np.isfinite(b)]
    if a.size == 0 or b.size == 0:
        return float("nan"), float("nan"), int(a.size), int(b.size)
    pooled = []
    if a.size > 1:
        pooled.append(np.var(a, ddof=1) * (a.size - 1))
    if b.size > 1:
        pooled.append(np.var(b, ddof=1) * (b.size - 1))
    dof = max(a.size + b.size - 2, 1)
    sd = np.sqrt(sum(pooled) / dof) if pooled else 0.0
    if noise_sd is not None and np.isfinite(noise_sd):
        sd = max(sd, float(noise_sd))
    se = sd * np.sqrt(1.0 / a.size + 1.0 / b.size)
    return float(a.mean() - b.mean()), float(se), int(a.size), int(b.size)
