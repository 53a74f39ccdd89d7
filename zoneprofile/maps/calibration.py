"""Calibrating a map against spot analyses: robust straight line, signal vs composition.

At each spot the map is averaged over a disc matching the spot size, and the
line ``signal = slope * C + intercept`` is fitted to (C, signal) by iteratively
reweighted least squares with Huber weights (Huber 1964; k = 1.345 with the
scale from the median absolute deviation, common practice). A map value is
turned into composition with ``C = (signal - intercept) / slope``.

The standard deviation of a calibrated value combines counting statistics and
the calibration's own uncertainty (first-order propagation):

    var(C) = var_count(S) / (slope**2 * n) + (C**2 var(slope) + var(intercept)
             + 2 C cov(slope, intercept)) / slope**2

with ``var_count(S) = S / g`` for a map of counts (Poisson; ``g`` counts per
unit of the map's values, 1 for raw counts) and ``n`` pixels averaged. For a
ratio map ``r = A / (A + B)`` the binomial form ``r (1 - r) / (T g)`` is used
with ``T`` the mean total counts ``A + B`` over the crystal.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError

__all__ = ["Calibration", "calibrate_map", "read_spots", "spot_signals", "fit_line_robust", "estimate_counts_per_unit"]

HUBER_K = 1.345


def fit_line_robust(x, y, *, robust=True, max_iter=50):
    """Fit ``y = slope * x + intercept`` with Huber IRLS.

    Returns
    -------
    beta : (intercept, slope)
    cov : (2, 2) covariance of (intercept, slope)
    weights : robust weights in [0, 1]
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    n = x.size
    X = np.column_stack([np.ones(n), x])
    w = np.ones(n)
    beta = np.linalg.lstsq(X, y, rcond=None)[0]
    if robust and n >= 5:
        for _ in range(max_iter):
            r = y - X @ beta
            scale = 1.4826 * np.median(np.abs(r - np.median(r)))
            if not scale > 0:
                break
            u = np.abs(r) / scale
            w_new = np.where(u <= HUBER_K, 1.0, HUBER_K / np.maximum(u, 1e-300))
            sw = np.sqrt(w_new)
            beta_new = np.linalg.lstsq(X * sw[:, None], y * sw, rcond=None)[0]
            done = np.allclose(beta_new, beta, rtol=1e-10, atol=1e-12)
            beta, w = beta_new, w_new
            if done:
                break
    r = y - X @ beta
    dof = max(n - 2, 1)
    try:
        if robust and n >= 5 and np.any(w < 1.0):
            # Huber (1981, Robust Statistics, sec. 7.6) covariance with the finite-sample factor K
            scale = 1.4826 * np.median(np.abs(r - np.median(r)))
            u = r / scale
            psi = np.clip(u, -HUBER_K, HUBER_K)
            m = float(np.mean(np.abs(u) <= HUBER_K))
            kfac = 1.0 + 2.0 / n * (1.0 - m) / m
            cov = kfac**2 * float(np.sum(psi**2) / dof) / m**2 * scale**2 * np.linalg.inv(X.T @ X)
        else:
            s2 = float(np.sum(r**2) / dof) if n > 2 else 0.0
            cov = s2 * np.linalg.inv(X.T @ X)
    except (np.linalg.LinAlgError, ZeroDivisionError, FloatingPointError):
        cov = np.full((2, 2), np.nan)
    return beta, cov, w


