"""Pitfall warnings of a single-boundary fit, in plain words, each once, each with its fix.

Added to :attr:`FitResult.warnings` at the end of
:func:`zoneprofile.diffusion.fit_boundary`, so the CLI, FIT.json, campaigns and
the report carry the same sentences:

- **Pressure not given** for a law that depends on it (an activation
  volume): the value used (the law's reference, 0.1 MPa) is named, with how
  much the time would change at 200 MPa (a mid-crustal reservoir, common
  practice as an example) and how to set it.
- **fO2 outside the law's calibrated range**: the range warning of the law is
  completed with what it means for the time (the law is extrapolated, the
  interval does not contain that extrapolation, the direction of the bias is
  unknown) and what to do.
- **Section obliquity unknown**: the stated default distribution widens the
  interval; a measured angle narrows it.

Growth vs diffusion (two elements dating one boundary) is compared where two
elements meet: :func:`element_disagreement` for separate fits, the crystal
model's concordance for ``fit --crystal``.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["CONCORDANCE_REASONS", "SAME_BOUNDARY_UM", "add_pitfall_warnings", "element_disagreement"]

#: example pressure for the size of the pressure effect (MPa; a mid-crustal reservoir, common practice)
EXAMPLE_PRESSURE_MPA = 200.0

#: two positions date the same boundary when closer than this (µm): the campaign's match distance
#: (zoneprofile/campaign/_boundaries.py MATCH_UM; tests/diffusion/test_fit_pitfalls.py keeps them equal)
SAME_BOUNDARY_UM = 4.0

#: why two elements of one boundary can give different times (the crystal model's concordance uses these too)
CONCORDANCE_REASONS = [
    "temperature: the two laws have different activation energies, so a storage temperature off the assumed "
    "value moves their ages apart",
    "non-instant growth: a zone that grew over a time comparable to its age makes the faster-diffusing "
    "element look older",
    "law: one of the diffusion laws may not hold for this composition or temperature (check its calibrated range)",
    "partitioning: the An dependence of partitioning (or the zone's equilibrium with its melt) may be wrong "
    "for one of the elements",
]


def _growth_reasons() -> str:
    return ("the usual reasons: " + "; ".join(CONCORDANCE_REASONS)
            + "; fix: check the temperature and each law's calibrated range, and state which element's time is "
              "reported and why (fit --crystal fits both with shared ages and reports their concordance)")


def _depends_on_pressure(law) -> float | None:
    """Activation volume (cm³/mol) when the law depends on pressure, else None."""
    for key, value in (getattr(law, "parameters", None) or {}).items():
        if "activation_volume" in str(key):
            v = value[0] if isinstance(value, (tuple, list)) else value
            try:
                v = float(v)
            except (TypeError, ValueError):
                continue
            if v != 0.0:
                return v
    return None


def _pressure_note(law, pressure_mpa, temperature_c, composition) -> str | None:
    if pressure_mpa is not None or "pressure_pa" in (composition or {}):
        return None
    v = _depends_on_pressure(law)
    if v is None:
        return None
    comp = {k: val for k, val in (composition or {}).items() if k != "pressure_pa"}
    try:
        d0 = float(law.d_m2_s(temperature_c, pressure_pa=1e5, **comp))
        d1 = float(law.d_m2_s(temperature_c, pressure_pa=EXAMPLE_PRESSURE_MPA * 1e6, **comp))
        factor = d0 / d1
    except Exception:  # noqa: BLE001 - the sentence still holds without the figure
        factor = math.nan
    size = (f"; at {EXAMPLE_PRESSURE_MPA:g} MPa the time would be {factor:.2f}× this one" if np.isfinite(factor)
            else "")
    return (f"pressure not given: {law.id} depends on pressure (activation volume {v:g} cm³/mol) and "
            f"0.1 MPa (1 bar) was used{size}; give the storage pressure with --pressure-mpa P "
            "(campaign key pressure_mpa)")


_FO2_MEANING = (
    " — the law is extrapolated beyond the fO2 it was calibrated at, so the time is less certain than its "
    "interval says (the interval does not include the extrapolation) and the direction of the bias is unknown; "
    "fix: give --fo2-pa within {lo}–{hi} Pa if the melt's fO2 is known to lie there, otherwise accept and "
    "report the time as extrapolated"
)

_OBLIQUITY_MEANING = (
    " — this widens the interval and, since an oblique cut only lengthens an apparent profile, moves the "
    "median time shorter; a measured angle narrows it: give --obliquity-deg (and --dip-deg) from an element "
    "map or EBSD (campaign key obliquity_deg)"
)


def add_pitfall_warnings(result, *, law, pressure_mpa=None, temperature_c=None, composition=None) -> None:
    """Complete ``result.warnings`` in place (see the module text); idempotent."""
    warnings = list(result.warnings)
    out = []
    for w in warnings:
        if (w.startswith("fO2") and "outside the calibrated range" in w and "extrapolated" not in w
                and getattr(law, "fo2_range_pa", None) is None):
            # the range of the mechanism the law chose; read from the sentence's own numbers
            w = w + _FO2_MEANING.format(lo=_range_from(w)[0], hi=_range_from(w)[1])
        elif w.startswith("fO2") and "outside the calibrated range" in w and "extrapolated" not in w:
            lo, hi = law.fo2_range_pa
            w = w + _FO2_MEANING.format(lo=f"{lo:g}", hi=f"{hi:g}")
        elif "stated default used for the section obliquity" in w and "narrows" not in w:
            w = w + _OBLIQUITY_MEANING
        out.append(w)
    note = _pressure_note(law, pressure_mpa, temperature_c, composition)
    if note and note not in out:
        out.append(note)
    result.warnings = out


def _range_from(sentence: str) -> tuple[str, str]:
    import re

    m = re.search(r"calibrated range ([0-9.eE+-]+)[–-]([0-9.eE+-]+) Pa", sentence)
    return (m.group(1), m.group(2)) if m else ("the law's", "range")


def element_disagreement(fits) -> list[str]:
    """Warnings for pairs of elements dating the same boundary whose 95 % intervals do not overlap.

    ``fits`` are FitResult-like objects with ``element``, ``position_um`` and
    ``time_days`` percentiles. Two fits date the same boundary when their
    positions are within 4 µm (the campaign's match distance). Disagreement:
    the 95 % intervals do not overlap (each time outside the other's interval
    and the intervals apart), the plain test a reader can check in the table.
    """
    out = []
    items = [f for f in fits if _interval(f) is not None]
    for i in range(len(items)):
        for j in range(i + 1, len(items)):
            a, b = items[i], items[j]
            if a.element == b.element or abs(float(a.position_um) - float(b.position_um)) > SAME_BOUNDARY_UM:
                continue
            (la, ha), (lb, hb) = _interval(a), _interval(b)
            if la > hb or lb > ha:
                older, younger = (a, b) if la > hb else (b, a)
                out.append(
                    f"growth or diffusion? {older.element} and {younger.element} date the boundary at "
                    f"{float(a.position_um):.1f} µm differently: {older.element} "
                    f"{_interval(older)[0]:.3g}–{_interval(older)[1]:.3g} d, {younger.element} "
                    f"{_interval(younger)[0]:.3g}–{_interval(younger)[1]:.3g} d (95 %, intervals apart); "
                    + _growth_reasons())
    return out


def _interval(fit):
    t = getattr(fit, "time_days", None)
    if t is None:
        return None
    if isinstance(t, dict):
        lo, hi, st = t.get("p2_5"), t.get("p97_5"), t.get("statement", "date")
    else:
        lo, hi, st = getattr(t, "p2_5", None), getattr(t, "p97_5", None), getattr(t, "statement", "date")
    if st != "date" or lo is None or hi is None or not (np.isfinite(lo) and np.isfinite(hi)):
        return None
    return float(lo), float(hi)
