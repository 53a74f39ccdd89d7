"""Input validation shared by every stage.

All user-facing input problems raise :class:`InputError`. The command line turns
it into one plain line on stderr and exit code 2. Messages name the argument or
file, and where they apply the row and column, show what was expected and what
was found, and suggest a fix.

Row numbers are the line numbers a user sees when opening the file in a text
editor or spreadsheet (1-based, the header line included).
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Iterable

import numpy as np

__all__ = [
    "InputError",
    "require_file",
    "require_finite",
    "require_positive",
    "require_in_range",
    "require_choice",
]


class InputError(ValueError):
    """Bad user input: a file, an argument or a value that cannot be used.

    Parameters
    ----------
    message : str
        What is wrong and, where possible, how to fix it.
    path : str or Path, optional
        The file the problem is in.
    row : int, optional
        1-based line number as seen in a text editor or spreadsheet.
    column : str, optional
        Column name (as written in the file) or argument name.
    text : str, optional
        The offending text, shown quoted.
    """

    def __init__(self, message, *, path=None, row=None, column=None, text=None):
        self.message = message
        self.path = None if path is None else str(path)
        self.row = row
        self.column = column
        self.text = text
        super().__init__(self._render())

    def _render(self) -> str:
        where = []
        if self.path is not None:
            where.append(self.path)
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        head = ", ".join(where)
        msg = self.message
        if self.text is not None:
            shown = str(self.text)
            if len(shown) > 40:
                shown = shown[:37] + "..."
            msg = f"{msg} (found '{shown}')"
        msg = " ".join(msg.split())  # always one line
        return f"{head}: {msg}" if head else msg


def require_file(path, *, what="input file") -> Path:
    """Return ``path`` as a Path if it is an existing, readable, non-empty file."""
    p = Path(path)
    if not p.exists():
        message = f"{what} not found; check the path"
        raise InputError(message, path=p)
    if p.is_dir():
        message = f"{what} is a folder, expected a file"
        raise InputError(message, path=p)
    if not os.access(p, os.R_OK):
        message = f"{what} is not readable; check its permissions"
        raise InputError(message, path=p)
    if p.stat().st_size == 0:
        message = f"{what} is empty"
        raise InputError(message, path=p)
    return p


def require_finite(value, name: str) -> float:
    """Return ``value`` as a float, refusing NaN, inf and non-numbers."""
    if isinstance(value, str) and "_" in value:  # float('1_0') is 10: a typo, not a number
        message = f"{name} must be a number"
        raise InputError(message, text=value)
    try:
        x = float(value)
    except (TypeError, ValueError, OverflowError):
        message = f"{name} must be a number"
        raise InputError(message, text=value) from None
    if not math.isfinite(x):
        message = f"{name} must be a finite number"
        raise InputError(message, text=value)
    return x


def require_positive(value, name: str, *, allow_zero: bool = False) -> float:
    """Return ``value`` as a finite float > 0 (or >= 0 with ``allow_zero``)."""
    x = require_finite(value, name)
    if x < 0 or (x == 0 and not allow_zero):
        bound = ">= 0" if allow_zero else "> 0"
        message = f"{name} must be {bound}, got {x:g}"
        raise InputError(message)
    return x


def require_in_range(value, name: str, low: float, high: float, *, unit: str = "") -> float:
    """Return ``value`` as a float inside the closed interval [low, high]."""
    x = require_finite(value, name)
    if not low <= x <= high:
        u = f" {unit}" if unit else ""
        message = f"{name} must lie between {low:g} and {high:g}{u}, got {x:g}{u}"
        raise InputError(message)
    return x


def require_choice(value: str, name: str, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices`` (case-insensitive)."""
    options = list(choices)
    lowered = {c.lower(): c for c in options}
    key = str(value).strip().lower()
    if key not in lowered:
        message = f"unknown {name} '{value}'; choose one of: {', '.join(options)}"
        raise InputError(message)
    return lowered[key]


def require_array(values, name: str, *, min_size: int = 1) -> np.ndarray:
    """Return a 1-D float array with only finite values and at least ``min_size`` items."""
    a = np.asarray(values, dtype=float)
    if a.ndim != 1:
        message = f"{name} must be one-dimensional, got shape {a.shape}"
        raise InputError(message)
    if a.size < min_size:
        message = f"{name} needs at least {min_size} values, got {a.size}"
        raise InputError(message)
    if not np.all(np.isfinite(a)):
        bad = int(np.flatnonzero(~np.isfinite(a))[0])
        message = f"{name} holds a non-finite value at index {bad}"
        raise InputError(message)
    return a
