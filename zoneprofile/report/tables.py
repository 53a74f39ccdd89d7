"""Tables for a supplement: zones, fits, intervals, crystals, events, event members, gaps,
whole-crystal model ages (CSV).

One tidy table per topic, one row per item, units in column names. Written
with :func:`zoneprofile._output.write_table`, which neutralises text cells that
a spreadsheet would run as a formula.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from zoneprofile._output import write_table

__all__ = [
    "zones_table",
    "fits_table",
    "intervals_table",
    "crystals_table",
    "events_table",
    "write_tables",
]

ZONE_COLUMNS = ["sample", "crystal", "mineral", "column", "feature", "start_um", "end_um", "position_um",
                "mean", "trend_per_um", "before", "after", "change", "kind", "recharge", "width_um",
                "position_sd_um", "wavelength_um", "amplitude", "p_value", "evidence"]
FIT_COLUMNS = ["sample", "crystal", "mineral", "position_um", "fitted_position_um", "kind", "element", "law",
               "law_status", "partition_model", "temperature_c", "temperature_sd_c", "beam_um", "beam_shape",
               "obliquity_deg", "log10_dt_m2_best", "log10_dt_m2_median", "log10_dt_m2_p2_5", "log10_dt_m2_p16",
               "log10_dt_m2_p84", "log10_dt_m2_p97_5", "statement", "time_best_days", "time_median_days",
               "time_p2_5_days", "time_p16_days", "time_p84_days", "time_p97_5_days", "time_upper_bound_days",
               "time_lower_bound_days", "resolved", "warnings"]
INTERVAL_COLUMNS = ["sample", "crystal", "element", "outer_um", "inner_um", "median_days", "p2_5_days",
                    "p16_days", "p84_days", "p97_5_days", "n_draws", "fraction_negative", "resolved",
                    "warnings"]
CRYSTAL_COLUMNS = ["sample", "crystal", "mineral", "status", "error", "n_points", "n_steps",
                   "n_resorption_surfaces", "n_dated_boundaries", "n_resolved", "n_intervals", "n_warnings",
                   "inputs"]
EVENT_COLUMNS = ["scope", "element", "event", "median_days", "p2_5_days", "p97_5_days", "spread_log10",
                 "n_boundaries", "n_dated", "n_bounds", "n_crystals", "fraction_of_crystals", "by_sample", "crystals",
                 "warnings"]


def _join(items) -> str:
    return "; ".join(str(i) for i in (items or []))


def _frame(rows, columns) -> pd.DataFrame:
    frame = pd.DataFrame(rows, columns=columns)
    return frame


def zones_table(records) -> pd.DataFrame:
    """One row per zoning feature: zone, step, resorption surface, oscillatory band."""
    rows = []
    for r in records:
        z = r.get("zones") or {}
        base = {"sample": r["sample"], "crystal": r["crystal"], "mineral": r.get("mineral"),
                "column": z.get("column")}
        for item in z.get("zones") or []:
            rows.append({**base, "feature": "zone", **{k: item.get(k) for k in
                                                       ("start_um", "end_um", "mean", "trend_per_um", "kind")}})
        for item in z.get("steps") or []:
            rows.append({**base, "feature": "step", **{k: item.get(k) for k in
                                                       ("position_um", "before", "after", "change", "kind",
                                                        "recharge", "width_um", "position_sd_um")}})
        for item in z.get("resorption_surfaces") or []:
            rows.append({**base, "feature": "resorption surface", "position_um": item.get("position_um"),
                         "evidence": _join(item.get("evidence"))})
        for item in z.get("oscillatory_bands") or []:
            rows.append({**base, "feature": "oscillatory band", **{k: item.get(k) for k in
                                                                   ("start_um", "end_um", "wavelength_um",
                                                                    "amplitude", "p_value")}})
    return _frame(rows, ZONE_COLUMNS)


def _temperature(r, b):
    if b.get("temperature_c") is not None:
        return b.get("temperature_c")
    return (r.get("parameters") or {}).get("temperature_c")


def _setting(r, b, key):
    """A fit's setting: the boundary's model set-up first, then the crystal's parameters."""
    setup = b.get("model_setup") or {}
    if setup.get(key) is not None:
        return setup.get(key)
    return (r.get("parameters") or {}).get(key)


def _log10_dt(b) -> dict:
    """``log10_dt_m2`` as plain columns (a dict of quantiles, or one number in older records)."""
    v = b.get("log10_dt_m2")
    if isinstance(v, dict):
        return {f"log10_dt_m2_{q}": v.get(q) for q in ("best", "median", "p2_5", "p16", "p84", "p97_5")}
    return {"log10_dt_m2_best": v}


