"""Seeded generators of zoned profiles with their ground truth.

Tests, documentation and the demo share these. Every generator takes a
``seed`` and returns ``(distance_um, value, truth)``; ``truth`` is a plain dict
that lists what was planted (steps, bands, noise) in the project's frame:
distance 0 at the rim, a step's ``change`` is the rim-side value minus the
core-side value (negative = normal, positive = reverse).
"""

from __future__ import annotations

import numpy as np
from scipy.special import erf

from zoneprofile._validation import InputError

__all__ = ["synthetic_zoned_profile", "synthetic_case", "CASES"]

#: 10–90 % width of an erf step in units of its standard deviation: 2·Φ⁻¹(0.9)
ERF_WIDTH_FACTOR = 2.563103131089201


def _positions(rng, length_um, spacing_um):
    if np.ndim(spacing_um) == 0:
        step = float(spacing_um)
        return np.arange(0.0, length_um + 1e-9, step)
    lo, hi = (float(s) for s in spacing_um)
    gaps = rng.uniform(lo, hi, size=int(length_um / lo) + 2)
    x = np.concatenate([[0.0], np.cumsum(gaps)])
    return x[x <= length_um]


def synthetic_zoned_profile(
    *,
    seed=0,
    length_um=200.0,
    spacing_um=(1.0, 3.0),
    noise_sd=0.5,
    core_value=60.0,
    steps=(),
    trend_per_um=0.0,
    bands=(),
    smooth=None,
    low=0.0,
    high=100.0,
):
    """A noisy zoned profile (e.g. An mol%) with known steps, trend and bands.

    Parameters
    ----------
    seed : int
        Seed of ``numpy.random.default_rng``.
    length_um : float
        Traverse length; points run from the rim (0) to the core.
    spacing_um : float or (low, high)
        Even spacing, or the range of uniformly drawn uneven gaps.
    noise_sd : float
        1-sigma Gaussian analytical noise.
    core_value : float
        Value at the core end before any step.
    steps : sequence of (position_um, change[, width_um])
        Each step adds ``change`` on its rim side (x < position), smoothed by
        an erf whose 10–90 % width is ``width_um`` (default 0: sharp).
    trend_per_um : float
        Continuous zoning: change per µm moving toward the rim.
    bands : sequence of (start_um, end_um, wavelength_um, amplitude)
        Sinusoidal oscillations (semi-amplitude) between two distances.
    smooth : (amplitude, width_um) or None
        A broad tanh-shaped change centred mid-traverse (smooth zoning).
    low, high : float
        Physical limits; values are clipped into them (An 0–100).

    Returns
    -------
    distance_um, value : ndarray
    truth : dict
        ``steps [{position_um, change, width_um, kind}]``, ``bands
        [{start_um, end_um, wavelength_um, amplitude}]``, ``noise_sd``,
        ``trend_per_um``, ``clean`` (noise-free values).
    """
    rng = np.random.default_rng(seed)
    x = _positions(rng, float(length_um), spacing_um)
    if x.size < 3:
        message = f"length_um {length_um} and spacing_um {spacing_um} give fewer than 3 points"
        raise InputError(message)
    clean = np.full_like(x, float(core_value)) + trend_per_um * (x[-1] - x)
    truth_steps = []
    for item in steps:
        pos, change = float(item[0]), float(item[1])
        width = float(item[2]) if len(item) > 2 else 0.0
        if width > 0:
            s = width / ERF_WIDTH_FACTOR
            frac = 0.5 * (1.0 - erf((x - pos) / (np.sqrt(2.0) * s)))
        else:
            frac = (x < pos).astype(float)
        clean = clean + change * frac
        kind = "reverse" if change > 0 else "normal"
        truth_steps.append({"position_um": pos, "change": change, "width_um": width, "kind": kind})
    if smooth is not None:
        amp, width = float(smooth[0]), float(smooth[1])
        mid = 0.5 * (x[0] + x[-1])
        clean = clean + 0.5 * amp * (1.0 - np.tanh((x - mid) / width))
    truth_bands = []
    for start, end, wavelength, amplitude in bands:
        inside = (x >= start) & (x <= end)
        phase = rng.uniform(0, 2 * np.pi)
        clean = clean + np.where(inside, amplitude * np.sin(2 * np.pi * x / wavelength + phase), 0.0)
        truth_bands.append(
            {"start_um": float(start), "end_um": float(end), "wavelength_um": float(wavelength),
             "amplitude": float(amplitude)}
        )
    value = np.clip(clean + rng.normal(0.0, noise_sd, size=x.size), low, high)
    truth = {
        "steps": sorted(truth_steps, key=lambda s: s["position_um"]),
        "bands": truth_bands,
        "noise_sd": float(noise_sd),
        "trend_per_um": float(trend_per_um),
        "clean": clean,
    }
    return x, value, truth


