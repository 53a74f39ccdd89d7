"""One way to write a time for people: a value or a range in one unit chosen by magnitude.

Times are kept in days everywhere in the results; this module only writes them. The unit is
hours below one day, days up to three years and years (Julian, 365.25 d) beyond, so a petrologist
reads "18 h", "42.5 d" or "7.3 yr" rather than a fraction or a five-digit count. A range is written
in the one unit its larger end calls for ("0.5 – 3.2 d", never "12 h – 3.2 d"), so the two ends can
be compared at a glance. Three significant figures below 100, whole numbers from 100 up (the
uncertainty of a diffusion time is far larger than either rounding).
"""

from __future__ import annotations

import math

__all__ = ["DAYS_PER_YEAR", "SECONDS_PER_DAY", "days_unit", "format_days", "format_days_range"]

#: the Julian year (IAU), in days
DAYS_PER_YEAR = 365.25
#: seconds in a day (SI); diffusivities are in m²/s, times in days
SECONDS_PER_DAY = 86400.0
_YEARS_FROM_DAYS = 3 * DAYS_PER_YEAR


def _finite(x) -> float | None:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def days_unit(days) -> tuple[str, float]:
    """``(unit, factor)`` for a time of ``days`` (value in that unit = days · factor)."""
    d = _finite(days)
    a = abs(d) if d is not None else 1.0
    if a < 1.0:
        return "h", 24.0
    if a < _YEARS_FROM_DAYS:
        return "d", 1.0
    return "yr", 1.0 / DAYS_PER_YEAR


def _number(v: float) -> str:
    if v == 0:
        return "0"
    if 100 <= abs(v) < 1e5:
        return f"{v:.0f}"
    return f"{v:.3g}"


def format_days(days, unit: str | None = None) -> str:
    """``'42.5 d'``; ``'n/a'`` for None, NaN or infinity. ``unit`` ('h', 'd', 'yr') forces the unit."""
    d = _finite(days)
    if d is None:
        return "n/a"
    name, factor = days_unit(d) if unit is None else (unit, _FACTORS[unit])
    return f"{_number(d * factor)} {name}"


def format_days_range(low, high) -> str:
    """``'12.0 – 40.1 d'``: both ends in the unit the larger one calls for; 'n/a' for a missing end."""
    lo, hi = _finite(low), _finite(high)
    ends = [abs(v) for v in (lo, hi) if v is not None]
    if not ends:
        return "n/a"
    name, factor = days_unit(max(ends))
    text = [_number(v * factor) if v is not None else "n/a" for v in (lo, hi)]
    return f"{text[0]} – {text[1]} {name}"


_FACTORS = {"h": 24.0, "d": 1.0, "yr": 1.0 / DAYS_PER_YEAR}
