"""Resorption (dissolution) surfaces seen along a 1-D profile, with their evidence.

In one dimension a resorption surface shows as an abrupt *reverse* step: An
(or Fo) rises toward the rim by more than ordinary growth fluctuations, over a
distance no wider than the analytical resolution, because the crystal was
partly dissolved and then overgrown from a hotter or less evolved melt. The
thresholds are decisions of the project (see docs/methods/resorption.md):
An +6 mol% (Fo +3 mol%; other columns 10 noise sd) over at most
``max(5 µm, 2.5 × the local point spacing)``. Each surface lists its evidence
using every column present (oxides, trace elements, melt equivalents), except
columns that only restate the profiled quantity (Ab, CaO, Na2O, SiO2, Al2O3
for An; MgO, FeO, SiO2 for Fo), which stay in each step's ``columns``; 2-D
evidence from element maps (truncated inner zones) is merged by position.
"""

from __future__ import annotations

import numpy as np

__all__ = ["find_resorption_surfaces", "RESORPTION_MIN_CHANGE", "format_change", "unit_of"]

#: smallest rise toward the rim that marks a resorption surface, by column (decision, see docs)
RESORPTION_MIN_CHANGE = {"An": 6.0, "Fo": 3.0}
#: widest 10–90 % width (µm) of a resorption surface, unless the spacing is coarser
RESORPTION_MAX_WIDTH_UM = 5.0

#: columns that only restate the profiled quantity (stoichiometry), kept out of the evidence text
RESTATES = {"An": {"Ab", "CaO", "Na2O", "SiO2", "Al2O3"}, "Ab": {"An", "CaO", "Na2O", "SiO2", "Al2O3"},
            "Fo": {"MgO", "FeO", "SiO2"}}

_MOL = {"An", "Ab", "Or", "Fo", "Wo", "En", "Fs", "Mg_number"}
_OXIDES = {"SiO2", "TiO2", "Al2O3", "Fe2O3", "FeO", "MnO", "MgO", "CaO", "SrO", "BaO", "Na2O", "K2O", "P2O5",
           "Cr2O3", "NiO", "total_wt"}


def unit_of(column: str) -> str:
    """Unit suffix shown after a change of ``column`` ('' when the name carries it)."""
    if column in _MOL:
        return " mol%"
    if column in _OXIDES:
        return " wt%"
    return ""


def format_change(column: str, change: float) -> str:
    """``'FeO +0.21 wt%'``, ``'Mg_ppm +180'``, ``'An +15.2 mol%'``."""
    return f"{column} {change:+.3g}{unit_of(column)}"


def find_resorption_surfaces(
    steps,
    column,
    noise_sd,
    local_gaps,
    *,
    min_change=None,
    max_width_um=None,
    column_changes=None,
    boundary_evidence=None,
    match_um=3.0,
):
    """Pick the steps that are resorption surfaces and list their evidence.

    Parameters
    ----------
    steps : list of Step
        Detected steps (distance from rim).
    column : str
        The profiled quantity (``An``, ``Fo``, ...).
    noise_sd : float
        Noise of the profiled quantity.
    local_gaps : list of float
        Point spacing at each step (µm).
    min_change : float, optional
        Smallest rise toward the rim (default from :data:`RESORPTION_MIN_CHANGE`
        or 10 noise sd).
    max_width_um : float, optional
        Widest step (default ``max(5 µm, 2.5 × local gap)``).
    column_changes : list of dict, optional
        Per step, ``{column: (change, se)}`` of the other columns across it.
    boundary_evidence : list of dict, optional
        ``[{position_um, evidence: [str]}]`` from maps, merged by position
        (within ``max(match_um, 2 × position sd)``); evidence at a place
        without a step makes a surface of its own (``source: "map"``).

    Returns
    -------
    list of dict
        ``{position_um, position_sd_um, change, width_um, evidence[], source, step_index}``.
    """
    threshold = RESORPTION_MIN_CHANGE.get(column, 10.0 * noise_sd) if min_change is None else float(min_change)
    surfaces = []
    for i, step in enumerate(steps):
        widest = max(RESORPTION_MAX_WIDTH_UM, 2.5 * local_gaps[i]) if max_width_um is None else float(max_width_um)
        if not (step.change >= threshold and step.width_um <= widest):
            continue
        over = (f"over < {local_gaps[i]:.1f} µm" if not step.width_resolved
                else f"over {step.width_um:.1f} µm")
        evidence = [f"{format_change(column, step.change)} {over}"]
        for col, (change, se) in (column_changes[i] if column_changes else {}).items():
            if col in RESTATES.get(column, ()):
                continue
            if np.isfinite(change) and np.isfinite(se) and se > 0 and abs(change) / se >= 3.0:
                evidence.append(format_change(col, change))
        surfaces.append({"position_um": step.position_um, "position_sd_um": step.position_sd_um,
                         "change": step.change, "width_um": step.width_um, "evidence": evidence,
                         "source": "profile", "step_index": i})
    for item in boundary_evidence or ():
        pos = float(item["position_um"])
        texts = [f"map: {e}" for e in item.get("evidence", [])]
        near = [s for s in surfaces if abs(s["position_um"] - pos) <= max(match_um, 2 * s["position_sd_um"])]
        if near:
            near[0]["evidence"].extend(texts)
            near[0]["source"] = "profile+map"
            continue
        j = next((j for j, st in enumerate(steps)
                  if abs(st.position_um - pos) <= max(match_um, 2 * st.position_sd_um)), None)
        if j is not None:
            st = steps[j]
            evidence = [f"{format_change(column, st.change)} (step below the 1-D threshold)", *texts]
            surfaces.append({"position_um": st.position_um, "position_sd_um": st.position_sd_um,
                             "change": st.change, "width_um": st.width_um, "evidence": evidence,
                             "source": "profile+map", "step_index": j})
        else:
            surfaces.append({"position_um": pos, "position_sd_um": float("nan"), "change": float("nan"),
                             "width_um": float("nan"), "evidence": texts, "source": "map", "step_index": None})
    return sorted(surfaces, key=lambda s: s["position_um"])
