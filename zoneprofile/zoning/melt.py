"""Melt equivalents of trace elements in plagioclase, recharge fingerprints, mixing.

The concentration of a trace element in the melt a plagioclase zone grew from
is ``C_melt = C_plag / K(X_An, T)`` with ``RT ln K = A·X_An + B`` (Bindeman,
Davis & Drake 1998, Geochim. Cosmochim. Acta 62:1175,
doi:10.1016/S0016-7037(98)00047-7). The partition coefficients come from the
project's single partition module (:mod:`zoneprofile.diffusion.partition`).
Because K depends on An, a rise of a trace element in the crystal can be An
alone; the melt equivalent removes that and shows whether the *melt* changed.

A step where An rises toward the rim and the melt's Mg, Sr or Fe rises too is
``recharge-like`` (a new, hotter, less evolved melt arrived); a rise of An with
no significant change of the melt is ``heating-like`` (heating, or
decompression/water addition, changed An without a new melt). Iron has no
partition model here: plagioclase FeO is used as a proxy of melt Fe (K_Fe
depends little on An; common practice), and the output says so.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError

__all__ = [
    "MELT_ELEMENTS",
    "melt_equivalents",
    "mixing_fraction",
    "recharge_fingerprint",
]

#: elements with a plagioclase–melt partition model, and oxide → element factors
#: (element mass fraction of the oxide, from CIAAW 2021 weights via docs/references.md §1)
MELT_ELEMENTS = {"Mg": ("MgO", 24.305 / 40.304), "Sr": ("SrO", 87.62 / 103.619), "Ba": ("BaO", 137.327 / 153.326)}

#: changes of the melt that mark a recharge (Fe via plagioclase FeO as a proxy)
RECHARGE_COLUMNS = ("melt_Mg_ppm", "melt_Sr_ppm", "FeO", "Fe_ppm")


def _trace_ppm(extra: pd.DataFrame, element: str):
    col = f"{element}_ppm"
    if col in extra:
        return np.asarray(extra[col], dtype=float), col
    oxide, factor = MELT_ELEMENTS[element]
    if oxide in extra:
        return np.asarray(extra[oxide], dtype=float) * 1e4 * factor, oxide
    return None, None


def melt_equivalents(an, extra, temperature_c, *, model="bindeman1998"):
    """Melt-equivalent concentrations (ppm) of Mg, Sr, Ba for each point.

    Parameters
    ----------
    an : array_like
        An (mol%) of each point.
    extra : DataFrame
        Columns ``Mg_ppm``, ``Sr_ppm``, ``Ba_ppm`` (or the oxides ``MgO``,
        ``SrO``, ``BaO`` in wt%, converted with the element fraction of the
        oxide); others are ignored.
    temperature_c : float
        Crystallisation temperature (°C).
    model : str
        Partition model id of :mod:`zoneprofile.diffusion.partition`.

    Returns
    -------
    melt : DataFrame
        ``melt_<El>_ppm`` columns (one per element found), aligned with ``an``.
    notes : list of str
        Where each element came from and range warnings of the model.
    """
    from zoneprofile.diffusion.partition import partition_coefficient, partition_range_warnings

    x_an = np.asarray(an, dtype=float) / 100.0
    out = pd.DataFrame(index=range(x_an.size))
    notes: list[str] = []
    if extra is None:
        return out, notes
    for element in MELT_ELEMENTS:
        conc, source = _trace_ppm(extra, element)
        if conc is None:
            continue
        k = partition_coefficient(element, np.clip(x_an, 0.0, 1.0), temperature_c, model=model)
        out[f"melt_{element}_ppm"] = conc / k
        if source != f"{element}_ppm":
            notes.append(f"melt {element} from {source} (wt%) converted to ppm")
        for w in partition_range_warnings(element, np.clip(x_an, 0.0, 1.0), temperature_c, model=model):
            if w not in notes:
                notes.append(w)
    return out, notes


def mixing_fraction(melt, endmembers):
    """Fraction of the second end-member melt at each point, by the lever rule.

    Parameters
    ----------
    melt : DataFrame
        Melt-equivalent columns (``melt_Sr_ppm`` ...) or raw columns named in
        ``endmembers``.
    endmembers : dict
        ``{'Sr_ppm': (low, high), ...}``: each element's concentration in the
        two end-member melts (first, second). Keys may name ``Sr_ppm`` or
        ``melt_Sr_ppm``.

    Returns
    -------
    fraction, misfit : ndarray
        ``fraction`` 0 at the first end-member, 1 at the second; ``misfit`` the
        root-mean-square distance from the tie line in the same units (0 for a
        single element). NaN where no element is available.

    Notes
    -----
    With one element the lever rule is ``f = (c − c₁)/(c₂ − c₁)``. With several,
    each is put on the same scale ``u_i = (c_i − c₁ᵢ)/(c₂ᵢ − c₁ᵢ)`` and ``f`` is
    the least-squares point on the tie line, the mean of the ``u_i``.
    """
    us = []
    for key, pair in endmembers.items():
        try:
            low, high = (float(v) for v in pair)
        except (TypeError, ValueError):
            message = f"end-member melts for '{key}' must be two numbers (first, second)"
            raise InputError(message, text=pair) from None
        if not (np.isfinite(low) and np.isfinite(high)) or low == high:
            message = f"end-member melts for '{key}' must be two different finite numbers"
            raise InputError(message, text=pair)
        name = key if key.startswith("melt_") else f"melt_{key}"
        col = name if name in melt else (key if key in melt else None)
        if col is None:
            message = f"end-member element '{key}' has no melt-equivalent column; give its *_ppm column and a temperature"
            raise InputError(message)
        us.append((np.asarray(melt[col], dtype=float) - low) / (high - low))
    if not us:
        return np.array([]), np.array([])
    u = np.vstack(us)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(u)
        count = ok.sum(axis=0)
        f = np.where(count > 0, np.nansum(np.where(ok, u, 0.0), axis=0) / np.maximum(count, 1), np.nan)
        misfit = np.where(count > 0, np.sqrt(np.nansum(np.where(ok, (u - f) ** 2, 0.0), axis=0) / np.maximum(count, 1)),
                          np.nan)
    return f, misfit


def recharge_fingerprint(an_change, melt_changes, *, z_min=3.0):
    """Classify a step from the change of An and of the melt across it.

    Parameters
    ----------
    an_change : float
        Rim-side minus core-side An (positive = An rises toward the rim).
    melt_changes : dict
        ``{column: (change, se)}`` of melt-equivalent (or proxy) columns across
        the step, rim side minus core side.
    z_min : float
        A change counts when ``|change|/se ≥ z_min`` (common practice: 3 sigma).

    Returns
    -------
    str or None
        ``"recharge-like"`` (An and melt Mg/Sr/Fe rise), ``"heating-like"`` (An
        rises, the melt does not change), ``"unclear"`` (An rises, the melt
        changes otherwise), None for a normal step or without melt data.
    """
    if not melt_changes or not np.isfinite(an_change) or an_change <= 0:
        return None
    usable = {k: v for k, v in melt_changes.items() if np.isfinite(v[0]) and np.isfinite(v[1]) and v[1] > 0}
    if not usable:
        return None
    rising = [k for k, (c, se) in usable.items() if k in RECHARGE_COLUMNS and c > 0 and c / se >= z_min]
    changed = [k for k, (c, se) in usable.items() if abs(c) / se >= z_min]
    if rising:
        return "recharge-like"
    if not changed:
        return "heating-like"
    return "unclear"
