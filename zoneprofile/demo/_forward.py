"""Forward model of the demo: true zoning -> diffusion -> what the instruments report.

For each crystal:

1. the true An (mol%) as a function of depth below the rim: zones grown from
   successive melts, each with a little normal zoning, sharp steps between
   them (CaAl–NaSi does not diffuse on these timescales);
2. Mg and Sr diffused from "each zone in equilibrium with its melt" for the
   time since each boundary formed, with
   :func:`zoneprofile.diffusion.simulate_boundary` (An-dependent partitioning
   and diffusivity) at the sample's true temperature; boundaries far apart are
   simulated one at a time and joined halfway between them;
3. the analyses: each spot reports the profile averaged over its footprint
   (Gaussian electron beam, square laser spot), plus analytical noise; a
   mapped crystal is seen along an oblique line, so its profiles are stretched
   by 1/cos ψ.
"""

from __future__ import annotations

import numpy as np

from zoneprofile.demo._story import MELTS

__all__ = ["true_an", "true_trace", "measure", "FINE_UM"]

#: Spacing of the fine grid the truth is computed on (µm).
FINE_UM = 0.25
#: Cells of the diffusion solver per simulated boundary.
N_CELLS = 600


def _zones_from_rim(plan):
    return list(plan["zones"])[::-1]


def true_an(depth_um, plan) -> np.ndarray:
    """True An (mol%) at ``depth_um`` below the rim."""
    d = np.asarray(depth_um, dtype=float)
    zones = _zones_from_rim(plan)
    edges = [0.0, *plan["depths_um"], max(float(plan["length_um"]) * 2.0, float(np.max(d)) + 1.0)]
    an = np.empty_like(d)
    for j, zone in enumerate(zones):
        lo, hi = edges[j], edges[j + 1]
        inside = (d >= lo) & (d < hi) if j < len(zones) - 1 else d >= lo
        if j == len(zones) - 1:
            hi = max(lo + 1.0, float(plan["length_um"]))
        frac = np.clip((d[inside] - lo) / (hi - lo), 0.0, 1.0)
        an[inside] = zone["an_outer"] + (zone["an_inner"] - zone["an_outer"]) * frac
    if plan.get("core_step_um") is not None:
        an = an + np.where(d >= plan["core_step_um"], 7.0, 0.0)
    return an


def _event_of_zone(zone):
    return zone["melt"]


def boundary_events(plan) -> list[str]:
    """Name of the recharge that made each boundary, outermost first."""
    zones = _zones_from_rim(plan)
    return [_event_of_zone(zones[j]) for j in range(len(plan["depths_um"]))]


def true_trace(x_um, plan, *, element, temperature_c, times_days) -> np.ndarray:
    """True concentration (ppm) of ``element`` on the fine grid ``x_um``.

    ``times_days[j]`` is the time since boundary ``j`` (outermost first) formed.
    """
    from zoneprofile.diffusion import simulate_boundary

    x = np.asarray(x_um, dtype=float)
    zones = _zones_from_rim(plan)
    depths = list(plan["depths_um"])
    out = np.empty_like(x)
    for j, depth in enumerate(depths):
        lo = 0.0 if j == 0 else 0.5 * (depths[j - 1] + depth)
        hi = np.inf if j == len(depths) - 1 else 0.5 * (depth + depths[j + 1])
        top = hi if np.isfinite(hi) else np.inf

        def an_j(d, lo=lo, top=top):
            # this boundary alone: outside its segment, An held at the segment's edge values
            return true_an(np.clip(np.asarray(d, dtype=float), lo, top), plan)

        seg = (x >= lo) & (x < hi)
        # simulate only as deep as the segment needs (the grid starts at the rim)
        reach = x <= (hi + 0.25 * (hi - lo) if np.isfinite(hi) else np.inf)
        sim = simulate_boundary(
            x[reach],
            element=element,
            mineral="plagioclase",
            temperature_c=temperature_c,
            time_days=float(times_days[j]),
            boundary_um=float(depth),
            inner=MELTS[zones[j + 1]["melt"]][element],
            outer=MELTS[zones[j]["melt"]][element],
            an=an_j,
            n_cells=N_CELLS,
        )
        out[seg] = np.asarray(sim, dtype=float)[seg[reach]]
    return out


def measure(fine_s_um, fine_values, at_s_um, *, beam_um, shape) -> np.ndarray:
    """Average the fine profile over each spot's footprint (all in the traverse's frame).

    ``gaussian``: ``beam_um`` is the full width at half maximum; ``square``:
    the full width. Spots near the rim see only the crystal (weights renormalised).
    """
    s = np.asarray(fine_s_um, dtype=float)
    v = np.asarray(fine_values, dtype=float)
    out = np.empty(len(at_s_um))
    for k, c in enumerate(np.asarray(at_s_um, dtype=float)):
        if shape == "gaussian":
            sigma = beam_um / (2.0 * np.sqrt(2.0 * np.log(2.0)))
            w = np.exp(-0.5 * ((s - c) / sigma) ** 2)
        else:
            w = (np.abs(s - c) <= beam_um / 2.0).astype(float)
        total = w.sum()
        out[k] = np.dot(w, v) / total if total > 0 else np.interp(c, s, v)
    return out