def _case_steps(rng):
    # four steps at least 25 µm apart and 20 µm from the ends, alternating sizes
    while True:
        pos = np.sort(rng.uniform(20.0, 200.0, size=4))
        if np.all(np.diff(pos) > 25.0):
            break
    changes = rng.uniform(4.0, 12.0, size=4) * rng.choice([-1.0, 1.0], size=4)
    widths = rng.uniform(0.0, 3.0, size=4)
    return [(float(p), float(c), float(w)) for p, c, w in zip(pos, changes, widths)]


def _case(name, seed):
    rng = np.random.default_rng(10_000 + seed)
    noise = float(rng.uniform(0.3, 1.0))
    spacing = (1.0, float(rng.uniform(1.5, 3.0)))
    if name == "steps":
        return dict(length_um=220.0, spacing_um=spacing, noise_sd=noise, core_value=60.0, steps=_case_steps(rng),
                    trend_per_um=float(rng.uniform(-0.03, 0.03)))
    if name == "close-steps":
        pos = np.cumsum(rng.uniform(12.0, 18.0, size=4)) + 15.0
        changes = rng.uniform(4.0, 8.0, size=4) * rng.choice([-1.0, 1.0], size=4)
        steps = [(float(p), float(c), float(rng.uniform(0.0, 2.0))) for p, c in zip(pos, changes)]
        return dict(length_um=float(pos[-1] + 25.0), spacing_um=(1.0, 2.5), noise_sd=noise, core_value=60.0,
                    steps=steps)
    if name == "steps+band":
        steps = [(40.0, -6.0, 1.0), (80.0, 8.0, 1.5), (170.0, -7.0, 0.5), (210.0, 9.0, 2.0)]
        start = float(rng.uniform(95.0, 105.0))
        return dict(length_um=240.0, spacing_um=(1.0, 1.5), noise_sd=noise, core_value=60.0, steps=steps,
                    bands=[(start, start + 50.0, 6.0, float(rng.uniform(1.5, 2.5)))])
    if name == "band":
        start = float(rng.uniform(40.0, 80.0))
        length = float(rng.uniform(35.0, 60.0))
        return dict(length_um=180.0, spacing_um=(0.8, 1.6), noise_sd=noise, core_value=55.0,
                    bands=[(start, start + length, 6.0, float(rng.uniform(1.5, 3.0)))],
                    trend_per_um=float(rng.uniform(-0.03, 0.03)))
    if name == "resorption":
        pos = float(rng.uniform(50.0, 130.0))
        return dict(length_um=180.0, spacing_um=spacing, noise_sd=noise, core_value=50.0,
                    steps=[(pos, float(rng.uniform(8.0, 18.0)), float(rng.uniform(0.0, 2.0)))],
                    trend_per_um=float(rng.uniform(-0.06, 0.0)))
    if name == "smooth":
        return dict(length_um=200.0, spacing_um=spacing, noise_sd=noise, core_value=float(rng.uniform(65, 80)),
                    trend_per_um=float(rng.uniform(-0.12, -0.03)), smooth=(float(rng.uniform(-15, 15)), 40.0))
    if name == "noise":
        return dict(length_um=200.0, spacing_um=spacing, noise_sd=noise, core_value=60.0)
    message = f"unknown case '{name}'; choose one of: {', '.join(CASES)}"
    raise InputError(message)


#: names of the randomised profile kinds of :func:`synthetic_case`
CASES = ("steps", "close-steps", "steps+band", "band", "resorption", "smooth", "noise")


def synthetic_case(name, seed=0):
    """A randomised profile of one kind, drawn from ``seed`` (for tests and the demo).

    ``name`` is one of :data:`CASES`: ``steps`` (four steps of 4–12 mol% at
    random places, mild trend), ``close-steps`` (four steps of 4–8 mol% only
    12–18 µm apart, staircases included), ``steps+band`` (four steps and a 6 µm
    oscillatory band), ``band`` (a 6 µm band on a weak trend), ``resorption``
    (one reverse step of 8–18 mol% on normally zoned growth), ``smooth``
    (continuous zoning, no step), ``noise`` (flat). Noise sd 0.3–1 mol% and
    1–3 µm spacing are drawn too. Returns ``(distance_um, value, truth)``.
    """
    return synthetic_zoned_profile(seed=seed, **_case(name, seed))
