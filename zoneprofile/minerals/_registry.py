"""The explicit registry of minerals and the common recalculation entry point."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import partial
from typing import Callable

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError, require_choice
from zoneprofile.minerals import feldspar, olivine, pyroxene
from zoneprofile.minerals._formula import oxide_total, total_feo
from zoneprofile.minerals._qc import merge_qc
from zoneprofile.minerals.registry import BY_NAME

__all__ = ["Mineral", "MINERALS", "get_mineral", "recalculate"]


@dataclass(frozen=True)
class Mineral:
    """What the recalculation needs to know about one mineral.

    ``compute(oxides, qc=..., **options)`` returns (DataFrame of cations and
    indices, list of QC reasons per row).
    """

    name: str
    oxygens: int
    required: tuple[str, ...]
    default_qc: dict
    compute: Callable
    indices: tuple[str, ...]
    main_index: str
    options: dict = field(default_factory=dict)
    convention: str = ""  # one line for reports: how iron and the indices are counted


def _facts(name: str):
    """Name and main index of ``name`` from the one mineral table."""
    m = BY_NAME[name]
    return m.name, m.zoning_column


#: the recalculation recipe of each mineral; its name and main index come
#: from :mod:`zoneprofile.minerals.registry`
MINERALS: dict[str, Mineral] = {
    "plagioclase": Mineral(
        _facts("plagioclase")[0], feldspar.OXYGENS, feldspar.REQUIRED["plagioclase"], feldspar.DEFAULT_QC,
        partial(feldspar.recalculate, variety="plagioclase"), feldspar.INDICES, _facts("plagioclase")[1],
        {"with_ba_sr": False},
        "feldspar on 8 O, all Fe as Fe3+; An = Ca/(Ca+Na+K)",
    ),
    "alkali-feldspar": Mineral(
        _facts("alkali-feldspar")[0], feldspar.OXYGENS, feldspar.REQUIRED["alkali-feldspar"], feldspar.DEFAULT_QC,
        partial(feldspar.recalculate, variety="alkali-feldspar"), feldspar.INDICES, _facts("alkali-feldspar")[1],
        {"with_ba_sr": False},
        "feldspar on 8 O, all Fe as Fe3+; Or = K/(Ca+Na+K)",
    ),
    "olivine": Mineral(
        _facts("olivine")[0], olivine.OXYGENS, olivine.REQUIRED, olivine.DEFAULT_QC, olivine.recalculate, olivine.INDICES,
        _facts("olivine")[1],
        {"fo_with_mn": False},
        "olivine on 4 O, all Fe as Fe2+; Fo = Mg/(Mg+Fe2+)",
    ),
    "pyroxene": Mineral(
        _facts("pyroxene")[0], pyroxene.OXYGENS, pyroxene.REQUIRED, pyroxene.DEFAULT_QC, pyroxene.recalculate, pyroxene.INDICES,
        _facts("pyroxene")[1],
        {},
        "pyroxene on 6 O, Fe3+ by Droop (1987); Wo-En-Fs after Morimoto (1988) with Fs = Fe2+ + Fe3+ + Mn; "
        "Mg# = Mg/(Mg+Fe total)",
    ),
}


def get_mineral(name: str) -> Mineral:
    """The registry entry for ``name`` (case-insensitive); InputError if unknown."""
    key = require_choice(name, "mineral", MINERALS)
    return MINERALS[key]


def recalculate(oxides: pd.DataFrame, mineral: str = "plagioclase", *, qc: dict | None = None, **options) -> pd.DataFrame:
    """Recalculate oxide analyses to a mineral formula, indices and QC.

    Parameters
    ----------
    oxides : DataFrame
        Oxide wt% with canonical names (``SiO2``, ``Al2O3``, ``FeO`` = total
        iron, ...), one row per analysis. NaN means "not measured": in an oxide
        the mineral needs (``Mineral.required``) it leaves the point without a
        composition and flags it; elsewhere it counts as 0. Below-detection
        values must already be replaced by the caller's policy.
    mineral : str
        A key of :data:`MINERALS`.
    qc : dict, optional
        Overrides of the mineral's QC windows, e.g. ``{"total_wt": (98, 102)}``.
    **options
        Mineral options: ``with_ba_sr`` (feldspar), ``fo_with_mn`` (olivine).

    Returns
    -------
    DataFrame
        ``total_wt`` (sum of the oxides), cation columns (pfu), indices
        (``An``/``Ab``/``Or``, ``Fo`` or ``Wo``/``En``/``Fs``/``Mg_number``),
        ``species`` and ``qc`` (``ok`` or reasons joined by ``"; "``).
    """
    m = get_mineral(mineral)
    unknown = set(options) - set(m.options)
    if unknown:
        message = f"unknown option(s) {', '.join(sorted(unknown))} for {m.name}; known: {', '.join(m.options) or 'none'}"
        raise InputError(message)
    have = set(oxides.columns)
    if "FeO" in m.required and "Fe2O3" in have:
        have.add("FeO")
    missing_cols = [o for o in m.required if o not in have]
    if missing_cols:
        message = (
            f"{m.name} recalculation needs the oxides {', '.join(m.required)}; "
            f"missing: {', '.join(missing_cols)}"
        )
        raise InputError(message)
    limits = merge_qc(m.default_qc, qc, mineral=m.name)
    frame = oxides.copy()
    n = len(frame)
    gaps = np.zeros(n, dtype=bool)
    gap_reasons: list[list[str]] = [[] for _ in range(n)]
    for o in m.required:
        if o == "FeO":
            vals = np.full(n, np.nan)
            for c in ("FeO", "Fe2O3"):
                if c in frame:
                    vals = np.where(np.isfinite(vals), vals, frame[c].to_numpy(dtype=float))
        else:
            vals = frame[o].to_numpy(dtype=float)
        miss = ~np.isfinite(vals)
        gaps |= miss
        for i in np.flatnonzero(miss):
            gap_reasons[i].append(f"{o} missing")
    if "FeO" in frame or "Fe2O3" in frame:
        feo = total_feo(frame)
        frame = frame.drop(columns=[c for c in ("FeO", "Fe2O3") if c in frame])
        frame["FeO"] = feo
    total = oxide_total(oxides)
    body, reasons = m.compute(frame, qc=limits, **options)
    low, high = limits["total_wt"]
    for i, t in enumerate(total):
        if t < low:
            reasons[i].insert(0, f"total {t:.2f} < {low:g}")
        elif t > high:
            reasons[i].insert(0, f"total {t:.2f} > {high:g}")
    for i in np.flatnonzero(gaps):
        reasons[i] = gap_reasons[i]  # a composition from incomplete oxides is not judged
    numeric = [c for c in body.columns if c != "species"]
    body.loc[gaps, numeric] = np.nan
    body.loc[gaps, "species"] = ""
    out = pd.DataFrame({"total_wt": total}, index=oxides.index)
    out = pd.concat([out, body], axis=1)
    out["qc"] = ["; ".join(r) if r else "ok" for r in reasons]
    return out
