"""Composition profiles from a map: along a line, and binned by distance from the rim.

Line profile
    Samples are spaced evenly from the line's start (x0, y0) to its end
    (x1, y1), ``ceil(L + 1)`` of them for a line L pixels long (spacing just
    under one pixel), each the mean of ``width_px`` bilinear samples spread
    over ``width_px - 1`` pixels across the line — the construction of
    scikit-image's ``measure.profile_line``. The map is read in small crops
    along the line, so a memory-mapped map is never loaded whole.

Rim-normal profile
    Every crystal pixel is given its distance from the crystal edge (Euclidean
    distance transform of the mask, minus half a pixel so the edge itself is
    at 0); pixels are binned by that distance and averaged. The bins follow
    the zoning wherever the zones parallel the outline, so the profile
    averages thousands of pixels per point without picking a line.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import ndimage as ndi

from zoneprofile._validation import InputError

__all__ = ["check_line", "line_coordinates", "sample_line", "line_profile", "rim_normal_profile"]


def check_line(line, shape, *, name="--line"):
    """Return ``line`` as 4 floats after checking it lies on the map and has length."""
    try:
        x0, y0, x1, y1 = (float(v) for v in line)
    except (TypeError, ValueError):
        message = f"{name} needs four numbers X0,Y0,X1,Y1 in pixels"
        raise InputError(message, text=",".join(map(str, line)) if line is not None else None) from None
    if not all(math.isfinite(v) for v in (x0, y0, x1, y1)):
        raise InputError(f"{name} holds a non-finite number")
    rows, cols = shape
    for label, x, y in (("start", x0, y0), ("end", x1, y1)):
        if not (-0.5 <= x <= cols - 0.5 and -0.5 <= y <= rows - 0.5):
            message = (
                f"{name} {label} ({x:g}, {y:g}) lies outside the image, which spans x 0 to {cols - 1} "
                f"and y 0 to {rows - 1} pixels (x = column, y = row)"
            )
            raise InputError(message)
    length = math.hypot(x1 - x0, y1 - y0)
    if length < 2.0:
        message = f"{name} is {length:g} pixels long; a profile needs a line of at least 2 pixels"
        raise InputError(message)
    return x0, y0, x1, y1


def line_coordinates(line, width_px=1):
    """Row and column coordinates (n, width) of the samples of a line."""
    x0, y0, x1, y1 = line
    d_row, d_col = y1 - y0, x1 - x0
    n = int(math.ceil(math.hypot(d_row, d_col) + 1))
    t = np.linspace(0.0, 1.0, n)
    rows = y0 + t * d_row
    cols = x0 + t * d_col
    theta = math.atan2(d_row, d_col)
    half_col = (width_px - 1) * math.sin(-theta) / 2
    half_row = (width_px - 1) * math.cos(theta) / 2
    s = np.linspace(-1.0, 1.0, width_px) if width_px > 1 else np.zeros(1)
    return rows[:, None] + s[None, :] * half_row, cols[:, None] + s[None, :] * half_col


def _effective_pixels(rr, cc, shape):
    """1 / sum of squared pixel weights of each sample's bilinear, width-averaged value.

    For independent pixel noise of variance v, the sample's variance is
    v * sum(W_p**2), so this is the number of independent pixels the sample
    is worth (interpolation between pixels averages noise as well).
    """
    rows, cols = shape
    n, w = rr.shape
    r = np.clip(rr, 0, rows - 1)
    c = np.clip(cc, 0, cols - 1)
    r0 = np.minimum(np.floor(r).astype(np.int64), rows - 2 if rows > 1 else 0)
    c0 = np.minimum(np.floor(c).astype(np.int64), cols - 2 if cols > 1 else 0)
    fr, fc = r - r0, c - c0
    keys, weights = [], []
    for dr, wr in ((0, 1 - fr), (1, fr)):
        for dc, wc in ((0, 1 - fc), (1, fc)):
            keys.append((r0 + dr) * cols + (c0 + dc))
            weights.append(wr * wc / w)
    sample = np.repeat(np.arange(n), 4 * w)
    key = np.stack(keys, axis=-1).reshape(n, -1).ravel()
    wt = np.stack(weights, axis=-1).reshape(n, -1).ravel()
    combined = sample.astype(np.int64) * (rows * cols) + key
    uniq, inv = np.unique(combined, return_inverse=True)
    per_pixel = np.bincount(inv, weights=wt)
    owner = uniq // (rows * cols)
    sum_sq = np.bincount(owner, weights=per_pixel**2, minlength=n)
    return 1.0 / sum_sq


def sample_line(data, line, *, width_px=1, order=1, chunk=256, effective=False):
    """Mean signal of each line sample across the width.

    Returns
    -------
    distance_px : (n,) distance of each sample from the line start, pixels
    signal : (n,) mean over the width (bilinear interpolation, nearest edge)
    n_eff : (n,) effective number of independent pixels per sample (only
        with ``effective=True``)
    """
    rr, cc = line_coordinates(line, width_px)
    rows, cols = data.shape
    out = np.empty(rr.shape[0])
    for k0 in range(0, rr.shape[0], chunk):
        r = rr[k0:k0 + chunk]
        c = cc[k0:k0 + chunk]
        r0 = max(0, int(math.floor(r.min())) - 2)
        r1 = min(rows, int(math.ceil(r.max())) + 3)
        c0 = max(0, int(math.floor(c.min())) - 2)
        c1 = min(cols, int(math.ceil(c.max())) + 3)
        crop = np.asarray(data[r0:r1, c0:c1], dtype=np.float64)
        # positions beyond the image edge take the edge value ('nearest')
        rl = np.clip(r, 0, rows - 1) - r0
        cl = np.clip(c, 0, cols - 1) - c0
        vals = ndi.map_coordinates(crop, [rl.ravel(), cl.ravel()], order=order, mode="nearest")
        out[k0:k0 + chunk] = vals.reshape(r.shape).mean(axis=1)
    x0, y0, x1, y1 = line
    dist = np.linspace(0.0, math.hypot(x1 - x0, y1 - y0), rr.shape[0])
    if effective:
        return dist, out, _effective_pixels(rr, cc, (rows, cols))
    return dist, out


def line_profile(data, line, *, pixel_um, calibration, width_px=1, mask=None, column="An"):
    """Calibrated composition along a line, distance in µm from its start.

    Samples before the first or after the last sample whose footprint (all
    ``width_px`` positions across the line) lies at least about 2 pixels
    inside the crystal are dropped (the line overshoots the crystal, or its
    end pixels mix crystal and surroundings); samples outside the crystal in
    between are kept and flagged in ``qc``.

    Returns
    -------
    DataFrame with ``distance_um, <column>, <column>_sd, n_pixels, signal, qc``;
    ``n_pixels`` is the effective number of independent pixels behind each
    sample (bilinear weights included), which sets the counting error.
    """
    dist_px, signal, n_eff = sample_line(data, line, width_px=width_px, effective=True)
    value = calibration.to_composition(signal)
    sd = calibration.sd(signal, n_pixels=n_eff)
    frame = pd.DataFrame({
        "distance_um": dist_px * pixel_um, column: value, f"{column}_sd": sd,
        "n_pixels": np.round(n_eff, 2), "signal": signal, "qc": "ok",
    })
    if mask is not None and mask.found:
        rr, cc = line_coordinates(line, 1)
        inside = mask.contains(rr[:, 0], cc[:, 0])
        rw, cw = line_coordinates(line, width_px)
        # a sample is clean when its whole footprint across the line lies inside the crystal
        interior = mask.interior(rw, cw).all(axis=1)
        if interior.any():
            first, last = int(np.argmax(interior)), int(len(interior) - 1 - np.argmax(interior[::-1]))
            frame.loc[~inside, "qc"] = "outside the crystal mask"
            frame = frame.iloc[first:last + 1].reset_index(drop=True)
    return frame


def _edt_inside(binary, strip_rows=256):
    """Euclidean distance transform (float32) from scipy's feature transform, row strip by row strip.

    Same values as ``scipy.ndimage.distance_transform_edt`` but without its
    full-size float64 and index temporaries (a quarter of the memory).
    """
    ft = ndi.distance_transform_edt(binary, return_distances=False, return_indices=True)
    rows, cols = binary.shape
    out = np.empty((rows, cols), dtype=np.float32)
    cc = np.arange(cols, dtype=np.float32)[None, :]
    for r0 in range(0, rows, strip_rows):
        r1 = min(rows, r0 + strip_rows)
        dr = ft[0, r0:r1].astype(np.float32) - np.arange(r0, r1, dtype=np.float32)[:, None]
        dc = ft[1, r0:r1].astype(np.float32) - cc
        np.sqrt(dr * dr + dc * dc, out=out[r0:r1])
    return out


def rim_normal_profile(mask, *, pixel_um, calibration, bin_um=None, min_pixels=5, column="An"):
    """Composition binned by distance from the crystal edge.

    Parameters
    ----------
    mask : CrystalMask
        The crystal and the (block-averaged) map it was found on.
    bin_um : float, optional
        Bin width (default: one grid pixel, ``mask.factor * pixel_um``).

    Returns
    -------
    DataFrame with ``distance_um`` (mean distance of the bin's pixels),
    ``<column>``, ``<column>_sd``, ``spread`` (sd of the pixels in the bin),
    ``n_pixels`` (full-resolution pixels), ``signal``, ``qc``.
    """
    if not mask.found or not mask.mask.any():
        raise InputError("no crystal found for the rim-normal profile; give --seed X,Y on the crystal")
    grid_um = mask.factor * pixel_um
    bin_um = grid_um if bin_um is None else float(bin_um)
    if not bin_um > 0:
        raise InputError(f"bin width must be > 0 µm, got {bin_um:g}")
    m = mask.mask
    rr = np.flatnonzero(m.any(axis=1))
    cc = np.flatnonzero(m.any(axis=0))
    r0, r1, c0, c1 = rr[0], rr[-1] + 1, cc[0], cc[-1] + 1
    sub = np.pad(m[r0:r1, c0:c1], 1)
    inside = sub[1:-1, 1:-1]
    dist_um = _edt_inside(sub)[1:-1, 1:-1][inside].astype(np.float64)
    dist_um -= 0.5
    dist_um *= grid_um
    signal = mask.reduced[r0:r1, c0:c1][inside]
    idx = np.floor(dist_um / bin_um).astype(np.intp)
    nb = int(idx.max()) + 1
    count = np.bincount(idx, minlength=nb)
    s1 = np.bincount(idx, weights=signal, minlength=nb)
    np.square(signal, out=signal)
    s2 = np.bincount(idx, weights=signal, minlength=nb)
    del signal
    dsum = np.bincount(idx, weights=dist_um, minlength=nb)
    keep = count >= min_pixels
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = s1 / count
        var = np.clip(s2 / count - mean**2, 0, None)
        dmean = dsum / count
    n_full = count * mask.factor**2
    value = calibration.to_composition(mean)
    sd = calibration.sd(mean, n_pixels=np.maximum(n_full, 1))
    frame = pd.DataFrame({
        "distance_um": dmean, column: value, f"{column}_sd": sd,
        "spread": np.sqrt(var) / abs(calibration.slope), "n_pixels": n_full, "signal": mean, "qc": "ok",
    })[keep].reset_index(drop=True)
    if len(frame):
        frame.loc[0, "qc"] = "edge pixels (partly outside the crystal)"
    return frame
