"""Feldspar species per point and species changes (mantles) across boundaries.

Names follow the usual feldspar classification (docs/references.md §2, common
practice): plagioclase by An (mol%) albite 0–10, oligoclase 10–30, andesine
30–50, labradorite 50–70, bytownite 70–90, anorthite 90–100; alkali feldspar
when Or is high: sanidine for Or ≥ 37 mol%, anorthoclase for Or 10–37 mol% with
An < 20 mol%. Plagioclase and alkali feldspar are the two feldspar *series*;
a boundary across which the series changes is a mantle.
"""

from __future__ import annotations

from collections import Counter

import numpy as np

__all__ = ["feldspar_species", "feldspar_series", "dominant_species", "species_change"]

_PLAGIOCLASE = (
    (10.0, "albite"),
    (30.0, "oligoclase"),
    (50.0, "andesine"),
    (70.0, "labradorite"),
    (90.0, "bytownite"),
    (np.inf, "anorthite"),
)
_ALKALI = ("sanidine", "anorthoclase")

#: Or (mol%) at and above which a feldspar is called sanidine (common practice)
OR_SANIDINE = 37.0
#: Or (mol%) at and above which a low-An feldspar is called anorthoclase (common practice)
OR_ANORTHOCLASE = 10.0
#: An (mol%) below which a feldspar with Or ≥ 10 is alkali feldspar (common practice)
AN_ALKALI_MAX = 20.0


def _one(an: float, or_: float) -> str | None:
    if not np.isfinite(an):
        return None
    or_ = 0.0 if not np.isfinite(or_) else or_
    if or_ >= OR_SANIDINE:
        return "sanidine"
    if or_ >= OR_ANORTHOCLASE and an < AN_ALKALI_MAX:
        return "anorthoclase"
    for upper, name in _PLAGIOCLASE:
        if an < upper or upper == np.inf:
            return name
    return None  # pragma: no cover - the loop always returns


def feldspar_species(an, or_=None) -> list:
    """Feldspar species name for each point from An and Or (mol%).

    Parameters
    ----------
    an : array_like
        An (mol%).
    or_ : array_like, optional
        Or (mol%); taken as 0 when absent (plagioclase names only).

    Returns
    -------
    list of str or None
        One name per point (None where An is missing).

    Examples
    --------
    >>> feldspar_species([5, 45, 65, 95])
    ['albite', 'andesine', 'labradorite', 'anorthite']
    >>> feldspar_species([3, 2], [45, 20])
    ['sanidine', 'anorthoclase']
    """
    a = np.atleast_1d(np.asarray(an, dtype=float))
    o = np.zeros_like(a) if or_ is None else np.atleast_1d(np.asarray(or_, dtype=float))
    return [_one(float(p), float(q)) for p, q in zip(a, o)]


def feldspar_series(name) -> str | None:
    """'alkali feldspar' or 'plagioclase' for a species name (None if unknown)."""
    if name is None:
        return None
    if name in _ALKALI:
        return "alkali feldspar"
    if name in {n for _, n in _PLAGIOCLASE}:
        return "plagioclase"
    return None


def dominant_species(names) -> str | None:
    """The most frequent non-missing name (ties go to the first seen)."""
    kept = [n for n in names if isinstance(n, str) and n]
    if not kept:
        return None
    return Counter(kept).most_common(1)[0][0]


def species_change(inner_names, outer_names) -> dict | None:
    """Describe a change of species between the zone inside and the zone outside a boundary.

    Returns None when both sides carry the same dominant species (or one side
    has none); otherwise ``{inner_species, outer_species, mantle}`` where
    ``mantle`` is True when the feldspar series changes (alkali feldspar core
    mantled by plagioclase, or the reverse).
    """
    inner = dominant_species(inner_names)
    outer = dominant_species(outer_names)
    if inner is None or outer is None or inner == outer:
        return None
    return {
        "inner_species": inner,
        "outer_species": outer,
        "mantle": feldspar_series(inner) != feldspar_series(outer),
    }
