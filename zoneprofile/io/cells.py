"""One cell of a results table: a number, a censored value, missing, or bad.

Three states are kept apart (REFERENCES §2): a number; *censored* (below the
detection limit: ``<0.03``, ``<LOD``, ``bdl``, ``b.d.l.``, ``n.d.``, ``-``, or a
negative number), with the limit when the cell gives it; *missing* (blank,
``n.a.``, ``NaN``: not measured).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

__all__ = ["Cell", "parse_cell", "parse_number"]

_CENSORED_WORDS = {
    "bdl", "b.d.l.", "b.d.l", "bd", "b.d.", "bld", "lod", "<lod", "dl", "<dl", "<d.l.", "<bdl", "nd", "n.d.",
    "n.d", "-", "--", "---", "\u2013", "\u2014", "below detection", "below dl", "not detected", "<mdl", "<lld",
}
_MISSING_WORDS = {"", "na", "n.a.", "n.a", "n/a", "nan", "none", "null", "not analysed", "not analyzed", "#n/a"}
_NUMBER = re.compile(r"^[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?$")


@dataclass(frozen=True)
class Cell:
    """Parsed cell. ``state`` is ``number``, ``censored``, ``missing`` or ``bad``."""

    state: str
    value: float = math.nan
    limit: float | None = None
    text: str = ""


def _number(s: str) -> float | None:
    s = s.replace("\u2212", "-").replace(" ", "")
    if _NUMBER.match(s):
        return float(s)
    return None


def parse_cell(text) -> Cell:
    """Parse one cell's text (decimal commas already turned into points)."""
    s = "" if text is None else str(text).strip()
    low = s.lower()
    if low in _MISSING_WORDS:
        return Cell("missing", text=s)
    if low in _CENSORED_WORDS:
        return Cell("censored", text=s)
    if s.startswith("<") or s.startswith("\u2264"):
        rest = s[1:].strip().lstrip("=").strip()
        x = _number(rest)
        if x is not None and math.isfinite(x) and x >= 0:
            return Cell("censored", limit=x, text=s)
        if rest.lower().replace(" ", "") in {"lod", "dl", "d.l.", "bdl", "mdl", "lld", "detectionlimit", "loq"}:
            return Cell("censored", text=s)
        return Cell("bad", text=s)
    x = _number(s)
    if x is None:
        return Cell("bad", text=s)
    if not math.isfinite(x):
        return Cell("bad", value=x, text=s)
    if x < 0:
        return Cell("censored", value=x, text=s)
    return Cell("number", value=x, text=s)


def parse_number(text) -> float | None:
    """A plain decimal number as written in a table or on the command line, else None.

    Stricter than ``float``: underscores (``7_0.5`` is 70.5 to Python, a typo
    to a petrologist), ``nan``/``inf`` words and hexadecimal are not numbers.
    A Unicode minus is accepted.
    """
    s = "" if text is None else str(text).strip()
    if not s:
        return None
    return _number(s) if "_" not in s else None
