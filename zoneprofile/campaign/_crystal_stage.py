"""The whole-crystal model as a campaign stage (``model = "crystal"``).

:func:`crystal_first` runs before the per-boundary fits of a crystal. A crystal
with two or more dated boundaries is dated by the whole-crystal model alone,
from the zoning's boundary positions, into ``record["crystal_model"]`` (keys in
``docs/whole-crystal-model.md``); the Monte Carlo per-boundary fits are not
run, so ``record["boundaries"]`` and ``record["recharge_intervals_days"]`` stay
empty. A crystal with one boundary (where the model reduces to a
single-boundary fit) and a crystal the model cannot take (boundaries closer
than the resolution, an element without a law, ...) are dated boundary by
boundary as with ``model = "boundary"``; the latter gets one plain warning
saying why. ``record["model"]`` says which way each crystal was dated
(``docs/run-a-campaign.md``). The stage never fails the crystal.
"""

from __future__ import annotations

import numpy as np

from zoneprofile._validation import InputError

__all__ = ["crystal_stage", "crystal_first"]


def _element_data(name, params, table, trace, map_profile):
    """(x, values, beam, shape, sd) for one value column, from the same source the per-boundary fits use
    (``sd`` the source's ``{name}_sd`` column, or None)."""
    from zoneprofile.campaign._frames import _column, _column_sd

    if table is not None and _column(table, name) is not None:
        return (np.asarray(table["distance_um"], float), _column(table, name), params.get("beam_um"),
                params.get("beam_shape", "gaussian"), _column_sd(table, name))
    if trace is not None and _column(trace, name) is not None:
        return (np.asarray(trace["distance_um"], float), _column(trace, name), params.get("trace_beam_um"),
                params.get("trace_beam_shape", "square"), _column_sd(trace, name))
    if map_profile is not None and _column(map_profile, name) is not None:
        return (np.asarray(map_profile["distance_um"], float), _column(map_profile, name), None, "gaussian",
                _column_sd(map_profile, name))
    return None


def _undated_an_steps(record, positions):
    """The zoning's An steps that are not dated boundaries: the frozen An steps there too
    (``fit_crystal(an_splits_um=...)``); none when the zoning column is not An."""
    zones = record.get("zones")
    if not zones or zones["column"] != "An":
        return None
    return [float(s["position_um"]) for s in zones["steps"]
            if s["position_um"] is not None and all(abs(s["position_um"] - p) > 1e-6 for p in positions)] or None


def crystal_stage(record, boundaries, params, task, *, table, trace, map_profile, an, an_x, an_beam,
                  map_obliquity=()):
    """Fit the whole-crystal model to a crystal's dated boundaries; the result goes into ``record``."""
    from zoneprofile.campaign._frames import usable_sd
    from zoneprofile.minerals.registry import value_column
    from zoneprofile.diffusion.crystal import fit_crystal
    from zoneprofile.diffusion.draws import sample_seed

    record["crystal_model"] = None
    mineral = task["mineral"]
    positions = sorted({float(b["position_um"]) for b in boundaries}, reverse=True)
    if not positions:
        return None
    profiles = {}
    missing = []
    for element in params["elements"]:
        data = _element_data(value_column(element, mineral), params, table, trace, map_profile)
        if data is None:
            missing.append(element)
            continue
        x, v, beam, shape, sd = data
        keep = np.isfinite(x) & np.isfinite(v)
        profiles[element] = {"distance_um": x[keep], "value": v[keep], "beam_um": beam, "beam_shape": shape}
        sd = usable_sd(x, v, sd, value_column(element, mineral), record["warnings"])
        if sd is not None:
            profiles[element]["sd"] = sd
    if missing:
        record["warnings"].append(f"whole-crystal model: no values for {', '.join(missing)}; fitted without")
    if not profiles:
        record["warnings"].append("whole-crystal model not run: no element values in the inputs")
        return None
    obliquity = params.get("obliquity_deg")
    measured = [float(v) for v in map_obliquity or () if v is not None]
    if measured:
        # one traverse, one angle: the median of the angles the map measured at its boundaries
        obliquity = float(np.median(measured))
    try:
        result = fit_crystal(
            profiles, mineral=mineral, positions_um=positions, temperature_c=params["temperature_c"],
            temperature_sd_c=params.get("temperature_sd_c", 0.0), an_distance_um=an_x, an=an, an_beam_um=an_beam,
            laws={el: law for el, law in (params.get("laws") or {}).items() if el in profiles} or None,
            draws=int(params["draws"]), seed=int(params["seed"]),
            temperature_seed=sample_seed(int(params.get("campaign_seed", 0)), task["sample"]),
            obliquity="section" if obliquity is None else float(obliquity),
            fo2_pa=params.get("fo2_pa"), pressure_mpa=params.get("pressure_mpa"),
            an_splits_um=_undated_an_steps(record, positions))
    except (KeyboardInterrupt, SystemExit, MemoryError):
        raise
    except InputError as exc:
        record["warnings"].append(f"whole-crystal model not run: {' '.join(str(exc.message).split())}")
        return None
    except Exception as exc:  # noqa: BLE001 - the per-boundary fits stand; say what happened
        text = " ".join(str(exc).split()) or type(exc).__name__
        record["warnings"].append(f"whole-crystal model not run: internal error ({type(exc).__name__}): {text}")
        return None
    record["crystal_model"] = result.to_record()
    return record["crystal_model"]


def crystal_first(record, boundaries, params, task, *, timing, run_stage, **data) -> bool:
    """Date the crystal with the whole-crystal model where it applies; True when it did.

    Sets ``record["model"]`` = ``{"requested": "crystal", "used": "crystal" | "boundary",
    "note": str}``. On False the caller fits the boundaries one by one.
    """
    n = len({round(float(b["position_um"]), 9) for b in boundaries})
    record["crystal_model"] = None
    if n == 0:
        record["model"] = {"requested": "crystal", "used": "boundary", "note": "no recharge boundary to date"}
        return False
    if n == 1:
        record["model"] = {"requested": "crystal", "used": "boundary",
                           "note": "one boundary: the whole-crystal model reduces to the single-boundary fit, "
                                   "which is reported (boundaries)"}
        return False
    result = run_stage("crystal model", crystal_stage, record, boundaries, params, task, timing=timing, **data)
    if result is None:
        record["model"] = {"requested": "crystal", "used": "boundary",
                           "note": "the whole-crystal model was not run (see the warnings): "
                                   "the boundaries are dated one by one"}
        return False
    record["model"] = {"requested": "crystal", "used": "crystal",
                       "note": f"{n} boundaries dated together by the whole-crystal model (crystal_model); "
                               "no per-boundary fits"}
    return True
