r"""Fitting on a temperature–time path, not at one temperature.

Along a path the duration solves ``∫ D_ref(T(s)) ds = τ`` (:mod:`paths`). The
profile's shape can also depend on temperature (the A/RT term of the
An-coupled model, laws that are not temperature-separable), so it is modelled
at the path's **effective temperature** over the fitted duration ``t``: the
``T_eff`` with ``D_ref(T_eff) = (1/t)·∫₀ᵗ D_ref(T(s)) ds`` (the temperature
whose D, held for ``t``, gives the same τ). ``T_eff`` depends on ``t`` and
``t`` on the fit, so the two are iterated from the path's starting
temperature until ``T_eff`` moves by less than 0.5 °C (quick fits, then one
full fit). The temperature given beside the path plays no part.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["effective_temperature_c", "fit_on_path"]

TOLERANCE_C = 0.5
MAX_ITERATIONS = 5


def effective_temperature_c(path, d_fn, duration_days, n=2001):
    """``T_eff`` (°C) of ``path`` over ``[0, duration_days]`` for ``d_fn(T) -> D``; None when undefined."""
    from scipy.optimize import brentq

    from zoneprofile.diffusion.paths import _temperature

    if duration_days is None or not math.isfinite(duration_days) or duration_days <= 0:
        return None
    ts = np.linspace(0.0, float(duration_days), n)
    temps = np.asarray(_temperature(path, ts), float)
    d = np.asarray(d_fn(temps), float)
    mean = float(np.trapezoid(d, ts) / duration_days) if hasattr(np, "trapezoid") else float(
        np.trapz(d, ts) / duration_days)
    lo, hi = float(np.min(temps)), float(np.max(temps))
    if hi - lo < 1e-9:
        return lo
    return float(brentq(lambda t: float(d_fn(np.array([t]))[0]) - mean, lo, hi, xtol=1e-3))


def fit_on_path(fit, call, path):
    """Fit ``call`` (keyword arguments of the boundary fit) on ``path``; returns the final FitResult."""
    t_shape = float(path.nominal_c)
    quick = {**call, "draws": 10, "noise_refits": 0, "temperature_sd_c": 0.0}
    steps = [t_shape]
    for _ in range(MAX_ITERATIONS):
        r = fit(**{**quick, "temperature_c": t_shape}, _shape_c=t_shape)
        t_new = r.setup.get("path_effective_c")
        if t_new is None or abs(t_new - t_shape) < TOLERANCE_C:
            break
        t_shape = float(t_new)
        steps.append(t_shape)
    final = fit(**{**call, "temperature_c": t_shape}, _shape_c=t_shape)
    note = (f"non-isothermal path: the profile was fitted on the path — its shape modelled at {t_shape:.1f} °C, "
            "the path's effective temperature over the fitted duration (where D equals its mean along the path; "
            f"iterated from the path's start: {', '.join(f'{v:.1f}' for v in steps)} °C) — and the time is the "
            "duration along the path; the single temperature given beside the path plays no part")
    final.warnings = [w for w in final.warnings if not w.startswith("non-isothermal path")] + [note]
    final.setup["path_shape_temperature_c"] = t_shape
    final.setup["path_iterations_c"] = steps
    return final
