r"""Orientation of a zone boundary where a line crosses it: the obliquity ψ.

Around the crossing, the map is smoothed with a Gaussian (sigma ``sigma_px``)
and its gradient taken (derivative-of-Gaussian filters). The structure tensor

.. math::

    J = \sum_p w_p \begin{pmatrix} g_x^2 & g_x g_y \\ g_x g_y & g_y^2 \end{pmatrix}

is summed over the pixels of *this* boundary only: those whose smoothed value
lies on the rim-side half of the transition (10-50 % of the step from the rim
plateau; the zone grown onto a boundary follows it even where the core side is
truncated) and that are connected to the crossing, weighted by a Gaussian
window of radius ``radius_px``; after a first estimate only a strip along the
boundary's trace is kept and the estimate refined. Its
leading eigenvector is the boundary's normal **n** within the section (Bigün &
Granlund 1987; Jähne, Digital Image Processing, ch. "orientation"). The
obliquity is the angle between the line direction **u** and **n**:

.. math::

    \psi = \arccos |\mathbf{u} \cdot \mathbf{n}|, \quad 0 \le \psi \le 90^\circ.

Apparent widths along the line are ``1 / cos ψ`` times the true width in the
section. The angle φ between the boundary plane and the section cannot be
measured from a map; it is taken as 90° (a boundary cut perpendicular to the
section) and reported as such.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import ndimage as ndi

__all__ = ["boundary_orientation", "boundary_orientations", "apparent_width_factor"]

#: Fractions of the step (0 = rim side, 1 = core side) whose pixels define the boundary: the
#: rim-side half of the transition, grown onto the boundary, follows it even where the core
#: side is a truncated (resorbed) zone.
BAND = (0.1, 0.5)


def apparent_width_factor(obliquity_deg, section_angle_deg=90.0):
    """w_true / w_apparent = sin φ · cos ψ (REFERENCES §7)."""
    return math.sin(math.radians(section_angle_deg)) * math.cos(math.radians(obliquity_deg))


def _crop(data, x, y, half):
    rows, cols = data.shape
    r0, r1 = max(0, int(round(y)) - half), min(rows, int(round(y)) + half + 1)
    c0, c1 = max(0, int(round(x)) - half), min(cols, int(round(x)) + half + 1)
    return np.asarray(data[r0:r1, c0:c1], dtype=np.float64), r0, c0


def boundary_orientation(data, x_px, y_px, direction, *, before_signal, after_signal, radius_px=15.0,
                         sigma_px=1.5, mask=None, strip_px=None):
    """Normal and obliquity of one boundary at a crossing.

    Parameters
    ----------
    data : 2-D array-like (rows, cols), map signal
    x_px, y_px : float, the crossing (x = column, y = row)
    direction : (ux, uy), the line direction (need not be unit length)
    before_signal, after_signal : float
        Map signal on the rim side and the core side of the boundary.
    radius_px : float, Gaussian window radius (1 sigma) of the tensor sum
    sigma_px : float, smoothing before the gradient
    mask : CrystalMask, optional; pixels within 2 sigma of the crystal edge are left out
    strip_px : float, optional
        Half-width of the strip along the boundary trace kept after a first
        estimate (default 3 sigma + 2 px, wider for wide boundaries); the
        estimate is refined three times.

    Returns
    -------
    dict with ``obliquity_deg, obliquity_sd_deg, normal_xy, coherence, pixels_used``;
    ``obliquity_sd_deg`` is half the sum of the angles between the overall normal
    and the normals of the trace's two halves (at least 0.5°)
    """
    ux, uy = direction
    norm = math.hypot(ux, uy)
    ux, uy = ux / norm, uy / norm
    half = int(math.ceil(2.5 * radius_px + 3 * sigma_px)) + 2
    crop, r0, c0 = _crop(data, x_px, y_px, half)
    smooth = ndi.gaussian_filter(crop, sigma_px, mode="nearest")
    gy = ndi.gaussian_filter(crop, sigma_px, order=(1, 0), mode="nearest")
    gx = ndi.gaussian_filter(crop, sigma_px, order=(0, 1), mode="nearest")
    q = (smooth - before_signal) / (after_signal - before_signal) if after_signal != before_signal else smooth * 0
    band = (q >= BAND[0]) & (q <= BAND[1])
    if mask is not None and mask.found:
        rr, cc = np.mgrid[r0:r0 + crop.shape[0], c0:c0 + crop.shape[1]]
        inside = mask.contains(rr, cc)
        inside = ndi.binary_erosion(inside, iterations=max(1, int(round(2 * sigma_px))), border_value=1)
        band &= inside
    labels, n = ndi.label(band)
    rc, cc0 = y_px - r0, x_px - c0
    if n == 0:
        return {"obliquity_deg": None, "obliquity_sd_deg": None, "normal_xy": None, "coherence": None,
                "pixels_used": 0}
    # the connected part of the band nearest the crossing
    pts = np.argwhere(labels > 0)
    k = np.argmin((pts[:, 0] - rc) ** 2 + (pts[:, 1] - cc0) ** 2)
    keep = labels == labels[pts[k, 0], pts[k, 1]]
    rr, cc = np.mgrid[0:crop.shape[0], 0:crop.shape[1]]
    window = np.exp(-((rr - rc) ** 2 + (cc - cc0) ** 2) / (2 * radius_px**2)) * keep
    strip = strip_px if strip_px is not None else 3.0 * sigma_px + 2.0
    w = window
    for _ in range(4):
        jxx = float(np.sum(w * gx * gx))
        jxy = float(np.sum(w * gx * gy))
        jyy = float(np.sum(w * gy * gy))
        evals, evecs = np.linalg.eigh(np.array([[jxx, jxy], [jxy, jyy]]))
        nx, ny = evecs[:, 1]
        # keep only the strip along this boundary's straight trace: leaves out other
        # zones of similar composition that touch it (truncated inner zones)
        offset = np.abs((cc - cc0) * nx + (rr - rc) * ny)
        w = window * (offset <= strip)
    if nx * ux + ny * uy < 0:
        nx, ny = -nx, -ny
    # uncertainty: the normals of the two halves of the trace (either side of the
    # crossing) differ by about 2 sd of their mean (noise and curvature both count)
    along = (cc - cc0) * (-ny) + (rr - rc) * nx
    halves = []
    for side in (along < 0, along >= 0):
        ws = w * side
        j = np.array([[np.sum(ws * gx * gx), np.sum(ws * gx * gy)], [np.sum(ws * gx * gy), np.sum(ws * gy * gy)]])
        if np.trace(j) > 0:
            e = np.linalg.eigh(j)[1][:, 1]
            halves.append(math.degrees(math.acos(min(1.0, abs(e[0] * nx + e[1] * ny)))))
    sd_deg = max(0.5, 0.5 * sum(halves)) if len(halves) == 2 else None
    total = evals.sum()
    coherence = float((evals[1] - evals[0]) / total) if total > 0 else 0.0
    cosang = min(1.0, abs(nx * ux + ny * uy))
    return {"obliquity_deg": math.degrees(math.acos(cosang)), "obliquity_sd_deg": sd_deg,
            "normal_xy": [float(nx), float(ny)], "coherence": coherence,
            "pixels_used": int(np.count_nonzero(w > 1e-3))}


def boundary_orientations(data, line, steps, *, calibration, pixel_um, mask=None, radius_px=None, sigma_px=None):
    """Orientation at every step found along a line.

    ``steps`` hold ``position_um``, ``before``, ``after`` (composition) and
    ``width_um``; returns one dict per step with the position in pixels, the
    obliquity, the normal and the coherence.
    """
    x0, y0, x1, y1 = line
    length = math.hypot(x1 - x0, y1 - y0)
    ux, uy = (x1 - x0) / length, (y1 - y0) / length
    out = []
    for s in steps:
        pos_px = s["position_um"] / pixel_um
        x, y = x0 + ux * pos_px, y0 + uy * pos_px
        width_px = max(0.0, float(s.get("width_um") or 0.0) / pixel_um)
        sig = sigma_px if sigma_px is not None else max(1.5, 0.5 * width_px)
        rad = radius_px if radius_px is not None else max(12.0, 4.0 * width_px)
        b = calibration.slope * s["before"] + calibration.intercept
        a = calibration.slope * s["after"] + calibration.intercept
        res = boundary_orientation(data, x, y, (ux, uy), before_signal=b, after_signal=a,
                                   radius_px=rad, sigma_px=sig, mask=mask, strip_px=2.0 * width_px + 3 * sig + 2.0)
        res.update({"x_px": x, "y_px": y, "window_px": rad, "smoothing_px": sig})
        out.append(res)
    return out
