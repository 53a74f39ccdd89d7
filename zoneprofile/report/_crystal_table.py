"""``crystal_model.csv``: each crystal's boundaries as the whole-crystal model dated them.

One row per boundary and clock: the joint age of all the crystal's elements
(``element = "joint"``) and each element's own age, each with its statement
(``date``, ``upper_bound``, ``lower_bound`` or ``none``) and bounds, and the
boundary's concordance. The gaps between successive boundaries are in
``gaps.csv``. Columns: ``docs/report.md``; record keys: ``docs/whole-crystal-model.md``.
"""

from __future__ import annotations

import pandas as pd

__all__ = ["CRYSTAL_MODEL_COLUMNS", "crystal_model_table"]

CRYSTAL_MODEL_COLUMNS = ["sample", "crystal", "boundary", "position_um", "fitted_position_um", "element",
                         "statement", "median_days", "p2_5_days", "p97_5_days", "upper_bound_days",
                         "lower_bound_days", "concordance", "concordance_reasons", "temperature_c",
                         "obliquity", "warnings"]


def _obliquity(ob) -> str:
    if not isinstance(ob, dict):
        return ""
    if ob.get("deg") is not None:
        return f"{ob.get('kind', '')} {float(ob['deg']):.1f} deg".strip()
    if ob.get("median_deg") is not None:
        return f"{ob.get('kind', '')} (median {float(ob['median_deg']):.1f} deg)".strip()
    return str(ob.get("kind", ""))


def crystal_model_table(records) -> pd.DataFrame:
    """Rows of ``crystal_model.csv`` for the records that carry a whole-crystal model."""
    rows = []
    for r in records or []:
        cm = r.get("crystal_model") if not r["error"] else None
        if not isinstance(cm, dict):
            continue
        common = {"sample": r["sample"], "crystal": r["crystal"], "temperature_c": cm.get("temperature_c"),
                  "obliquity": _obliquity(cm.get("obliquity")), "warnings": "; ".join(cm.get("warnings") or [])}
        for b in cm.get("boundaries") or []:
            if not isinstance(b, dict):
                continue
            conc = b.get("concordance") or {}
            clocks = [("joint", b.get("age_days"))] + list((b.get("by_element") or {}).items())
            for element, td in clocks:
                td = td if isinstance(td, dict) else {}
                rows.append({**common, "boundary": b.get("id"), "position_um": b.get("position_um"),
                             "fitted_position_um": b.get("fitted_position_um"), "element": element,
                             "statement": td.get("statement", "none"), "median_days": td.get("median"),
                             "p2_5_days": td.get("p2_5"), "p97_5_days": td.get("p97_5"),
                             "upper_bound_days": td.get("upper_bound"), "lower_bound_days": td.get("lower_bound"),
                             "concordance": conc.get("status"),
                             "concordance_reasons": "; ".join(conc.get("reasons") or [])})
    return pd.DataFrame(rows, columns=CRYSTAL_MODEL_COLUMNS)
