"""Olivine on 4 oxygens: Fo and stoichiometry QC.

All iron is Fe2+. Fo = 100 Mg / (Mg + Fe2+) (option: Mn in the denominator).
QC windows from common practice (REFERENCES §2): Si 1.00 +- 0.02, cations
3.00 +- 0.02.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError
from zoneprofile.minerals._formula import cations_on_oxygen
from zoneprofile.minerals._qc import check_window
from zoneprofile.minerals.feldspar import _to_wt

__all__ = ["recalculate", "olivine_oxides", "OXYGENS", "DEFAULT_QC", "REQUIRED"]

OXYGENS = 4
INDICES = ("Fo",)
REQUIRED = ("SiO2", "MgO", "FeO")
CATIONS = ("Si", "Ti", "Al", "Cr", "Fe2", "Mn", "Mg", "Ni", "Ca")

DEFAULT_QC = {
    "total_wt": (98.5, 101.5),
    "si": (0.98, 1.02),
    "cations": (2.98, 3.02),
}


def recalculate(oxides: pd.DataFrame, *, qc: dict, fo_with_mn: bool = False):
    """Olivine formula on 4 O and Fo (mol%).

    Notes
    -----
    :math:`Fo = 100\\,Mg/(Mg + Fe^{2+}\\,[+ Mn])`; species: forsterite-fayalite
    series named ``olivine`` (Fo >= 50 "forsteritic", below "fayalitic").
    """
    cat = cations_on_oxygen(oxides, OXYGENS, iron="FeO")
    n = len(oxides)
    get = {c: (cat[c].to_numpy() if c in cat else np.zeros(n)) for c in CATIONS}
    denom = get["Mg"] + get["Fe2"] + (get["Mn"] if fo_with_mn else 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fo = np.where(denom > 0, 100 * get["Mg"] / denom, np.nan)
    total_cat = cat["cation_sum"].to_numpy()
    reasons: list[list[str]] = [[] for _ in range(n)]
    check_window(reasons, get["Si"], qc["si"], "Si")
    check_window(reasons, total_cat, qc["cations"], "cations")
    not_ol = np.isfinite(total_cat) & ((np.abs(get["Si"] - 1) > 0.15) | (np.abs(total_cat - 3) > 0.15) | (get["Ca"] + get["Al"] > 0.2))
    for i in np.flatnonzero(not_ol):
        reasons[i].append("not olivine?")
    out = pd.DataFrame(index=oxides.index)
    for c in CATIONS:
        if c in cat:
            out[c] = cat[c].to_numpy()
    out["cation_sum"] = total_cat
    out["Fo"] = fo
    out["species"] = np.where(np.isfinite(fo), np.where(fo >= 50, "olivine (forsteritic)", "olivine (fayalitic)"), "")
    return out, reasons


def olivine_oxides(fo) -> pd.DataFrame:
    """Oxide wt% of stoichiometric olivine (Mg,Fe)2SiO4 with Fo in mol%."""
    fo = np.atleast_1d(np.asarray(fo, dtype=float))
    if np.any(~np.isfinite(fo)) or np.any(fo < 0) or np.any(fo > 100):
        raise InputError("Fo must be finite mol% between 0 and 100")
    x = fo / 100
    return _to_wt({"SiO2": np.ones_like(x), "FeO": 2 * (1 - x), "MgO": 2 * x})
