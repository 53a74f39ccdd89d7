"""Oxygen-fugacity buffers, for laws that need fO2 (Fe–Mg in olivine).

Notes
-----
Frost (1991) form, with T in K and P in bar::

    log10 fO2 [bar] = A / T + B + C · (P − 1) / T

converted to Pa (+5 log units). Constants FROM MEMORY (Frost B.R. 1991,
Introduction to oxygen fugacity and its petrologic importance, Reviews in
Mineralogy 25:1–9):

======  =========  =======  =====  ================
buffer  A          B        C      stated T range
======  =========  =======  =====  ================
QFM     −25096.3   8.735    0.110  573–1200 °C
NNO     −24930     9.36     0.046  600–1200 °C
IW      −27489     6.702    0.055  565–1200 °C
======  =========  =======  =====  ================

A user who knows "ΔQFM = +1" gets fO2 in Pa with
``fo2_buffer_pa("QFM", temperature_c, delta_log=1)``.
"""

from __future__ import annotations

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.laws._base import _as_float_array

__all__ = ["BUFFERS", "fo2_buffer_pa", "log10_fo2_buffer_pa"]

#: name -> (A, B, C) of log10 fO2[bar] = A/T + B + C(P−1)/T, FROM MEMORY (Frost 1991)
BUFFERS = {
    "QFM": (-25096.3, 8.735, 0.110),
    "NNO": (-24930.0, 9.36, 0.046),
    "IW": (-27489.0, 6.702, 0.055),
}
_ALIASES = {"FMQ": "QFM"}


def log10_fo2_buffer_pa(buffer, temperature_c, *, pressure_pa=1e5, delta_log=0.0) -> np.ndarray:
    """log10 of the buffer's fO2 in Pa, plus ``delta_log`` (e.g. +1 for ΔQFM = +1)."""
    key = str(buffer).strip().upper()
    key = _ALIASES.get(key, key)
    if key not in BUFFERS:
        message = f"unknown oxygen buffer '{buffer}'; use one of {', '.join(BUFFERS)}"
        raise InputError(message)
    t = _as_float_array(temperature_c, "temperature_c")
    if np.any(t <= -273.15):
        raise InputError("temperature_c must be above absolute zero (-273.15 °C)")
    p = _as_float_array(pressure_pa, "pressure_pa")
    if np.any(p <= 0):
        raise InputError("pressure_pa must be > 0 Pa")
    d = _as_float_array(delta_log, "delta_log")
    a, b, c = BUFFERS[key]
    t_k = t + 273.15
    p_bar = p / 1e5
    return a / t_k + b + c * (p_bar - 1.0) / t_k + 5.0 + d


def fo2_buffer_pa(buffer, temperature_c, *, pressure_pa=1e5, delta_log=0.0) -> np.ndarray:
    """Oxygen fugacity (Pa) of ``buffer`` ('QFM', 'NNO', 'IW') shifted by ``delta_log``."""
    return np.power(10.0, log10_fo2_buffer_pa(buffer, temperature_c, pressure_pa=pressure_pa, delta_log=delta_log))
