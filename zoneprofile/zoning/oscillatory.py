"""Oscillatory bands: stretches of repeated small fluctuations of composition.

Method
------
The detector works on the residuals left after the steps and the continuous
zoning have been removed (see :mod:`zoneprofile.zoning.analyse`).

1. **Scan.** For trial wavelengths λ between ``wavelength_min_um`` (2.5 point
   spacings) and ``wavelength_max_um``, a window of ``window_cycles·λ`` slides
   over the profile; in each window a sinusoid of wavelength λ plus a straight
   line is fitted by least squares and compared with the line alone:
   ``Δχ² = (RSS_line − RSS_line+sine)/σ²`` follows χ² with 2 degrees of
   freedom under noise alone. Windows with ``P(χ²₂ > Δχ²) < local_alpha`` are
   significant; a run of significant windows is a candidate band.
2. **Periodogram.** On the candidate's points the generalised Lomb–Scargle
   periodogram (Lomb 1976, Astrophys. Space Sci. 39:447; Scargle 1982,
   Astrophys. J. 263:835; floating mean of Zechmeister & Kürster 2009,
   Astron. Astrophys. 496:577; ``scipy.signal.lombscargle``) gives the
   dominant wavelength. With the noise σ known, the unnormalised power divided
   by σ² is exponentially distributed under noise alone, so one frequency has
   ``p = exp(−P/σ²)``; the false-alarm probability over M independent trials
   (frequencies times band positions) is ``1 − (1 − p)^M`` (Scargle 1982).
3. **Peak count.** A band must hold at least half as many full swings of the
   smoothed residual from below −A/2 to above +A/2 as it holds wavelengths
   (and at least 3; A the fitted semi-amplitude): a periodogram peak without
   repeated swings is not a band. Runs of significant windows separated by a
   dip shorter than 1.5 wavelengths are one candidate.
4. **Extent.** A band found is widened to the neighbouring windows where its
   own wavelength is still present at P < 0.05, less half a wavelength at each
   widened end (see :func:`_extend`).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from zoneprofile.zoning._local import median_spacing, ols

__all__ = ["Band", "detect_bands", "local_sine_statistic"]


@dataclass
class Band:
    """One oscillatory band (distances from the rim, µm; ``start_um < end_um``)."""

    start_um: float
    end_um: float
    wavelength_um: float
    amplitude: float  # semi-amplitude (half the peak-to-trough swing)
    p_value: float  # false-alarm probability against noise alone
    n_peaks: int
    n_points: int
    power_ratio: float  # Lomb–Scargle power / σ² at the dominant wavelength

    def to_dict(self) -> dict:
        return asdict(self)


_SUMS = ("1", "x", "xx", "s", "c", "xs", "xc", "ss", "cc", "sc", "y", "xy", "sy", "cy", "yy")


def local_sine_statistic(distance_um, residual, noise_sd, wavelength_um, half_window_um, min_points=8):
    """Δχ² of a sine of the given wavelength in a window centred on each point.

    Returns an array (NaN where the window holds fewer than ``min_points``).
    Uses prefix sums so all windows cost O(n). ``wavelength_um`` and
    ``half_window_um`` may also be 1-D arrays of equal length: then row ``i``
    of the returned 2-D array is the statistic of wavelength ``i`` (all
    wavelengths in one batch).
    """
    x = np.asarray(distance_um, dtype=float)
    y = np.asarray(residual, dtype=float)
    single = np.ndim(wavelength_um) == 0
    lams = np.atleast_1d(np.asarray(wavelength_um, dtype=float))
    halves = np.broadcast_to(np.asarray(half_window_um, dtype=float), lams.shape)
    # the batch holds ~60 floats per point and wavelength: wavelengths go in chunks of at most
    # _BATCH_CELLS points x wavelengths, so memory stays linear in the points (rows are independent,
    # so the result is the same as one batch)
    rows = max(1, _BATCH_CELLS // max(x.size, 1))
    if lams.size > rows:
        out = np.concatenate([_sine_batch(x, y, noise_sd, lams[k:k + rows], halves[k:k + rows], min_points)
                              for k in range(0, lams.size, rows)])
    else:
        out = _sine_batch(x, y, noise_sd, lams, halves, min_points)
    return out[0] if single else out


#: Points x wavelengths computed in one batch of :func:`local_sine_statistic` (about 0.5 KB each).
_BATCH_CELLS = 200_000


def _sine_batch(x, y, noise_sd, lams, halves, min_points):
    n = x.size
    n_l = lams.size
    w = 2.0 * np.pi / lams
    s, c = np.sin(w[:, None] * x), np.cos(w[:, None] * x)
    xc0 = x - x.mean()
    ones = np.ones(n)
    # the columns of _SUMS, each (n_l, n)
    cols = np.stack([np.broadcast_to(ones, s.shape), np.broadcast_to(xc0, s.shape),
                     np.broadcast_to(xc0 * xc0, s.shape), s, c, xc0 * s, xc0 * c, s * s, c * c, s * c,
                     np.broadcast_to(y, s.shape), np.broadcast_to(xc0 * y, s.shape), s * y, c * y,
                     np.broadcast_to(y * y, s.shape)], axis=1)
    pref = np.concatenate([np.zeros((n_l, len(_SUMS), 1)), np.cumsum(cols, axis=2)], axis=2)
    lo = np.searchsorted(x, (x[None, :] - halves[:, None]).ravel(), side="left").reshape(n_l, n)
    hi = np.searchsorted(x, (x[None, :] + halves[:, None]).ravel(), side="right").reshape(n_l, n)
    sums = np.take_along_axis(pref, hi[:, None, :], axis=2) - np.take_along_axis(pref, lo[:, None, :], axis=2)
    S = {k: sums[:, i, :] for i, k in enumerate(_SUMS)}
    m = hi - lo
    xtx = np.empty((n_l, n, 4, 4))
    order = [["1", "x", "s", "c"], ["x", "xx", "xs", "xc"], ["s", "xs", "ss", "sc"], ["c", "xc", "sc", "cc"]]
    for i, row in enumerate(order):
        for j, key in enumerate(row):
            xtx[:, :, i, j] = S[key]
    xty = np.stack([S["y"], S["xy"], S["sy"], S["cy"]], axis=2)
    out = np.full((n_l, n), np.nan)
    ok = m >= min_points
    if np.any(ok):
        a4, b4 = xtx[ok], xty[ok]
        a2, b2 = a4[:, :2, :2], b4[:, :2]
        det4 = np.linalg.det(a4)
        good = np.abs(det4) > 1e-10 * np.prod(np.abs(np.diagonal(a4, axis1=1, axis2=2)), axis=1)
        fit4 = np.zeros_like(b4)
        fit2 = np.zeros_like(b2)
        fit4[good] = np.linalg.solve(a4[good], b4[good][..., None])[..., 0]
        fit2[good] = np.linalg.solve(a2[good], b2[good][..., None])[..., 0]
        # RSS = yy - b·coef for least squares; the difference is the explained part
        gain = np.einsum("ij,ij->i", fit4, b4) - np.einsum("ij,ij->i", fit2, b2)
        out[ok] = np.where(good, gain / noise_sd**2, np.nan)
    return out


def _runs(mask):
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.concatenate([[idx[0]], idx[breaks + 1]])
    ends = np.concatenate([idx[breaks], [idx[-1]]])
    return list(zip(starts, ends))


def _count_swings(x, r, wavelength, amplitude):
    # light smoothing (running mean over ±λ/6) then hysteresis counting of swings
    half = wavelength / 6.0
    lo = np.searchsorted(x, x - half, side="left")
    hi = np.searchsorted(x, x + half, side="right")
    pref = np.concatenate([[0.0], np.cumsum(r)])
    smooth = (pref[hi] - pref[lo]) / (hi - lo)
    state, peaks = 0, 0
    for v in smooth:
        if v > 0.5 * amplitude and state <= 0:
            if state == -1:
                peaks += 1
            state = 1
        elif v < -0.5 * amplitude and state >= 0:
            state = -1
    return peaks


def _sine_amplitude(x, r, wavelength):
    w = 2 * np.pi / wavelength
    t = x - x.mean()
    coef, _, cov = ols(np.column_stack([np.ones_like(t), t, np.sin(w * x), np.cos(w * x)]), r)
    return float(np.hypot(coef[2], coef[3]))


def detect_bands(
    distance_um,
    residual,
    noise_sd,
    *,
    wavelength_min_um=None,
    wavelength_max_um=None,
    alpha=0.01,
    local_alpha=1e-3,
    min_cycles=3.0,
    window_cycles=3.0,
    max_bands=5,
) -> list[Band]:
    """Find oscillatory bands in detrended residuals.

    Parameters
    ----------
    distance_um, residual : array_like
        Distances from the rim (µm, increasing) and residuals of the profile
        after removing steps and continuous zoning.
    noise_sd : float
        1-sigma analytical noise.
    wavelength_min_um, wavelength_max_um : float, optional
        Search range; default 2.5 median spacings to ``min(25 µm, length/min_cycles)``
        (oscillatory zoning of plagioclase has wavelengths of a few µm to ~20 µm;
        longer swings are read as zones).
    alpha : float
        Largest false-alarm probability of a reported band.
    local_alpha : float
        Significance of one sliding window in the scan.
    min_cycles : float
        Fewest wavelengths (and counted swings) a band must hold.
    window_cycles : float
        Length of the sliding window in wavelengths.
    max_bands : int
        Most bands reported.

    Returns
    -------
    list of Band
        Ordered by distance from the rim.
    """
    x = np.asarray(distance_um, dtype=float)
    r = np.asarray(residual, dtype=float)
    keep = np.isfinite(r)
    x, r = x[keep], r[keep]
    if x.size < 12:
        return []
    sigma = float(noise_sd)
    spacing = median_spacing(x)
    length = float(x[-1] - x[0])
    lam_min = 2.5 * spacing if wavelength_min_um is None else float(wavelength_min_um)
    lam_max = min(25.0, length / min_cycles) if wavelength_max_um is None else float(wavelength_max_um)
    if not lam_min < lam_max:
        return []
    n_lam = int(np.ceil(np.log(lam_max / lam_min) / np.log(1.06))) + 1
    lams = np.geomspace(lam_min, lam_max, n_lam)
    threshold = -2.0 * np.log(local_alpha)  # χ²₂ survival is exp(-x/2)
    candidates = []
    stats = local_sine_statistic(x, r, sigma, lams, 0.5 * window_cycles * lams)
    for lam, stat in zip(lams, stats):
        runs = _runs(np.nan_to_num(stat, nan=0.0) > threshold)
        merged = []
        for a, b in runs:  # a dip shorter than 1.5 wavelengths does not end a band
            if merged and x[a] - x[merged[-1][1]] <= 1.5 * lam:
                merged[-1] = (merged[-1][0], b)
            else:
                merged.append((a, b))
        for a, b in merged:
            candidates.append((float(np.nanmax(stat[a:b + 1])), lam, a, b))
    candidates.sort(reverse=True)
    bands: list[Band] = []
    taken = np.zeros(x.size, dtype=bool)
    for score, lam, a, b in candidates:
        if len(bands) >= max_bands:
            break
        if np.any(taken[a:b + 1]):
            continue
        band = _assess(x, r, sigma, a, b, lam, lam_min, lam_max, alpha, min_cycles, length)
        if band is not None:
            band = _extend(x, r, sigma, band, taken, window_cycles)
            inside = (x >= band.start_um) & (x <= band.end_um)
            taken[inside] = True
            bands.append(band)
    return sorted(bands, key=lambda b: b.start_um)


def _extend(x, r, sigma, band, taken, window_cycles, extend_alpha=0.05):
    """Widen a band to the windows where its own wavelength is still present.

    At the band's wavelength the windows with P(χ²₂ > Δχ²) < ``extend_alpha``
    joined to the band (dips shorter than 1.5 wavelengths bridged) extend it;
    each extended end is pulled back by half a wavelength because a window
    centred just outside a band still overlaps it. Points of other bands are
    never taken.
    """
    lam = band.wavelength_um
    stat = local_sine_statistic(x, r, sigma, lam, 0.5 * window_cycles * lam)
    ok = (np.nan_to_num(stat, nan=0.0) > -2.0 * np.log(extend_alpha)) & ~taken
    ok |= (x >= band.start_um) & (x <= band.end_um)
    runs = _runs(ok)
    merged = []
    for a, b in runs:
        if merged and x[a] - x[merged[-1][1]] <= 1.5 * lam and not np.any(taken[merged[-1][1]:a]):
            merged[-1] = (merged[-1][0], b)
        else:
            merged.append((a, b))
    for a, b in merged:
        if x[a] <= band.end_um and x[b] >= band.start_um:
            start = min(band.start_um, x[a] + 0.5 * lam) if x[a] < band.start_um else band.start_um
            end = max(band.end_um, x[b] - 0.5 * lam) if x[b] > band.end_um else band.end_um
            inside = (x >= start) & (x <= end)
            amplitude = _sine_amplitude(x[inside], r[inside] - r[inside].mean(), lam)
            return Band(start_um=float(start), end_um=float(end), wavelength_um=lam, amplitude=amplitude,
                        p_value=band.p_value, n_peaks=band.n_peaks, n_points=int(inside.sum()),
                        power_ratio=band.power_ratio)
    return band


def _assess(x, r, sigma, a, b, lam, lam_min, lam_max, alpha, min_cycles, length):
    from scipy.signal import lombscargle  # heavy import, only when a candidate band is assessed

    start, end = float(x[a]), float(x[b])
    inside = (x >= start) & (x <= end)
    if inside.sum() < 8 or end - start < min_cycles * lam_min:
        return None
    xb, rb = x[inside], r[inside]
    t = xb - xb.mean()
    coef, _, _ = ols(np.column_stack([np.ones_like(t), t]), rb)
    rb = rb - (coef[0] + coef[1] * t)
    band_len = end - start
    f_lo, f_hi = 1.0 / min(lam_max, band_len / min_cycles), 1.0 / lam_min
    if f_lo >= f_hi:
        return None
    n_f = max(int(10 * (f_hi - f_lo) * band_len), 50)
    freqs = np.linspace(f_lo, f_hi, n_f)
    power = lombscargle(xb, rb, 2 * np.pi * freqs, floating_mean=True)
    best = int(np.argmax(power))
    wavelength = float(1.0 / freqs[best])
    ratio = float(power[best] / sigma**2)
    trials = max((f_hi - f_lo) * band_len, 1.0) * max(length / band_len, 1.0)
    p_single = float(np.exp(-ratio))
    p_value = float(-np.expm1(trials * np.log1p(-min(p_single, 1 - 1e-16))))
    amplitude = _sine_amplitude(xb, rb, wavelength)
    peaks = _count_swings(xb, rb, wavelength, amplitude)
    cycles = band_len / wavelength
    if p_value > alpha or cycles < min_cycles or peaks < max(3, int(0.5 * cycles)):
        return None
    return Band(
        start_um=start,
        end_um=end,
        wavelength_um=wavelength,
        amplitude=amplitude,
        p_value=p_value,
        n_peaks=int(peaks),
        n_points=int(inside.sum()),
        power_ratio=ratio,
    )
