"""Pyroxene on 6 oxygens: Fe3+ by Droop (1987), Wo-En-Fs, Mg#.

Fe3+ follows Droop (1987, Mineral. Mag. 51:431, doi:10.1180/minmag.1987.051.361.10):
with all Fe as Fe2+, cations S per X = 6 O; F = 2X(1 - T/S) with T = 4; if
F > 0 the cations are scaled to T and F of the iron becomes Fe3+.

Wo-En-Fs after Morimoto (1988, Mineral. Mag. 52:535): Wo = Ca, En = Mg,
Fs = Fe2+ + Fe3+ + Mn, normalised to their sum (from memory of the paper's
figure caption; the docs say so). Mg# = 100 Mg / (Mg + Fe_total), with all
iron, so it does not depend on the Droop estimate.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError
from zoneprofile.minerals._formula import cations_on_oxygen
from zoneprofile.minerals._qc import check_window
from zoneprofile.minerals.feldspar import _to_wt

__all__ = ["recalculate", "pyroxene_oxides", "droop_fe3", "OXYGENS", "DEFAULT_QC", "REQUIRED"]

OXYGENS = 6
INDICES = ("Wo", "En", "Fs", "Mg_number")
REQUIRED = ("SiO2", "MgO", "FeO", "CaO")
CATIONS = ("Si", "Ti", "Al", "Cr", "Fe3", "Fe2", "Mn", "Mg", "Ni", "Ca", "Na", "K")

DEFAULT_QC = {
    "total_wt": (98.5, 101.5),
    # cations per 6 O with all Fe as Fe2+: 4 for a stoichiometric pyroxene, up to
    # ~4.1 when Fe3+ is present (common practice)
    "cations_fe2": (3.97, 4.10),
    "si": (1.60, 2.03),
}


def droop_fe3(cation_sum, fe_total, *, oxygens: float = 6, cations: float = 4) -> tuple[np.ndarray, np.ndarray]:
    """Droop (1987) Fe3+ and the cation scale factor.

    Parameters
    ----------
    cation_sum : array
        S, cations per ``oxygens`` O with all Fe as Fe2+.
    fe_total : array
        Fe per ``oxygens`` O (all as Fe2+).

    Returns
    -------
    fe3 : array
        Fe3+ per ``cations`` cations, clipped to [0, scaled Fe total].
    scale : array
        Factor T/S applied to every cation where F > 0, else 1.

    Notes
    -----
    :math:`F = 2X(1 - T/S)` (Droop 1987, eq. 8).
    """
    s = np.asarray(cation_sum, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = 2 * oxygens * (1 - cations / s)
        scale = np.where(f > 0, cations / s, 1.0)
    fe_scaled = np.asarray(fe_total, dtype=float) * scale
    fe3 = np.clip(np.where(f > 0, f, 0.0), 0, fe_scaled)
    return fe3, scale


def recalculate(oxides: pd.DataFrame, *, qc: dict):
    """Pyroxene formula on 6 O with Droop Fe3+, Wo-En-Fs (mol%) and Mg#.

    Notes
    -----
    :math:`Wo = 100\\,Ca/\\Sigma`, :math:`En = 100\\,Mg/\\Sigma`,
    :math:`Fs = 100\\,(Fe^{2+} + Fe^{3+} + Mn)/\\Sigma` with
    :math:`\\Sigma = Ca + Mg + Fe^{2+} + Fe^{3+} + Mn` (Morimoto 1988).
    """
    cat = cations_on_oxygen(oxides, OXYGENS, iron="FeO")
    n = len(oxides)
    s = cat["cation_sum"].to_numpy()
    fe = cat["Fe2"].to_numpy() if "Fe2" in cat else np.zeros(n)
    fe3, scale = droop_fe3(s, fe)
    out = pd.DataFrame(index=oxides.index)
    get = {}
    for c in CATIONS:
        if c in ("Fe2", "Fe3"):
            continue
        if c in cat:
            get[c] = cat[c].to_numpy() * scale
            out[c] = get[c]
        else:
            get[c] = np.zeros(n)
    get["Fe3"] = fe3
    get["Fe2"] = fe * scale - fe3
    out["Fe3"], out["Fe2"] = get["Fe3"], get["Fe2"]
    out = out[[c for c in CATIONS if c in out]]
    out["cation_sum"] = s * scale
    out["cation_sum_fe2"] = s
    fs_sum = get["Fe2"] + get["Fe3"] + get["Mn"]
    denom = get["Ca"] + get["Mg"] + fs_sum
    fe_all = get["Fe2"] + get["Fe3"]
    with np.errstate(divide="ignore", invalid="ignore"):
        out["Wo"] = np.where(denom > 0, 100 * get["Ca"] / denom, np.nan)
        out["En"] = np.where(denom > 0, 100 * get["Mg"] / denom, np.nan)
        out["Fs"] = np.where(denom > 0, 100 * fs_sum / denom, np.nan)
        out["Mg_number"] = np.where(get["Mg"] + fe_all > 0, 100 * get["Mg"] / (get["Mg"] + fe_all), np.nan)
    reasons: list[list[str]] = [[] for _ in range(n)]
    check_window(reasons, s, qc["cations_fe2"], "cations (all Fe2+)")
    check_window(reasons, get["Si"], qc["si"], "Si")
    not_px = np.isfinite(s) & ((np.abs(s - 4) > 0.4) | (get["Si"] < 1.4) | (get["Si"] > 2.3))
    for i in np.flatnonzero(not_px):
        reasons[i].append("not pyroxene?")
    out["species"] = _species(out["Wo"].to_numpy(), out["En"].to_numpy(), out["Fs"].to_numpy(), get)
    return out, reasons


def _species(wo, en, fs, get) -> np.ndarray:
    """Broad Ca-Mg-Fe pyroxene names (common practice, Morimoto 1988 fields)."""
    names = np.empty(wo.shape, dtype=object)
    na = get["Na"]
    for i in range(len(wo)):
        if not np.isfinite(wo[i]):
            names[i] = ""
        elif na[i] > 0.2:
            names[i] = "Na pyroxene"
        elif wo[i] >= 45:
            names[i] = "diopside/hedenbergite"
        elif wo[i] >= 20:
            names[i] = "augite"
        elif wo[i] >= 5:
            names[i] = "pigeonite"
        else:
            names[i] = "enstatite" if en[i] >= fs[i] else "ferrosilite"
    return names


def pyroxene_oxides(wo, en, fs) -> pd.DataFrame:
    """Oxide wt% of a stoichiometric Ca-Mg-Fe2+ pyroxene (Wo, En, Fs in mol%).

    Built from Ca2Si2O6, Mg2Si2O6 and Fe2Si2O6 in the given proportions
    (normalised to their sum).
    """
    wo, en, fs = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (wo, en, fs))
    wo, en, fs = np.broadcast_arrays(wo, en, fs)
    total = wo + en + fs
    if np.any(~np.isfinite(total)) or np.any(wo < 0) or np.any(en < 0) or np.any(fs < 0) or np.any(total <= 0):
        raise InputError("Wo, En, Fs must be finite, >= 0, with a positive sum")
    x_wo, x_en, x_fs = wo / total, en / total, fs / total
    return _to_wt({"SiO2": 2 * np.ones_like(x_wo), "FeO": 2 * x_fs, "MgO": 2 * x_en, "CaO": 2 * x_wo})
