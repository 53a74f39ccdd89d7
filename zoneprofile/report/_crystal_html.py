"""Report parts for crystals dated by the whole-crystal model (``record["crystal_model"]``).

Small helpers used by :mod:`zoneprofile.report.html`: the crystal's ages and
gaps in its own section, the gaps in "Time between recharges", the counts of
the summary, and the population's events at a glance. Keys:
``docs/whole-crystal-model.md``.
"""

from __future__ import annotations

import html

__all__ = ["model_of", "counts", "crystal_model_html", "gap_rows", "glance_rows", "per_element_note"]


def _e(x) -> str:
    return html.escape("" if x is None else str(x))


def model_of(record) -> dict:
    """The record's whole-crystal model, or {} (failed crystals and malformed entries give {})."""
    cm = record.get("crystal_model") if not record["error"] else None
    return cm if isinstance(cm, dict) and isinstance(cm.get("boundaries"), list) else {}


def counts(record) -> tuple[int, int, int]:
    """(boundaries, dated, gaps) of a crystal dated by the whole-crystal model."""
    cm = model_of(record)
    bs = [b for b in cm.get("boundaries") or [] if isinstance(b, dict)]
    dated = sum(1 for b in bs if (b.get("age_days") or {}).get("statement") == "date")
    return len(bs), dated, len(cm.get("gaps") or [])


def _statement(td) -> str:
    from zoneprofile.report.ladders import _statement_text

    return _statement_text(td or {})  # already escaped


def crystal_model_html(record, table) -> str:
    """The crystal's boundaries and gaps as the whole-crystal model dated them ('' when none)."""
    cm = model_of(record)
    if not cm.get("boundaries"):
        return ""
    elements = [str(x) for x in cm.get("elements") or []]
    rows = []
    for b in cm["boundaries"]:
        if not isinstance(b, dict):
            continue
        by = b.get("by_element") or {}
        conc = b.get("concordance") or {}
        pos = b.get("position_um")
        rows.append([_e(b.get("id")), _e(f"{pos:.1f} µm" if isinstance(pos, (int, float)) else ""),
                     _e((b.get("age_days") or {}).get("statement")), _statement(b.get("age_days")),
                     *[_statement(by.get(el)) for el in elements],
                     _e(conc.get("status")) + (f" ({_e('; '.join(conc['reasons']))})" if conc.get("reasons") else "")])
    parts = ["<h4>Whole-crystal model: ages (oldest first)</h4>",
             table(["boundary", "position", "statement", "age (95% interval) or bound",
                    *[f"{el} alone" for el in elements], "concordance"], rows)]
    grow = [[_e(g.get("older")), _e(g.get("younger")), _e((g.get("days") or {}).get("statement")),
             _statement(g.get("days"))] for g in cm.get("gaps") or [] if isinstance(g, dict)]
    if grow:
        parts.append("<h4>Whole-crystal model: time between recharges</h4>")
        parts.append(table(["older", "younger", "statement", "gap (95% interval) or bound"], grow))
    note = (record.get("model") or {}).get("note")
    if note:
        parts.append(f'<p class="meta">{_e(note)}; ages at {_e(cm.get("temperature_c"))} °C, '
                     f'{_e(cm.get("n_draws"))} draws'
                     + (f' ({_e(", ".join(elements))} jointly)' if len(elements) > 1 else "") + ".</p>")
    return "".join(parts)


def gap_rows(records) -> list[list[str]]:
    """Rows (sample, crystal, older, younger, statement, gap) of every crystal-model gap."""
    rows = []
    for r in records:
        for g in model_of(r).get("gaps") or []:
            if isinstance(g, dict):
                rows.append([_e(r["sample"]), _e(r["crystal"]), _e(g.get("older")), _e(g.get("younger")),
                             _e((g.get("days") or {}).get("statement")), _statement(g.get("days"))])
    return rows


def glance_rows(population, fmt, num) -> list[list[str]]:
    """Rows of "Recharge events at a glance" from the population's events (all crystals)."""
    rows = []
    for e in ((population or {}).get("events") or {}).get("events") or []:
        age = e["age_days"]  # PopulationEvent (zoneprofile/_records.py)
        frac = e["fraction_of_crystals"]
        rows.append([_e(e["id"]), "all", _e(fmt(age["median"])),
                     f"{_e(fmt(age['p2_5']))} – {_e(fmt(age['p97_5']))}", str(e["n_crystals"]),
                     num(100 * frac, 3) + " %" if frac is not None else ""])
    return rows


def per_element_note(records) -> str:
    """A note before the per-element summaries when some crystals were dated by the whole-crystal model."""
    ok = [r for r in records if not r["error"]]
    n_model = sum(1 for r in ok if model_of(r).get("boundaries"))
    if not n_model:
        return ""
    return (f'<p class="meta">{n_model} of {len(ok)} crystals were dated by the whole-crystal model: their '
            "ages are in the population's events and the ladders above. The per-element summaries below "
            f"hold only the {len(ok) - n_model} crystals dated boundary by boundary (one boundary, or a crystal "
            "the whole-crystal model could not take).</p>")
