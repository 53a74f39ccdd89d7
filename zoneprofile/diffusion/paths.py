r"""Temperature–time paths: when the magma did not sit at one temperature.

The fitted quantity is ``τ = ∫ D_ref(T(t)) dt``. For a constant temperature
``t = τ / D_ref(T)``; along a path the duration is the ``t`` that solves

.. math:: \int_0^{t} D_{ref}(T(s))\,ds = \tau ,

found on a fine time grid by cumulative trapezoidal integration and
interpolation. A path starts at the time the boundary formed (t = 0).

``LinearCooling(start_c, rate_c_per_day, floor_c=None)``
    ``T(t) = start − rate·t`` (held at ``floor_c`` once reached, if given).
``TablePath(time_days, temperature_c)``
    Piecewise linear through the rows; held at the last temperature after the
    last row (the result says so when that happens).

Temperature draws shift the whole path by ``δT`` (the uncertainty of the
path's level, not of its shape).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from zoneprofile._validation import InputError

__all__ = ["LinearCooling", "TablePath", "durations_days"]

from zoneprofile._units import SECONDS_PER_DAY as _SECONDS_PER_DAY  # noqa: E402


@dataclass(frozen=True)
class LinearCooling:
    """``T(t) = start_c − rate_c_per_day · t``, optionally floored at ``floor_c``."""

    start_c: float
    rate_c_per_day: float
    floor_c: float | None = None

    def __post_init__(self):
        if not np.isfinite(self.start_c) or not np.isfinite(self.rate_c_per_day) or self.rate_c_per_day < 0:
            raise InputError("linear cooling needs a finite start temperature and a cooling rate >= 0 °C/day")

    def temperature_c(self, time_days):
        t = self.start_c - self.rate_c_per_day * np.asarray(time_days, float)
        if self.floor_c is not None:
            t = np.maximum(t, self.floor_c)
        return t

    def horizon_days(self, span_c=400.0):
        """Time after which D has fallen so far that nothing more happens."""
        if self.rate_c_per_day == 0 or self.floor_c is not None:
            return None
        return span_c / self.rate_c_per_day

    @property
    def nominal_c(self):
        return self.start_c

    def to_dict(self):
        return {"kind": "linear-cooling", "start_c": self.start_c,
                "rate_c_per_day": self.rate_c_per_day, "floor_c": self.floor_c}


@dataclass(frozen=True)
class TablePath:
    """Piecewise-linear temperature through ``(time_days, temperature_c)`` rows."""

    time_days: tuple
    temperature_c: tuple

    def __post_init__(self):
        t = np.asarray(self.time_days, float)
        T = np.asarray(self.temperature_c, float)
        if t.ndim != 1 or t.size < 2 or t.size != T.size:
            raise InputError("a temperature path table needs at least two rows of time_days and temperature_c")
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(T))):
            raise InputError("a temperature path table holds a non-finite value")
        if t[0] != 0 or np.any(np.diff(t) <= 0):
            raise InputError("path times must start at 0 (the boundary forming) and increase")
        if np.any(T <= 0) or np.any(T > 1600):
            raise InputError("path temperatures must lie between 0 and 1600 °C")
        object.__setattr__(self, "time_days", tuple(t))
        object.__setattr__(self, "temperature_c", tuple(T))

    def temperature_c_at(self, time_days):
        return np.interp(time_days, self.time_days, self.temperature_c)

    temperature_c_fn = temperature_c_at

    def horizon_days(self, span_c=400.0):
        return None

    @property
    def nominal_c(self):
        return self.temperature_c[0]

    def to_dict(self):
        return {"kind": "table", "time_days": list(self.time_days), "temperature_c": list(self.temperature_c)}


def _temperature(path, t):
    if isinstance(path, TablePath):
        return path.temperature_c_at(t)
    return path.temperature_c(t)


def durations_days(path, d_ref_fn, tau_m2, *, shift_c=0.0, n_time=4000):
    """Durations (days) whose integrated ``D_ref`` along ``path`` equals ``tau_m2``.

    Parameters
    ----------
    path : LinearCooling or TablePath
    d_ref_fn : callable
        ``d_ref_fn(temperature_c, draw_index_array) -> D (m²/s)``, broadcasting
        over (draws, times); the second argument lets law-parameter draws follow
        their row.
    tau_m2 : array_like, shape (k,)
        Integrated D·t for each draw.
    shift_c : array_like, shape (k,) or float
        Temperature offset of each draw.

    Returns
    -------
    durations : ndarray (k,)
        ``inf`` where the path never accumulates ``tau_m2`` (cooling stops
        diffusion first).
    notes : list of str
    """
    tau = np.atleast_1d(np.asarray(tau_m2, float))
    shift = np.broadcast_to(np.asarray(shift_c, float), tau.shape)
    notes = []
    horizon = path.horizon_days()
    if isinstance(path, TablePath):
        end = path.time_days[-1]
    else:
        end = horizon
    rows = np.arange(tau.size)
    # a time axis long enough: start from the table end / cooling horizon, and
    # for a held temperature extend until every draw is reached
    if end is None:
        d0 = d_ref_fn(np.full(tau.size, path.nominal_c) + shift, rows)
        end = float(np.max(tau / d0) / _SECONDS_PER_DAY) * 1.05
    out = np.full(tau.size, np.inf)
    todo = np.ones(tau.size, bool)
    t_axis = np.concatenate([[0.0], np.geomspace(end * 1e-7, end, n_time)])
    temps = _temperature(path, t_axis)
    d = d_ref_fn(temps[None, :] + shift[:, None], rows[:, None])
    cum = np.concatenate(
        [np.zeros((tau.size, 1)), np.cumsum(0.5 * (d[:, 1:] + d[:, :-1]) * np.diff(t_axis)[None, :], axis=1)],
        axis=1,
    ) * _SECONDS_PER_DAY
    reached = cum[:, -1] >= tau
    for k in np.flatnonzero(reached & todo):
        out[k] = np.interp(tau[k], cum[k], t_axis)
    todo &= ~reached
    if np.any(todo):
        if isinstance(path, TablePath):
            # hold the last temperature beyond the table
            d_last = d_ref_fn(np.full(tau.size, path.temperature_c[-1]) + shift, rows)
            extra = (tau[todo] - cum[todo, -1]) / d_last[todo] / _SECONDS_PER_DAY
            out[todo] = end + extra
            notes.append(
                f"{int(todo.sum())} of {tau.size} draws needed more time than the path table covers; "
                f"the last temperature ({path.temperature_c[-1]:g} °C) was held beyond {end:g} days"
            )
        elif path.floor_c is not None:
            d_last = d_ref_fn(np.full(tau.size, path.floor_c) + shift, rows)
            extra = (tau[todo] - cum[todo, -1]) / d_last[todo] / _SECONDS_PER_DAY
            out[todo] = end + extra
        else:
            notes.append(
                f"{int(todo.sum())} of {tau.size} draws cannot be reached: cooling at "
                f"{path.rate_c_per_day:g} °C/day stops diffusion before the fitted D·t accumulates"
            )
    return out, notes