@dataclass
class Calibration:
    """A straight-line calibration ``signal = slope * C + intercept``.

    Attributes are the fit and its diagnostics; :meth:`to_composition` and
    :meth:`sd` turn map values into composition and its 1-sigma.
    """

    slope: float
    intercept: float
    cov: np.ndarray
    r2: float
    r2_unweighted: float
    rmse: float
    rmse_signal: float
    loo_rmse: float
    n: int
    column: str
    method: str
    noise_var_coef: tuple = (0.0, 1.0, 0.0)
    counts_per_unit: float = 1.0
    counts_per_unit_source: str = "raw counts assumed"
    phase: str | None = None
    table: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def slope_sd(self) -> float:
        return float(np.sqrt(self.cov[1, 1]))

    @property
    def intercept_sd(self) -> float:
        return float(np.sqrt(self.cov[0, 0]))

    def to_composition(self, signal):
        """Composition from map signal (same shape; float32 in, float32 out)."""
        s = np.asarray(signal)
        dt = np.float32 if s.dtype == np.float32 else np.float64
        return ((s - dt(self.intercept)) / dt(self.slope)).astype(dt, copy=False)

    def counting_var(self, signal):
        """Per-pixel variance of the map signal from counting statistics."""
        a0, a1, a2 = self.noise_var_coef
        s = np.asarray(signal, dtype=float)
        return np.clip(a0 + a1 * s + a2 * s * s, 0.0, None)

    def calibration_var(self, composition):
        """Variance of a composition from the calibration's parameter covariance."""
        c = np.asarray(composition, dtype=float)
        v_b, v_a, c_ab = self.cov[0, 0], self.cov[1, 1], self.cov[0, 1]
        return np.clip((c * c * v_a + v_b + 2 * c * c_ab) / self.slope**2, 0.0, None)

    def sd(self, signal, n_pixels=1):
        """1-sigma of the composition of a value averaged over ``n_pixels`` pixels."""
        c = self.to_composition(np.asarray(signal, dtype=float))
        var = self.counting_var(signal) / (self.slope**2 * np.asarray(n_pixels, dtype=float))
        return np.sqrt(var + self.calibration_var(c))

    def to_dict(self) -> dict:
        spots = [
            {k: (None if (isinstance(v, float) and not np.isfinite(v)) else v) for k, v in rec.items()}
            for rec in self.table.to_dict(orient="records")
        ]
        return {
            "model": f"signal = slope * {self.column} + intercept",
            "slope": self.slope,
            "intercept": self.intercept,
            "slope_sd": self.slope_sd,
            "intercept_sd": self.intercept_sd,
            "slope_intercept_cov": float(self.cov[0, 1]),
            "r2": self.r2,
            "r2_unweighted": self.r2_unweighted,
            "rmse": self.rmse,
            "rmse_signal": self.rmse_signal,
            "loo_rmse": self.loo_rmse,
            "n": self.n,
            "method": self.method,
            "phase": self.phase,
            "counts_per_unit": self.counts_per_unit,
            "counts_per_unit_source": self.counts_per_unit_source,
            "outliers": [s["row"] for s in spots if s.get("weight", 1.0) < 0.5],
            "spots": spots,
        }


def read_spots(path, *, column="An", pixel_um, shape, spot_um=None):
    """Read a spot table located on the map.

    Columns: ``x_px, y_px`` (pixels, x = column, y = row) or ``x_um, y_um``
    (µm from the map's top-left pixel centre), the composition ``column``,
    optional ``spot_um`` (spot diameter), optional ``phase``, optional ``spot``
    (label). Returns a DataFrame with ``row, label, x_px, y_px, value, spot_um,
    phase``.
    """
    from zoneprofile.io import read_text_table

    frame, _ = read_text_table(path, header_contains=("x_px", "x_um"))
    names = {str(c).strip().lower(): c for c in frame.columns}
    if "x_px" in names and "y_px" in names:
        xcol, ycol, scale = names["x_px"], names["y_px"], 1.0
    elif "x_um" in names and "y_um" in names:
        xcol, ycol, scale = names["x_um"], names["y_um"], 1.0 / pixel_um
    else:
        message = "spot table needs columns x_px and y_px (pixels) or x_um and y_um (µm)"
        raise InputError(message, path=path)
    col_key = column.strip().lower()
    if col_key not in names:
        have = ", ".join(str(c) for c in frame.columns if c != "_row")
        message = f"spot table has no '{column}' column (columns present: {have}); choose one with --column"
        raise InputError(message, path=path)
    vcol = names[col_key]
    rows, cols = shape

    def number(cell, row, col, *, positive=False):
        s = "" if cell is None else str(cell).strip()
        if s == "":
            raise InputError("empty cell where a number is needed", path=path, row=row, column=str(col))
        from zoneprofile.io.cells import parse_number

        v = parse_number(s)
        if v is None:
            raise InputError("not a number", path=path, row=row, column=str(col), text=s)
        if not np.isfinite(v) or (positive and v <= 0):
            need = "a positive number" if positive else "a finite number"
            raise InputError(f"expected {need}", path=path, row=row, column=str(col), text=s)
        return v

    out = []
    for _, rec in frame.iterrows():
        row = int(rec["_row"])
        x = number(rec[xcol], row, xcol) * scale
        y = number(rec[ycol], row, ycol) * scale
        value = number(rec[vcol], row, vcol)
        if not (-0.5 <= x <= cols - 0.5):
            message = f"spot lies outside the map: x = {x:.1f} px, the map spans columns 0 to {cols - 1}"
            raise InputError(message, path=path, row=row, column=str(xcol))
        if not (-0.5 <= y <= rows - 0.5):
            message = f"spot lies outside the map: y = {y:.1f} px, the map spans rows 0 to {rows - 1}"
            raise InputError(message, path=path, row=row, column=str(ycol))
        size = spot_um
        if size is None and "spot_um" in names and str(rec[names["spot_um"]]).strip():
            size = number(rec[names["spot_um"]], row, names["spot_um"], positive=True)
        label = str(rec[names["spot"]]).strip() if "spot" in names else str(row)
        phase = str(rec[names["phase"]]).strip() if "phase" in names else ""
        out.append({"row": row, "label": label, "x_px": x, "y_px": y, "value": value,
                    "spot_um": np.nan if size is None else float(size), "phase": phase})
    table = pd.DataFrame(out, columns=["row", "label", "x_px", "y_px", "value", "spot_um", "phase"])
    return table


