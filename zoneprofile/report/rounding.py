"""The rounding rule shared by the CSV tables and the supplement workbook.

A value is given to the digits its own uncertainty supports; the rule in full
is in :mod:`zoneprofile.report.supplement` and ``docs/report.md``.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pandas as pd

__all__ = ["round_to_sd", "round_sig", "round_bound", "round_table", "SIG_DIGITS_OF_SD"]

#: Significant digits kept of an uncertainty; the value is rounded to the same decimal place.
SIG_DIGITS_OF_SD = 2
#: Significant digits of a measured number that carries no uncertainty in its row.
SIG_DIGITS_PLAIN = 4
#: Decimal places of a position or length (µm) without its own uncertainty.
UM_DECIMALS = 1


def _finite(v) -> bool:
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool) and math.isfinite(v)


def _decimals_of(sd: float, sig: int = SIG_DIGITS_OF_SD) -> int:
    return sig - 1 - math.floor(math.log10(abs(sd)))


def round_sig(value, sig: int = SIG_DIGITS_PLAIN):
    """``value`` to ``sig`` significant digits (non-finite and non-numbers unchanged)."""
    if not _finite(value) or value == 0:
        return value
    return round(float(value), _decimals_of(value, sig))


def round_to_sd(value, sd):
    """``value`` rounded to the decimal place of the second significant digit of ``sd``.

    Without a usable ``sd`` (missing, zero, not finite) the value keeps
    :data:`SIG_DIGITS_PLAIN` significant digits.
    """
    if not _finite(value):
        return value
    if not _finite(sd) or sd <= 0:
        return round_sig(value)
    return round(float(value), _decimals_of(sd))


def round_bound(value, side: str):
    """Round a bound outward to two significant digits: ``side`` ``"upper"`` up, ``"lower"`` down."""
    if not _finite(value) or value == 0:
        return value
    d = _decimals_of(value, SIG_DIGITS_OF_SD)
    v = float(value) * 10.0 ** d
    slack = 1e-9 * abs(v)  # a value already on the grid stays where it is
    out = (math.ceil(v - slack) if side == "upper" else math.floor(v + slack)) / 10.0 ** d
    return round(out, max(d, 0))


def _row_sd(row, prefix: str, suffix: str):
    """Half the 68 % interval (or a quarter of the 95 % interval) of the quantile columns ``prefix…suffix``."""
    lo, hi = row.get(f"{prefix}p16{suffix}"), row.get(f"{prefix}p84{suffix}")
    if _finite(lo) and _finite(hi) and hi > lo:
        return (hi - lo) / 2.0
    lo, hi = row.get(f"{prefix}p2_5{suffix}"), row.get(f"{prefix}p97_5{suffix}")
    if _finite(lo) and _finite(hi) and hi > lo:
        return (hi - lo) / 4.0
    return None


_QUANTILE = re.compile(r"^(?P<prefix>.*?)(?P<q>best|median|mean|p2_5|p16|p84|p97_5)(?P<suffix>_days|)$")
_SD_NAMES = ("sd", "spread_log10", "sd_noise")
_FRACTIONS = ("fraction_negative", "fraction_of_crystals", "probability")


def _round_cell(col: str, value, row):
    """One cell of a table by the module's rule (see the module docstring)."""
    if not _finite(value) or isinstance(value, (int, np.integer)):
        return value
    if col.endswith("upper_bound_days"):
        return round_bound(value, "upper")
    if col.endswith("lower_bound_days"):
        return round_bound(value, "lower")
    if col.endswith(_SD_NAMES) or col.endswith("_sd_c") or col.endswith("_sd_um") or "_sd_" in col:
        return round_sig(value, SIG_DIGITS_OF_SD)
    if col in _FRACTIONS:
        return round(float(value), 3)
    if col == "p_value":
        return round_sig(value, SIG_DIGITS_OF_SD)
    if col == "temperature_c":
        return round_to_sd(value, row.get("temperature_sd_c"))
    if col.startswith("log10_dt_m2"):
        return round_to_sd(value, _row_sd(row, "log10_dt_m2_", ""))
    m = _QUANTILE.match(col)
    if m and m.group("suffix") == "_days":
        return round_to_sd(value, _row_sd(row, m.group("prefix"), "_days"))
    if col == "position_um" and _finite(row.get("position_sd_um")) and row.get("position_sd_um") > 0:
        return round_to_sd(value, row.get("position_sd_um"))
    if _finite(row.get(f"{col}_sd")):  # an analysis with its own sd (An and An_sd)
        return round_to_sd(value, row.get(f"{col}_sd"))
    if col.endswith("_um") and "_per_" not in col:
        return round(float(value), UM_DECIMALS)
    return round_sig(value)


def round_table(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``frame`` with every number rounded by the supplement's rule."""
    out = frame.copy()
    if out.empty:
        return out
    float_cols = [c for c in out.columns if pd.api.types.is_float_dtype(out[c]) or out[c].dtype == object]
    if not float_cols:
        return out
    records = out.to_dict("records")
    for col in float_cols:
        out[col] = [_round_cell(str(col), row[col], row) for row in records]
    return out
