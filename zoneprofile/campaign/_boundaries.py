"""Which boundaries of a crystal to date, and which points each fit sees."""

from __future__ import annotations

import numpy as np

from zoneprofile.minerals.registry import REGISTRY as MINERAL_TABLE

__all__ = ["MATCH_UM", "match_position", "select_boundaries", "segment_of", "position_window"]

#: A step found by zoning and a boundary listed by hand, or seen on a map, are
#: the same boundary when closer than this (µm), or than twice the step's
#: position uncertainty when that is larger.
MATCH_UM = 4.0


def match_position(position, candidates, *, sd=None):
    """Index of the candidate position nearest ``position`` within the match distance."""
    if not candidates:
        return None
    tol = max(MATCH_UM, 2.0 * sd) if sd else MATCH_UM
    d = [abs(c - position) for c in candidates]
    k = int(np.argmin(d))
    return k if d[k] <= tol else None


#: Minerals without a melt-equivalent fingerprint: a reverse step (Fo or Mg# rising toward the rim,
#: a more mafic melt; Ti in quartz rising toward the rim, a hotter melt) is taken as recharge-like.
_REVERSE_IS_RECHARGE = tuple(m.name for m in MINERAL_TABLE if m.reverse_is_recharge)  # zoneprofile/minerals/registry.py


def _is_recharge(step: dict, mineral: str) -> bool:
    if step["recharge"] == "recharge-like":
        return True
    return (mineral in _REVERSE_IS_RECHARGE and step["recharge"] is None
            and step["kind"] == "reverse")


def select_boundaries(zones: dict, choice, mineral: str = "plagioclase") -> tuple[list[dict], list[str]]:
    """Boundaries to date: [{position_um, kind, recharge, position_sd_um}], and warnings."""
    steps = list(zones["steps"])
    warnings = []
    if choice == "recharge":
        chosen = [s for s in steps if _is_recharge(s, mineral)]
        if not chosen:
            warnings.append("no recharge-like boundary found by the zoning analysis; nothing dated "
                            "(list positions with boundaries = [...] to date others)")
    elif choice == "all":
        chosen = steps
        if not chosen:
            warnings.append("no zoning step found; nothing dated")
    else:
        chosen = []
        positions = [float(s["position_um"]) for s in steps]
        for x in choice:
            k = match_position(float(x), positions)
            if k is None:
                chosen.append({"position_um": float(x), "kind": "given", "recharge": None, "position_sd_um": None,
                               "change": None})
                warnings.append(f"boundary at {float(x):g} µm matches no step of the zoning analysis; "
                                "dated at the given position")
            else:
                entry = dict(steps[k])
                entry["position_um"] = float(x)
                entry["zoning_position_um"] = positions[k]
                chosen.append(entry)
    out = []
    for s in chosen:
        out.append({
            "position_um": float(s["position_um"]),
            "kind": s["kind"],
            "recharge": s["recharge"],
            "position_sd_um": s["position_sd_um"],
            "change": s["change"],
        })
    out.sort(key=lambda b: b["position_um"])
    return out, warnings


def segment_of(position, others):
    """Points taking part in a fit: halfway to the neighbouring boundaries (µm), None = open end."""
    lower = [o for o in others if o < position - 1e-9]
    upper = [o for o in others if o > position + 1e-9]
    lo = 0.5 * (max(lower) + position) if lower else None
    hi = 0.5 * (min(upper) + position) if upper else None
    return lo, hi


def position_window(boundary, default):
    """Half-width (µm) within which the fit may refine the boundary's position."""
    if default is not None:
        return float(default)
    sd = boundary["position_sd_um"]
    sd = float(sd) if sd is not None and np.isfinite(sd) else 0.0
    return max(3.0, 2.0 * sd)