def spot_signals(data, x_px, y_px, radius_px):
    """Mean, pixel count and pixel sd of ``data`` over discs centred on each spot.

    Pixel centres sit at integer coordinates; a pixel belongs to the disc when
    its centre lies within ``radius_px`` (at least 0.71 px, so one pixel is
    always taken).
    """
    rows, cols = data.shape
    x_px = np.atleast_1d(np.asarray(x_px, float))
    y_px = np.atleast_1d(np.asarray(y_px, float))
    radius = np.broadcast_to(np.maximum(np.asarray(radius_px, float), 0.71), x_px.shape)
    mean = np.empty(x_px.size)
    count = np.empty(x_px.size, dtype=int)
    sd = np.empty(x_px.size)
    for i, (x, y, r) in enumerate(zip(x_px, y_px, radius)):
        r0, r1 = max(0, int(np.floor(y - r))), min(rows, int(np.ceil(y + r)) + 1)
        c0, c1 = max(0, int(np.floor(x - r))), min(cols, int(np.ceil(x + r)) + 1)
        block = np.asarray(data[r0:r1, c0:c1], dtype=float)
        yy, xx = np.mgrid[r0:r1, c0:c1]
        inside = (xx - x) ** 2 + (yy - y) ** 2 <= r * r
        vals = block[inside]
        mean[i] = vals.mean()
        count[i] = vals.size
        sd[i] = vals.std(ddof=1) if vals.size > 1 else np.nan
    return mean, count, sd


def estimate_counts_per_unit(data, region=None, *, max_side=1024):
    """Estimate ``g`` (counts per unit of the map's values) from pixel-to-pixel noise.

    For Poisson counts ``var(S) = S / g``. The noise variance comes from
    differences of horizontally adjacent pixels (robust, MAD-based, zoning
    gradients are slow in comparison), the level from the median value.
    ``region`` is a (r0, r1, c0, c1) box inside the crystal.
    """
    r0, r1, c0, c1 = region if region is not None else (0, data.shape[0], 0, data.shape[1])
    rc, cc = (r0 + r1) // 2, (c0 + c1) // 2
    h = min(max_side, r1 - r0) // 2
    w = min(max_side, c1 - c0) // 2
    block = np.asarray(data[rc - h: rc + h, cc - w: cc + w], dtype=np.float64)
    if block.size < 16:
        return np.nan
    diff = np.diff(block, axis=1).ravel()
    noise_var = (1.4826 * np.median(np.abs(diff - np.median(diff)))) ** 2 / 2.0
    level = float(np.median(block))
    if not noise_var > 0 or not level > 0:
        return np.nan
    return level / noise_var


def _loo(x, y, robust):
    n = x.size
    pred = np.empty(n)
    for i in range(n):
        keep = np.arange(n) != i
        (b, a), _, _ = fit_line_robust(x[keep], y[keep], robust=robust)
        pred[i] = (y[i] - b) / a if a != 0 else np.nan
    return float(np.sqrt(np.nanmean((pred - x) ** 2)))


