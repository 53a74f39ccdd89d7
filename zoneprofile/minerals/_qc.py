"""Shared QC helpers: window checks and the ``qc=`` override dictionary."""

from __future__ import annotations

import math

import numpy as np

from zoneprofile._validation import InputError

__all__ = ["merge_qc", "check_window", "fmt_window"]


def merge_qc(defaults: dict, qc: dict | None, *, mineral: str) -> dict:
    """Defaults updated with the user's ``qc`` overrides, each checked.

    A window is a pair ``(low, high)`` with low < high; a limit is one number.
    """
    out = dict(defaults)
    for key, value in (qc or {}).items():
        if key not in defaults:
            message = f"unknown QC setting '{key}' for {mineral}; known: {', '.join(sorted(defaults))}"
            raise InputError(message)
        if isinstance(defaults[key], tuple):
            try:
                low, high = (float(v) for v in value)
            except (TypeError, ValueError):
                message = f"QC window '{key}' needs two numbers LOW,HIGH"
                raise InputError(message, text=value) from None
            if not (math.isfinite(low) and math.isfinite(high) and low < high):
                message = f"QC window '{key}' needs finite LOW < HIGH, got {low:g},{high:g}"
                raise InputError(message)
            out[key] = (low, high)
        else:
            try:
                limit = float(value)
            except (TypeError, ValueError):
                message = f"QC limit '{key}' needs one number"
                raise InputError(message, text=value) from None
            if not math.isfinite(limit):
                message = f"QC limit '{key}' must be finite"
                raise InputError(message, text=value)
            out[key] = limit
    return out


def fmt_window(window, digits: int = 2) -> str:
    low, high = window
    return f"{low:.{digits}f}-{high:.{digits}f}"


def check_window(reasons: list[list[str]], values, window, label: str, *, digits: int = 2) -> np.ndarray:
    """Append ``"<label> <value> outside <low>-<high>"`` to the rows outside ``window``.

    NaN values are not judged here (a missing input is reported elsewhere).
    Returns the boolean mask of failing rows.
    """
    v = np.asarray(values, dtype=float)
    low, high = window
    bad = np.isfinite(v) & ((v < low) | (v > high))
    for i in np.flatnonzero(bad):
        reasons[i].append(f"{label} {v[i]:.{digits}f} outside {fmt_window(window, digits)}")
    return bad
