"""How a boundary's time reads in titles and tables: a date as a date, a bound as a bound.

An unresolved boundary has no median: the data only bound its time. Its title
and table cells show that bound ("< 2.4 d" for an upper bound, "> 300 d" for a
lower bound), never a median or a "≤ median". See ``docs/report.md``.
"""

from __future__ import annotations

import math

from zoneprofile._units import format_days, format_days_range

__all__ = ["time_statement", "time_title", "time_range_text", "resolved_text"]


def _finite(v):
    try:
        v = float(v)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _statement(td: dict, resolved=True) -> str:
    st = (td or {}).get("statement")
    if st in ("date", "upper_bound", "lower_bound", "none", "interval"):
        return st
    if st == "upper bound":
        return "upper_bound"
    if st == "lower bound":
        return "lower_bound"
    if resolved and _finite((td or {}).get("median")) is not None:
        return "date"
    if _finite((td or {}).get("upper_bound")) is not None:
        return "upper_bound"
    if _finite((td or {}).get("lower_bound")) is not None:
        return "lower_bound"
    return "none"


def time_statement(td: dict, resolved=True) -> str:
    """The time as one short phrase: ``'20 d'``, ``'< 2.4 d'``, ``'> 300 d'`` or ``'not bounded'``."""
    td = td or {}
    st = _statement(td, resolved)
    if st == "upper_bound":
        return f"< {format_days(td.get('upper_bound'))}"
    if st == "lower_bound":
        return f"> {format_days(td.get('lower_bound'))}"
    if st in ("date", "interval") and _finite(td.get("median")) is not None:
        return format_days(td.get("median"))
    return "not bounded"


def time_range_text(td: dict, resolved=True, low="p2_5", high="p97_5") -> str:
    """The interval of a date (``'9.1 – 41 d'``); an em dash for a bound, which has no interval."""
    td = td or {}
    if _statement(td, resolved) not in ("date", "interval"):
        return "—"
    return format_days_range(td.get(low), td.get(high))


def time_title(element: str, position_um: float, td: dict, resolved=True) -> str:
    """Two-line title of a boundary's panel: the time (or bound), then its 95 % interval or the bound's meaning."""
    td = td or {}
    head = f"{element} at {position_um:.0f} µm: {time_statement(td, resolved)}"
    st = _statement(td, resolved)
    if st in ("date", "interval"):
        return f"{head}\n95%: {format_days_range(td.get('p2_5'), td.get('p97_5'))}"
    if st == "upper_bound":
        return f"{head}\nnot resolved: upper bound only"
    if st == "lower_bound":
        return f"{head}\nnot resolved: lower bound only"
    return f"{head}\nnot resolved: the data do not bound the time"


def resolved_text(td: dict, resolved=True) -> str:
    """The "resolved" cell: ``'yes'``, or what the data say instead (upper bound, lower bound, not bounded)."""
    st = _statement(td or {}, resolved)
    if resolved and st in ("date", "interval"):
        return "yes"
    return {"upper_bound": "no: upper bound", "lower_bound": "no: lower bound"}.get(st, "no: not bounded")