def fits_table(records) -> pd.DataFrame:
    """One row per dated boundary, times in days; bounds, temperature sd, law status and set-up in plain columns."""
    rows = []
    for r in records:
        for b in r.get("boundaries") or []:
            td = b.get("time_days") or {}
            t_sd = b.get("temperature_sd_c")
            rows.append({
                "sample": r["sample"], "crystal": r["crystal"], "mineral": r.get("mineral"),
                "position_um": b.get("position_um"), "fitted_position_um": b.get("fitted_position_um"),
                "kind": b.get("kind"), "element": b.get("element"), "law": b.get("law"),
                "law_status": b.get("law_status"), "partition_model": _setting(r, b, "partition_model"),
                "temperature_c": _temperature(r, b),
                "temperature_sd_c": t_sd if t_sd is not None else (r.get("parameters") or {}).get("temperature_sd_c"),
                "beam_um": _setting(r, b, "beam_um"), "beam_shape": _setting(r, b, "beam_shape"),
                "obliquity_deg": b.get("obliquity_deg"), **_log10_dt(b),
                "statement": td.get("statement") or ("date" if b.get("resolved", True) else None),
                "time_best_days": td.get("best"), "time_median_days": td.get("median"),
                "time_p2_5_days": td.get("p2_5"), "time_p16_days": td.get("p16"),
                "time_p84_days": td.get("p84"), "time_p97_5_days": td.get("p97_5"),
                "time_upper_bound_days": td.get("upper_bound"), "time_lower_bound_days": td.get("lower_bound"),
                "resolved": b.get("resolved"), "warnings": _join(b.get("warnings")),
            })
    return _frame(rows, FIT_COLUMNS)


def intervals_table(records) -> pd.DataFrame:
    """One row per recharge interval (inner minus outer boundary time)."""
    rows = []
    for r in records:
        for iv in r.get("recharge_intervals_days") or []:
            rows.append({
                "sample": r["sample"], "crystal": r["crystal"], "element": iv.get("element"),
                "outer_um": iv.get("outer_um"), "inner_um": iv.get("inner_um"),
                "median_days": iv.get("median"), "p2_5_days": iv.get("p2_5"), "p16_days": iv.get("p16"),
                "p84_days": iv.get("p84"), "p97_5_days": iv.get("p97_5"), "n_draws": iv.get("n_draws"),
                "fraction_negative": iv.get("fraction_negative"), "resolved": iv.get("resolved"),
                "warnings": _join(iv.get("warnings")),
            })
    return _frame(rows, INTERVAL_COLUMNS)


def crystals_table(records) -> pd.DataFrame:
    """One row per crystal: status, counts, error reason, input files."""
    rows = []
    for r in records:
        z = r.get("zones") or {}
        bs = r.get("boundaries") or []
        # a crystal dated by the whole-crystal model: its boundaries and gaps are there
        cm = r.get("crystal_model") if isinstance(r.get("crystal_model"), dict) else {}
        cmb = [b for b in cm.get("boundaries") or [] if isinstance(b, dict)]
        n_warn = (len(r.get("warnings") or []) + sum(len(b.get("warnings") or []) for b in bs)
                  + len(cm.get("warnings") or []))
        prof = r.get("profile") or {}
        rows.append({
            "sample": r["sample"], "crystal": r["crystal"], "mineral": r.get("mineral"),
            "status": "failed" if r["error"] else "ok", "error": r["error"] or "",
            "n_points": len(prof.get("distance_um") or []), "n_steps": len(z.get("steps") or []),
            "n_resorption_surfaces": len(z.get("resorption_surfaces") or []),
            "n_dated_boundaries": len(bs) or len(cmb),
            "n_resolved": sum(1 for b in bs if b.get("resolved", True))
            + sum(1 for b in cmb if (b.get("age_days") or {}).get("statement") == "date"),
            "n_intervals": len(r.get("recharge_intervals_days") or []) or len(cm.get("gaps") or []),
            "n_warnings": n_warn,
            "inputs": _join(i.get("path") for i in r.get("inputs") or []),
        })
    return _frame(rows, CRYSTAL_COLUMNS)


def events_table(population) -> pd.DataFrame:
    """One row per recharge event: the population's (scope ``population``), then each element's."""
    from zoneprofile.report.ladders import population_event_rows

    rows = population_event_rows(population)
    for block in (population or {}).get("elements", {}).values():
        for e in block["events"]:  # ElementEvent (zoneprofile/_records.py)
            rows.append({
                "scope": "element", "element": e["element"], "event": e["id"],
                "median_days": e["median_days"], "p2_5_days": e["p2_5_days"],
                "p97_5_days": e["p97_5_days"], "spread_log10": e["spread_log10"],
                "n_boundaries": e["n_boundaries"], "n_bounds": e["n_bounds"],
                "n_crystals": e["n_crystals"], "fraction_of_crystals": e["fraction_of_crystals"],
                "by_sample": _join(f"{s}:{v['n_crystals']}" for s, v in e["by_sample"].items()),
                "crystals": _join(f"{c['sample']}/{c['crystal']}" for c in e["crystals"]),
                "warnings": _join(e["warnings"]),
            })
    return _frame(rows, EVENT_COLUMNS)


def write_tables(records, population, table_dir) -> list[Path]:
    """Write zones, fits, intervals, crystals, events, event_members, gaps and crystal_model (CSV)
    into ``table_dir``."""
    from zoneprofile.report._crystal_table import crystal_model_table
    from zoneprofile.report.ladders import gaps_table, members_table

    from zoneprofile.report.rounding import round_table  # the rounding rule shared with supplement.xlsx

    d = Path(table_dir)
    d.mkdir(parents=True, exist_ok=True)
    return [
        write_table(d / "zones.csv", round_table(zones_table(records))),
        write_table(d / "fits.csv", round_table(fits_table(records))),
        write_table(d / "intervals.csv", round_table(intervals_table(records))),
        write_table(d / "crystals.csv", round_table(crystals_table(records))),
        write_table(d / "events.csv", round_table(events_table(population))),
        write_table(d / "event_members.csv", round_table(members_table(population))),
        write_table(d / "gaps.csv", round_table(gaps_table(records, population))),
        write_table(d / "crystal_model.csv", round_table(crystal_model_table(records))),
    ]