def calibrate_map(
    data,
    spots,
    *,
    pixel_um,
    column="An",
    spot_um=None,
    counts_per_unit=None,
    integer_counts=True,
    noise_region=None,
    ratio_total=None,
    robust=True,
    path=None,
    phase=None,
):
    """Calibrate a map against spot analyses.

    Parameters
    ----------
    data : 2-D array-like (rows, cols)
        Map signal (counts, or a ratio of counts).
    spots : DataFrame
        From :func:`read_spots` (``row, label, x_px, y_px, value, spot_um``).
    pixel_um : float
    column : str
        Name of the calibrated quantity (``An``).
    spot_um : float, optional
        Spot diameter overriding the table's ``spot_um`` (default 1 pixel
        when neither is given).
    counts_per_unit : float, optional
        Counts per unit of the map values (Poisson noise model). Default: 1 for
        integer maps (raw counts), estimated from pixel noise for float maps.
    ratio_total : float, optional
        Mean total counts ``A + B`` when ``data`` is a ratio ``A / (A + B)``.
    robust : bool
        Huber weights (True) or ordinary least squares.
    path : path-like, optional
        Spot file, named in error messages.

    Returns
    -------
    Calibration

    Raises
    ------
    InputError
        Fewer than three spots, no spread in composition or signal, a slope of
        zero.
    """
    spots = spots if phase is None else spots[spots["phase"] == phase]
    n = len(spots)
    if n < 3:
        message = (
            f"calibration needs at least 3 spot analyses on the map, found {n}"
            + (f" for phase '{phase}'" if phase else "")
            + "; add spots or give a traverse instead"
        )
        raise InputError(message, path=path)
    size_um = spots["spot_um"].to_numpy(float)
    if spot_um is not None:
        size_um = np.full(n, float(spot_um))
    size_um = np.where(np.isfinite(size_um), size_um, pixel_um)
    radius_px = size_um / 2.0 / pixel_um
    signal, n_px, px_sd = spot_signals(data, spots["x_px"].to_numpy(), spots["y_px"].to_numpy(), radius_px)
    comp = spots["value"].to_numpy(float)
    if np.ptp(comp) <= 0:
        message = f"all spots have the same {column}; calibration needs a spread of compositions"
        raise InputError(message, path=path, column=column)
    if np.ptp(signal) <= 0:
        message = "the map has the same signal at every spot; check the channel and the spot coordinates"
        raise InputError(message, path=path)
    (b, a), cov, w = fit_line_robust(comp, signal, robust=robust)
    if not np.isfinite(a) or a == 0:
        raise InputError("calibration slope is zero: the map signal does not follow the composition", path=path)
    resid = signal - (a * comp + b)
    pred = (signal - b) / a
    sw = w / w.sum()
    ybar_w = float(np.sum(sw * signal))
    r2 = 1.0 - float(np.sum(w * resid**2) / np.sum(w * (signal - ybar_w) ** 2))
    r2_u = 1.0 - float(np.sum(resid**2) / np.sum((signal - signal.mean()) ** 2))
    rmse = float(np.sqrt(np.mean((pred - comp) ** 2)))
    rmse_signal = float(np.sqrt(np.mean(resid**2)))
    loo = _loo(comp, signal, robust)

    if counts_per_unit is not None:
        g, g_source = float(counts_per_unit), "given"
    elif integer_counts:
        g, g_source = 1.0, "raw counts assumed (integer map)"
    else:
        g = estimate_counts_per_unit(data, noise_region)
        g_source = "estimated from pixel-to-pixel noise"
        if not np.isfinite(g):
            g, g_source = 1.0, "raw counts assumed (noise estimate failed)"
    if ratio_total is not None:
        k = 1.0 / (ratio_total * g)
        coef = (0.0, k, -k)
    else:
        coef = (0.0, 1.0 / g, 0.0)

    table = pd.DataFrame({
        "row": spots["row"].to_numpy(int), "label": spots["label"].astype(str).to_numpy(),
        "x_px": spots["x_px"].to_numpy(float), "y_px": spots["y_px"].to_numpy(float),
        column: comp, "signal": signal, "n_pixels": n_px, "pixel_sd": px_sd,
        "predicted": pred, "residual": pred - comp, "weight": w,
    })
    return Calibration(
        slope=float(a), intercept=float(b), cov=cov, r2=r2, r2_unweighted=r2_u, rmse=rmse,
        rmse_signal=rmse_signal, loo_rmse=loo, n=n, column=column,
        method="Huber IRLS" if (robust and n >= 5) else "least squares",
        noise_var_coef=coef, counts_per_unit=g, counts_per_unit_source=g_source,
        phase=phase or None, table=table,
    )
