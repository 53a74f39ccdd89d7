"""Event ladders: each crystal's dated boundaries and gaps against the population's events.

A *ladder* is one crystal's sequence of recharge boundaries, oldest (innermost)
first, each with its age statement (a date with its 95 % interval, or a bound),
the population event it belongs to (``E1`` the oldest), and between successive
boundaries the gap, i.e. the residence time between two recharges. The
population events come from :func:`zoneprofile.event_model.population_events`
(``population["events"]``); the gaps from the crystal model where the record
has one (``crystal_model.gaps``), else from the single-boundary intervals
(``recharge_intervals_days``, one chain per element).

This module builds the three tables (``events`` rows of the population,
``event_members.csv``, ``gaps.csv``) and the HTML of the ladders part of the
report's chronology section. Keys: ``docs/report.md``.
"""

from __future__ import annotations

import html

import pandas as pd

__all__ = ["population_event_rows", "members_table", "gaps_table", "ladder_rows", "ladders_html",
           "MEMBER_COLUMNS", "GAP_COLUMNS"]

MEMBER_COLUMNS = ["sample", "crystal", "boundary", "position_um", "element", "source", "statement",
                  "median_days", "p2_5_days", "p97_5_days", "upper_bound_days", "lower_bound_days", "event",
                  "probability", "probabilities", "flags"]
GAP_COLUMNS = ["sample", "crystal", "source", "element", "older", "younger", "older_event", "younger_event",
               "median_days", "p2_5_days", "p97_5_days", "statement", "upper_bound_days", "lower_bound_days",
               "warnings"]


def _join(items) -> str:
    return "; ".join(str(i) for i in items or [] if i not in (None, ""))


def _events_block(population) -> dict:
    return (population or {}).get("events") or {}


def population_event_rows(population) -> list[dict]:
    """Rows of ``events.csv`` for the population's events (scope ``population``)."""
    rows = []
    for e in _events_block(population).get("events") or []:
        age = e.get("age_days") or {}
        rows.append({
            "scope": "population", "element": "", "event": e.get("id"), "median_days": age.get("median"),
            "p2_5_days": age.get("p2_5"), "p97_5_days": age.get("p97_5"),
            "spread_log10": (e.get("log10_days") or {}).get("spread"),
            "n_boundaries": e.get("n_boundaries"), "n_dated": e.get("n_dated"), "n_bounds": e.get("n_bounds"),
            "n_crystals": e.get("n_crystals"), "fraction_of_crystals": e.get("fraction_of_crystals"),
            "by_sample": _join(f"{s}:{n}" for s, n in (e.get("by_sample") or {}).items()),
            "crystals": _join(f"{c['sample']}/{c['crystal']}" for c in e.get("crystals") or []),
            "warnings": _join(e.get("warnings")),
        })
    return rows


def members_table(population) -> pd.DataFrame:
    """One row per boundary of the population model: its statement, event and membership probabilities."""
    rows = []
    for m in _events_block(population).get("members") or []:
        td = m.get("time_days") or {}
        probs = m.get("probabilities") or {}
        rows.append({
            "sample": m.get("sample"), "crystal": m.get("crystal"), "boundary": m.get("boundary"),
            "position_um": m.get("position_um"), "element": m.get("element"), "source": m.get("source"),
            "statement": m.get("statement"), "median_days": td.get("median"), "p2_5_days": td.get("p2_5"),
            "p97_5_days": td.get("p97_5"), "upper_bound_days": td.get("upper_bound"),
            "lower_bound_days": td.get("lower_bound"), "event": m.get("event"),
            "probability": probs.get(m.get("event")),
            "probabilities": _join(f"{k}:{p:.3f}" for k, p in probs.items()),
            "flags": _join(m.get("flags")),
        })
    for x in _events_block(population).get("excluded") or []:
        rows.append({"sample": x.get("sample"), "crystal": x.get("crystal"), "boundary": x.get("boundary"),
                     "position_um": x.get("position_um"), "element": x.get("element"), "source": x.get("source"),
                     "statement": "none", "event": "", "flags": f"left out: {x.get('reason')}"})
    return pd.DataFrame(rows, columns=MEMBER_COLUMNS)


def _member_index(population):
    """(sample, crystal) -> list of members, for looking up a boundary's event."""
    out = {}
    for m in _events_block(population).get("members") or []:
        out.setdefault((m["sample"], m["crystal"]), []).append(m)
    return out


