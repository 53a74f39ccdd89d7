"""Provenance: what was computed from what, with which software, laws and parameters.

The campaign passes a provenance dict (layout in ``docs/report.md``); this
module completes the list of laws actually used (citation, status, calibrated
range) and renders it as HTML. It computes no science.
"""

from __future__ import annotations

import html
import json
from collections import Counter

__all__ = ["CAUTION", "law_entries", "complete_provenance", "render_value_html", "status_is_confirmed",
           "citation_text", "range_text"]

CAUTION = (
    "Diffusion timescales inform, and do not replace, volcanic hazard assessment. "
    "Hazard assessment belongs to the responsible volcano observatory and the local authorities; "
    "the times in this report are model results with the uncertainties stated, resting on the "
    "diffusion laws, temperatures and boundary choices listed below."
)


def _e(x) -> str:
    return html.escape("" if x is None else str(x), quote=True)


def status_is_confirmed(status) -> bool:
    """True for a law or value whose numbers were checked against a source."""
    return str(status or "").strip().lower() == "confirmed"


def _law_from_registry(law_id):
    try:
        from zoneprofile.diffusion.laws import get_law  # the diffusion stage owns the laws
    except Exception:  # noqa: BLE001 - the report must render even without that stage
        return None
    try:
        law = get_law(law_id)
    except Exception:  # noqa: BLE001 - unknown id: reported as "not recorded"
        return None
    if hasattr(law, "to_dict"):
        try:
            return {"id": law_id, **law.to_dict()}
        except Exception:  # noqa: BLE001 - fall back to attributes
            pass
    entry = {"id": law_id}
    for attr in ("element", "mineral", "citation", "status", "doi"):
        v = getattr(law, attr, None)
        if v is not None:
            entry[attr] = v if isinstance(v, (str, int, float)) else str(v)
    for attr in ("range_text", "calibrated_range", "t_range_c", "temperature_range_c"):
        v = getattr(law, attr, None)
        if v is not None:
            entry["range"] = v if isinstance(v, str) else json.dumps(v, default=str)
            break
    return entry


def _span(v, unit=""):
    try:
        lo, hi = v
        u = f" {unit}" if unit else ""
        return f"{lo:g}–{hi:g}{u}"
    except (TypeError, ValueError):
        return str(v)


def range_text(law: dict) -> str:
    """The calibrated range of a law as one readable line."""
    if law.get("range"):
        return str(law["range"])
    parts = []
    if law.get("t_range_c"):
        parts.append(f"T {_span(law['t_range_c'], '°C')}")
    for key, v in (law.get("composition_range") or {}).items():
        if v:
            parts.append(f"{key} {_span(v)}")
    if law.get("fo2_range_pa"):
        parts.append(f"fO2 {_span(law['fo2_range_pa'], 'Pa')}")
    return "; ".join(parts) or "not recorded"


def _laws_given(provenance):
    laws = (provenance or {}).get("laws")
    if isinstance(laws, dict):
        return [{"id": k, **(v if isinstance(v, dict) else {"citation": v})} for k, v in laws.items()]
    if isinstance(laws, list):
        return [dict(v) for v in laws if isinstance(v, dict)]
    return []


def law_entries(records, provenance=None) -> list[dict]:
    """Every law used by a dated boundary, with citation, status, range and use count."""
    used = Counter(b.get("law") for r in records for b in (r.get("boundaries") or []) if b.get("law"))
    given = {str(v.get("id")): v for v in _laws_given(provenance) if v.get("id") is not None}
    out = []
    for law_id in sorted(set(used) | set(given)):
        entry = dict(given.get(law_id) or _law_from_registry(law_id) or {"id": law_id})
        entry.setdefault("citation", "citation not recorded")
        entry.setdefault("status", "not recorded")
        entry["n_boundaries"] = used.get(law_id, 0)
        out.append(entry)
    return out


def complete_provenance(provenance, records) -> dict:
    """A copy of ``provenance`` with the laws used, the caution and the file list filled in."""
    prov = dict(provenance or {})
    prov["laws"] = law_entries(records, provenance)
    if "inputs" not in prov:
        prov["inputs"] = [dict(i, sample=r["sample"], crystal=r["crystal"])
                          for r in records for i in (r.get("inputs") or [])]
    prov.setdefault("caution", CAUTION)
    return prov


def citation_text(provenance) -> str:
    """The sentence a user can paste into a methods section."""
    sw = (provenance or {}).get("software") or {}
    version = sw.get("version") if isinstance(sw, dict) else None
    version = version or (provenance or {}).get("software_version") or "unknown version"
    return (
        f"Times were computed with zoneprofile {version} from the input files listed with their "
        "SHA-256 checksums, using the diffusion laws and parameters listed in this report; "
        "cite the original publication of each law."
    )


def render_value_html(value, *, depth: int = 0) -> str:
    """Render any JSON-like value as nested, escaped HTML (definition lists and lists)."""
    if isinstance(value, dict):
        if not value:
            return "<em>none</em>"
        items = "".join(f"<dt><code>{_e(k)}</code></dt><dd>{render_value_html(v, depth=depth + 1)}</dd>"
                        for k, v in value.items())
        return f"<dl>{items}</dl>"
    if isinstance(value, (list, tuple)):
        if not value:
            return "<em>none</em>"
        if all(not isinstance(v, (dict, list, tuple)) for v in value):
            return _e(", ".join("" if v is None else str(v) for v in value))
        return "<ul>" + "".join(f"<li>{render_value_html(v, depth=depth + 1)}</li>" for v in value) + "</ul>"
    if value is None:
        return "<em>null</em>"
    return _e(value)
