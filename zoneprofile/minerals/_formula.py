"""Oxide wt% -> cations per formula unit on a fixed number of oxygens."""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile.minerals.atomic import FEO_TO_FE2O3, OXIDES

__all__ = ["cations_on_oxygen", "total_feo", "oxide_total"]


def total_feo(oxides: pd.DataFrame) -> np.ndarray:
    """All iron as FeO (wt%): ``FeO + Fe2O3 / 1.11135``; NaN counts as 0."""
    feo = np.zeros(len(oxides))
    if "FeO" in oxides:
        feo = feo + np.nan_to_num(oxides["FeO"].to_numpy(dtype=float))
    if "Fe2O3" in oxides:
        feo = feo + np.nan_to_num(oxides["Fe2O3"].to_numpy(dtype=float)) / FEO_TO_FE2O3
    return feo


def oxide_total(oxides: pd.DataFrame) -> np.ndarray:
    """Sum of the canonical oxide columns present (wt%); NaN counts as 0."""
    cols = [c for c in oxides.columns if c in OXIDES]
    if not cols:
        return np.zeros(len(oxides))
    return np.nansum(oxides[cols].to_numpy(dtype=float), axis=1)


def cations_on_oxygen(oxides: pd.DataFrame, n_oxygen: float, *, iron: str = "FeO") -> pd.DataFrame:
    """Cations per formula unit normalised to ``n_oxygen`` oxygens.

    Parameters
    ----------
    oxides : DataFrame
        Oxide wt% with canonical column names; NaN counts as 0 (the caller
        decides beforehand which gaps are acceptable).
    n_oxygen : float
        Oxygens per formula unit (8 feldspar, 4 olivine, 6 pyroxene).
    iron : {"FeO", "Fe2O3"}
        How total iron enters the oxygen sum: as Fe2+ (column ``Fe2``) or as
        Fe3+ (column ``Fe3``).

    Returns
    -------
    DataFrame
        One column per cation present (``Si``, ``Ti``, ``Al``, ``Fe2`` or
        ``Fe3``, ``Mg``, ...) and ``cation_sum``. Rows without any oxide are NaN.

    Notes
    -----
    For oxide :math:`i` with wt% :math:`w_i`, molar mass :math:`M_i`,
    :math:`c_i` cations and :math:`o_i` oxygens per formula,

    .. math:: n_i = \\frac{w_i c_i}{M_i} \\cdot \\frac{N_O}{\\sum_j w_j o_j / M_j}.
    """
    work = {}
    for name in oxides.columns:
        if name in OXIDES and name not in ("FeO", "Fe2O3"):
            work[name] = np.nan_to_num(oxides[name].to_numpy(dtype=float))
    if "FeO" in oxides or "Fe2O3" in oxides:
        feo = total_feo(oxides)
        if iron == "FeO":
            work["FeO"] = feo
        elif iron == "Fe2O3":
            work["Fe2O3"] = feo * FEO_TO_FE2O3
        else:  # pragma: no cover - internal misuse
            raise ValueError(f"iron must be 'FeO' or 'Fe2O3', got {iron!r}")
    order = [name for name in OXIDES if name in work]
    n = len(oxides)
    oxygen = np.zeros(n)
    moles = {}
    for name in order:
        ox = OXIDES[name]
        mol = work[name] / ox.molar_mass
        moles[name] = mol * ox.cations
        oxygen = oxygen + mol * ox.oxygens
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(oxygen > 0, n_oxygen / oxygen, np.nan)
    out = pd.DataFrame(index=oxides.index)
    for name in order:
        out[OXIDES[name].cation] = moles[name] * factor
    out["cation_sum"] = out.sum(axis=1, min_count=1) if order else np.nan
    out.loc[~np.isfinite(factor), "cation_sum"] = np.nan
    return out