def _event_at(members, *, boundary=None, position=None, tol=1.0):
    for m in members or []:
        if boundary is not None and m.get("boundary") == boundary and m.get("source") == "crystal model":
            return m.get("event")
    if position is None:
        return None
    near = [m for m in members or [] if isinstance(m.get("position_um"), (int, float))
            and abs(m["position_um"] - float(position)) <= tol]
    return near[0].get("event") if near else None


def _gap_rows(record, members):
    s, c = str(record.get("sample", "")), str(record.get("crystal", ""))
    cm = record.get("crystal_model") or {}
    rows = []
    if cm.get("gaps"):
        for g in cm["gaps"]:
            d = g.get("days") or {}
            rows.append({"sample": s, "crystal": c, "source": "crystal model",
                         "element": "+".join(cm.get("elements") or []), "older": g.get("older"),
                         "younger": g.get("younger"),
                         "older_event": _event_at(members, boundary=g.get("older")),
                         "younger_event": _event_at(members, boundary=g.get("younger")),
                         "median_days": d.get("median"), "p2_5_days": d.get("p2_5"), "p97_5_days": d.get("p97_5"),
                         "statement": d.get("statement", "date"), "upper_bound_days": d.get("upper_bound"),
                         "lower_bound_days": d.get("lower_bound"), "warnings": _join(cm.get("warnings"))})
        return rows
    for iv in record.get("recharge_intervals_days") or []:
        resolved = iv.get("resolved", True)
        rows.append({"sample": s, "crystal": c, "source": "single fits", "element": iv.get("element"),
                     "older": f"{iv.get('inner_um'):.1f} um" if iv.get("inner_um") is not None else None,
                     "younger": f"{iv.get('outer_um'):.1f} um" if iv.get("outer_um") is not None else None,
                     "older_event": _event_at(members, position=iv.get("inner_um")),
                     "younger_event": _event_at(members, position=iv.get("outer_um")),
                     "median_days": iv.get("median"), "p2_5_days": iv.get("p2_5"), "p97_5_days": iv.get("p97_5"),
                     "statement": "date" if resolved else "none", "upper_bound_days": None,
                     "lower_bound_days": None, "warnings": _join(iv.get("warnings"))})
    return rows


def gaps_table(records, population) -> pd.DataFrame:
    """One row per gap between successive boundaries of a crystal (the time between two recharges)."""
    idx = _member_index(population)
    rows = []
    for r in records or []:
        if r.get("error"):
            continue
        rows += _gap_rows(r, idx.get((str(r.get("sample", "")), str(r.get("crystal", "")))))
    return pd.DataFrame(rows, columns=GAP_COLUMNS)


def ladder_rows(records, population) -> list[dict]:
    """Per crystal: its boundaries oldest first with age, event and the gap to the next (younger) one."""
    idx = _member_index(population)
    out = []
    for r in records or []:
        if r.get("error"):
            continue
        key = (str(r.get("sample", "")), str(r.get("crystal", "")))
        members = idx.get(key) or []
        if not members:
            continue
        cm = r.get("crystal_model") or {}
        concord = {b.get("id"): (b.get("concordance") or {}) for b in cm.get("boundaries") or []}
        gaps = _gap_rows(r, members)
        steps = []
        for m in members:  # members keep the crystal's order (oldest first)
            c = concord.get(m.get("boundary")) if m.get("source") == "crystal model" else None
            steps.append({"member": m, "concordance": c})
        out.append({"sample": key[0], "crystal": key[1], "steps": steps, "gaps": gaps,
                    "source": members[0].get("source")})
    return out


# --------------------------------------------------------------------------- HTML
def _e(x) -> str:
    return html.escape("" if x is None else str(x))


def _days(x) -> str:
    from zoneprofile._units import format_days

    return format_days(x)


def _statement_text(td) -> str:
    st = (td or {}).get("statement")
    if st == "date":
        return f"{_days(td.get('median'))} ({_days(td.get('p2_5'))} – {_days(td.get('p97_5'))})"
    parts = []
    if td.get("lower_bound") is not None:
        parts.append(f"&gt; {_e(_days(td['lower_bound']))}")
    if td.get("upper_bound") is not None:
        parts.append(f"&lt; {_e(_days(td['upper_bound']))}")
    return " and ".join(parts) if parts else "no bound"


