"""Feldspar on 8 oxygens: An, Ab, Or, species, stoichiometry QC.

Total iron is taken as Fe3+ on the tetrahedral site (common practice for
feldspar; An does not depend on it). T = Si + Al + Fe3+ (+ Ti), M = Ca + Na +
K + Ba + Sr. Defaults of the QC windows follow common practice (REFERENCES §2).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError
from zoneprofile.minerals._formula import cations_on_oxygen
from zoneprofile.minerals._qc import check_window
from zoneprofile.minerals.atomic import OXIDES

__all__ = ["recalculate", "feldspar_oxides", "feldspar_species", "OXYGENS", "DEFAULT_QC"]

OXYGENS = 8
INDICES = ("An", "Ab", "Or")
CATIONS = ("Si", "Ti", "Al", "Fe3", "Mg", "Mn", "Ca", "Sr", "Ba", "Na", "K")

#: QC defaults; windows are (low, high), limits one number. Common practice.
DEFAULT_QC = {
    "total_wt": (98.5, 101.5),
    "cations": (4.95, 5.05),
    "t_site": (3.95, 4.05),
    "m_site": (0.95, 1.05),
    # |Al - (1 + X_An)| for plagioclase: charge balance of the Ca-Al / Na-Si couple
    "al_vs_an": 0.10,
    # Mg + Fe + Mn (pfu) above which the analysis is probably not feldspar
    "max_mafic": 0.20,
    # An (mol%) above which a point is not alkali feldspar; Or above which not plagioclase
    "max_an_alkali": 20.0,
    "max_or_plagioclase": 15.0,
}

REQUIRED = {
    "plagioclase": ("SiO2", "Al2O3", "CaO", "Na2O"),
    "alkali-feldspar": ("SiO2", "Al2O3", "Na2O", "K2O"),
}

_PLAG_NAMES = ((10, "albite"), (30, "oligoclase"), (50, "andesine"), (70, "labradorite"), (90, "bytownite"))


def feldspar_species(an, ab, or_) -> np.ndarray:
    """Species names from An, Ab, Or (mol%).

    Plagioclase (Or < 10) by An: albite < 10 <= oligoclase < 30 <= andesine
    < 50 <= labradorite < 70 <= bytownite < 90 <= anorthite. Alkali feldspars:
    Or >= 37 sanidine/orthoclase, 10 <= Or < 37 with An < 20 anorthoclase;
    other Or 10-37 points are called ternary feldspar (common practice,
    REFERENCES §2).
    """
    an = np.atleast_1d(np.asarray(an, dtype=float))
    or_ = np.atleast_1d(np.asarray(or_, dtype=float))
    names = np.empty(an.shape, dtype=object)
    for i, (a, o) in enumerate(zip(an, or_)):
        if not (np.isfinite(a) and np.isfinite(o)):
            names[i] = ""
        elif o >= 37:
            names[i] = "sanidine/orthoclase"
        elif o >= 10:
            names[i] = "anorthoclase" if a < 20 else "ternary feldspar"
        else:
            names[i] = next((n for lim, n in _PLAG_NAMES if a < lim), "anorthite")
    return names


def recalculate(oxides: pd.DataFrame, *, variety: str = "plagioclase", qc: dict, with_ba_sr: bool = False):
    """Feldspar formula on 8 O and end-member fractions.

    Parameters
    ----------
    oxides : DataFrame
        Canonical oxide wt%; NaN in a required oxide means "not measured" and
        the point gets no composition.
    variety : {"plagioclase", "alkali-feldspar"}
        Selects the required oxides and the composition check.
    qc : dict
        Windows (see :data:`DEFAULT_QC`), already merged with user overrides.
    with_ba_sr : bool
        Add Ba and Sr to the An/Ab/Or denominator (then An + Ab + Or < 100 by
        the celsian and Sr-feldspar fractions).

    Returns
    -------
    (DataFrame, list of list of str)
        Cation and index columns, and QC reasons per row.

    Notes
    -----
    :math:`X_{An} = Ca / (Ca + Na + K\\,[+ Ba + Sr])`, likewise Ab (Na) and
    Or (K); T = Si + Al + Fe3+ + Ti, M = Ca + Na + K + Ba + Sr.
    """
    cat = cations_on_oxygen(oxides, OXYGENS, iron="Fe2O3")
    n = len(oxides)
    get = {c: (cat[c].to_numpy() if c in cat else np.zeros(n)) for c in CATIONS}
    denom = get["Ca"] + get["Na"] + get["K"]
    if with_ba_sr:
        denom = denom + get["Ba"] + get["Sr"]
    with np.errstate(divide="ignore", invalid="ignore"):
        an = np.where(denom > 0, 100 * get["Ca"] / denom, np.nan)
        ab = np.where(denom > 0, 100 * get["Na"] / denom, np.nan)
        or_ = np.where(denom > 0, 100 * get["K"] / denom, np.nan)
    t_site = get["Si"] + get["Al"] + get["Fe3"] + get["Ti"]
    m_site = get["Ca"] + get["Na"] + get["K"] + get["Ba"] + get["Sr"]
    mafic = get["Mg"] + get["Mn"] + get["Fe3"]
    total_cat = cat["cation_sum"].to_numpy()

    reasons: list[list[str]] = [[] for _ in range(n)]
    check_window(reasons, t_site, qc["t_site"], "T-site")
    check_window(reasons, m_site, qc["m_site"], "M-site")
    check_window(reasons, total_cat, qc["cations"], "cations")
    if variety == "plagioclase":
        misfit = get["Al"] - (1 + an / 100)
        bad = np.isfinite(misfit) & (np.abs(misfit) > qc["al_vs_an"])
        for i in np.flatnonzero(bad):
            reasons[i].append(f"Al {get['Al'][i]:.2f} vs 1+X_An {1 + an[i] / 100:.2f}")
    not_fsp = (
        np.isfinite(t_site)
        & ((np.abs(t_site - 4) > 0.25) | (np.abs(m_site - 1) > 0.3) | (mafic > qc["max_mafic"]))
    )
    for i in np.flatnonzero(not_fsp):
        reasons[i].append("not feldspar?")
    if variety == "plagioclase":
        bad = np.isfinite(or_) & (or_ > qc["max_or_plagioclase"]) & ~not_fsp
        for i in np.flatnonzero(bad):
            reasons[i].append(f"not plagioclase? Or {or_[i]:.1f}")
    else:
        bad = np.isfinite(an) & (an > qc["max_an_alkali"]) & ~not_fsp
        for i in np.flatnonzero(bad):
            reasons[i].append(f"not alkali feldspar? An {an[i]:.1f}")

    out = pd.DataFrame(index=oxides.index)
    for c in CATIONS:
        if c in cat:
            out[c] = cat[c].to_numpy()
    out["cation_sum"] = total_cat
    out["T_site"] = t_site
    out["M_site"] = m_site
    out["An"], out["Ab"], out["Or"] = an, ab, or_
    out["species"] = feldspar_species(an, ab, or_)
    return out, reasons


def feldspar_oxides(an, or_=0.0) -> pd.DataFrame:
    """Oxide wt% of stoichiometric feldspar with An and Or in mol% (rest Ab).

    Arrays broadcast. Built from the atomic-weight table: CaAl2Si2O8,
    NaAlSi3O8 and KAlSi3O8 in the given molar proportions.
    """
    an, or_ = np.broadcast_arrays(np.asarray(an, dtype=float), np.asarray(or_, dtype=float))
    an = np.atleast_1d(an).astype(float)
    or_ = np.atleast_1d(or_).astype(float)
    if np.any(~np.isfinite(an)) or np.any(~np.isfinite(or_)) or np.any(an < 0) or np.any(or_ < 0) or np.any(an + or_ > 100 + 1e-9):
        message = "An and Or must be finite mol% with An, Or >= 0 and An + Or <= 100"
        raise InputError(message)
    x_an, x_or = an / 100, or_ / 100
    x_ab = 1 - x_an - x_or
    moles = {  # moles of oxide per mole of feldspar
        "SiO2": 2 * x_an + 3 * x_ab + 3 * x_or,
        "Al2O3": x_an + 0.5 * x_ab + 0.5 * x_or,
        "CaO": x_an,
        "Na2O": 0.5 * x_ab,
        "K2O": 0.5 * x_or,
    }
    return _to_wt(moles)


def _to_wt(moles: dict) -> pd.DataFrame:
    mass = {k: v * OXIDES[k].molar_mass for k, v in moles.items()}
    total = sum(mass.values())
    return pd.DataFrame({k: 100 * v / total for k, v in mass.items()})