def _table(header, rows) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def ladders_html(records, population) -> str:
    """The population events and per-crystal ladders, for the report's chronology section."""
    block = _events_block(population)
    if not block:
        return ""
    parts = ["<h3>Recharge events of the population</h3>"]
    bic = block.get("bic_by_k") or {}
    parts.append(
        "<p>Every boundary of every crystal (the whole-crystal ages where a crystal has them, else its "
        "single-boundary fits; upper and lower bounds as censored observations) described as a few shared "
        "events in log time, each with an intrinsic spread; the number of events is the one with the smallest "
        f"{_e(block.get('criterion'))} ({_e(block.get('criterion_text'))}). Event ages: "
        f"{_e(block.get('interval_method'))}. E1 is the oldest. Method: <code>docs/chronology.md</code>.</p>")
    if bic:
        parts.append("<p class=\"meta\">BIC by number of events: "
                     + ", ".join(f"{_e(k)}: {float(v):.1f}" for k, v in bic.items()) + "</p>")
    evs = block.get("events") or []
    samples = sorted({s for e in evs for s in (e.get("by_sample") or {})})
    if evs:
        rows = []
        for e in evs:
            n_an = e.get("n_analysed_by_sample") or {}
            rows.append([_e(e["id"]), _statement_text(e.get("age_days")),
                         f"{(e.get('log10_days') or {}).get('spread', float('nan')):.2f}",
                         str(e.get("n_dated")), str(e.get("n_bounds")),
                         *[f"{e['by_sample'].get(s, 0)}/{n_an.get(s, 0)}" for s in samples],
                         _e(_join(e.get("warnings")))])
        parts.append(_table(["event", "age (95% interval)", "spread (log10)", "dated boundaries", "bounds",
                             *[f"crystals in {s}" for s in samples], "notes"], rows))
    else:
        parts.append("<p>No dated boundary: no event can be dated.</p>")
    ladders = ladder_rows(records, population)
    if ladders:
        parts.append("<h4>Event ladders, crystal by crystal</h4>")
        parts.append("<p>Each crystal's boundaries from the oldest (innermost) to the youngest, the event each "
                     "belongs to (with its probability, given that inner boundaries are older) and the gaps "
                     "between successive recharges. Flags say where the order forced a choice.</p>")
        rows = []
        for lad in ladders:
            cells = []
            for st in lad["steps"]:
                m = st["member"]
                p = (m.get("probabilities") or {}).get(m.get("event"))
                txt = f"<b>{_e(m.get('event'))}</b> {_e(m.get('boundary'))}: {_statement_text(m.get('time_days'))}"
                if p is not None:
                    txt += f" [p = {p:.2f}]"
                conc = st.get("concordance") or {}
                if conc.get("status"):
                    txt += f"; {_e(conc['status'])}"
                    if conc.get("reasons"):
                        txt += f" ({_e(_join(conc['reasons']))})"
                if m.get("flags"):
                    txt += f" <i>{_e(_join(m['flags']))}</i>"
                cells.append(txt)
            gaps = []
            for g in lad["gaps"]:
                td = {"statement": g.get("statement"), "median": g.get("median_days"), "p2_5": g.get("p2_5_days"),
                      "p97_5": g.get("p97_5_days"), "upper_bound": g.get("upper_bound_days"),
                      "lower_bound": g.get("lower_bound_days")}
                label = f"{g.get('older_event') or g.get('older')} → {g.get('younger_event') or g.get('younger')}"
                el = f" {g['element']}" if g.get("element") and g.get("source") == "single fits" else ""
                if g.get("median_days") is not None:
                    td["statement"] = "date"
                    text = _statement_text(td) + ("" if g.get("statement") == "date" else " (indicative)")
                else:
                    text = _statement_text(td)
                gaps.append(f"{_e(label)}{_e(el)}: {text}")
            rows.append([_e(lad["sample"]), _e(lad["crystal"]), "<br>".join(cells), "<br>".join(gaps) or "–",
                         _e(lad["source"])])
        parts.append(_table(["sample", "crystal", "boundaries, oldest first", "gaps (residence times)", "from"],
                            rows))
    excl = block.get("excluded") or []
    if excl:
        parts.append("<h4>Boundaries left out of the event model</h4>")
        parts.append(_table(["sample", "crystal", "boundary", "element", "reason"],
                            [[_e(x.get("sample")), _e(x.get("crystal")), _e(x.get("boundary")),
                              _e(x.get("element")), _e(x.get("reason"))] for x in excl]))
    return "".join(parts)
