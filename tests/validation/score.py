"""Score a campaign's results against the truth of a validation population.

    python -m tests.validation.score RESULTS_DIR TRUTH.json [--json OUT.json]

Prints the four figures of issue 10's "Done when" (thresholds in brackets):

1. recharge boundaries dated by some element with the truth inside the 95 % interval [≥ 90 %]
   (a date of one element, or the joint age of the whole-crystal model, fitted to all of them);
2. statements (dates and bounds) consistent with the truth [≥ 90 %]: a date when the
   truth is inside its 95 % interval, an ``upper_bound`` when truth < bound, a
   ``lower_bound`` when truth > bound;
3. crystals whose gaps between successive boundaries all have the truth inside the
   95 % interval [≥ 90 % of the crystals with two or more true boundaries];
4. events: every true event recovered (median within −20 %/+25 % of the truth, the
   truth inside its 95 % interval) and no extra event.

Both generations of results are read: the single-boundary fits as they are
(``record["boundaries"]``, ``record["recharge_intervals_days"]``, per-element
``population["elements"][el]["events"]``) and, when present, the whole-crystal
model (``record["crystal_model"]``) and the population events
(``population["events"]``), which then take precedence. Absent pieces are
reported as "not available". See docs/validation.md.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

#: A fitted boundary stands for the true one within this distance along the traverse (µm). The
#: true boundaries of one crystal are at least 30 µm apart (the young one 10–16 µm below the rim),
#: so 6 µm is unambiguous while allowing for the position uncertainty of a diffused step seen
#: through a 5 µm spot.
MATCH_UM = 6.0
THRESHOLD = 0.90
EVENT_RANGE = (0.80, 1.25)    # median / truth


# --------------------------------------------------------------------------- statements
def statement_of(td: dict | None, *, resolved=None) -> dict:
    """Normalise a time summary to {'kind', 'median', 'lo', 'hi', 'bound'}.

    Uses the agreed ``statement`` key when present; for older single fits without
    it: an ``upper_bound`` makes an upper bound, ``resolved`` with a median a date,
    anything else no statement.
    """
    td = td or {}
    kind = td.get("statement")
    if kind is None:
        if td.get("lower_bound") is not None:
            kind = "lower_bound"
        elif td.get("upper_bound") is not None:
            kind = "upper_bound"
        elif td.get("median") is not None and (resolved is None or resolved):
            kind = "date"
        else:
            kind = "none"
    out = {"kind": kind, "median": td.get("median"), "lo": td.get("p2_5"), "hi": td.get("p97_5"), "bound": None}
    if kind == "upper_bound":
        out["bound"] = td.get("upper_bound")
    elif kind == "lower_bound":
        out["bound"] = td.get("lower_bound")
    if kind == "date" and (out["lo"] is None or out["hi"] is None):
        out["kind"] = "none"
    if kind in ("upper_bound", "lower_bound") and out["bound"] is None:
        out["kind"] = "none"
    return out


def consistent(st: dict, truth: float) -> bool | None:
    """Whether a statement agrees with the true value (None: no statement)."""
    if st["kind"] == "date":
        return st["lo"] <= truth <= st["hi"]
    if st["kind"] == "upper_bound":
        return truth < st["bound"]
    if st["kind"] == "lower_bound":
        return truth > st["bound"]
    return None


# --------------------------------------------------------------------------- reading
def _match(position, truth_bounds):
    best, dist = None, math.inf
    for b in truth_bounds:
        d = abs(float(position) - float(b["position_um"]))
        if d < dist:
            best, dist = b, d
    return best if dist <= MATCH_UM else None


def _fitted_boundaries(record):
    """[(position_um, {element: statement}, joint statement or None, id)] of one crystal."""
    model = record.get("crystal_model")
    if model and model.get("boundaries"):
        out = []
        for b in model["boundaries"]:
            by_el = {el: statement_of(td) for el, td in (b.get("by_element") or {}).items()}
            out.append((b["position_um"], by_el, statement_of(b.get("age_days")), b.get("id")))
        return out, "crystal_model"
    groups = {}
    for b in record.get("boundaries") or []:
        pos = round(float(b["position_um"]), 6)
        groups.setdefault(pos, {})[b.get("element")] = statement_of(b.get("time_days"), resolved=b.get("resolved"))
    return [(pos, by_el, None, None) for pos, by_el in sorted(groups.items())], "single fits"


def _fitted_gaps(record, positions_by_id):
    """[(outer_um, inner_um, statement)] of one crystal."""
    model = record.get("crystal_model")
    if model and model.get("gaps") is not None:
        out = []
        for g in model["gaps"]:
            older, younger = positions_by_id.get(g["older"]), positions_by_id.get(g["younger"])
            if older is not None and younger is not None:
                out.append((younger, older, statement_of(g.get("days"))))
        return out, "crystal_model"
    out = []
    for g in record.get("recharge_intervals_days") or []:
        td = {k: g.get(k) for k in ("median", "p2_5", "p97_5")}
        if g.get("resolved") and g.get("median") is not None:
            out.append((g["outer_um"], g["inner_um"], statement_of(td)))
    return out, "single-fit intervals"


# --------------------------------------------------------------------------- scoring
def score(results: dict, truth: dict) -> dict:
    """The four figures and their details."""
    truth_by_key = {(c["sample"], c["crystal"]): c for c in truth["crystals"]}
    records = {(r["sample"], r["crystal"]): r for r in results.get("crystals") or []}
    n_bound = n_dated_ok = n_dated_any = 0
    n_joint = n_joint_ok = 0
    statements = {"consistent": 0, "total": 0, "unmatched": 0, "by_kind": {}, "by_element": {}}
    crystals_ok = crystals_gap = 0
    sources = set()
    failures = []
    by_event = {}
    for key, tc in truth_by_key.items():
        rec = records.get(key)
        tb = tc["boundaries"]
        n_bound += len(tb)
        if tc["gaps"]:
            crystals_gap += 1
        if rec is None or rec.get("error"):
            failures.append(f"{key[0]}/{key[1]}: no result" + (f" ({rec['error']})" if rec else ""))
            for b in tb:
                ev = by_event.setdefault(b["event"], {"boundaries": 0, "found": 0, "dated": 0, "dated_true": 0})
                ev["boundaries"] += 1
            continue
        fitted, source = _fitted_boundaries(rec)
        sources.add(source)
        matched = {}
        positions_by_id = {}
        for pos, by_el, joint, bid in fitted:
            if bid is not None:
                positions_by_id[bid] = pos
            tbound = _match(pos, tb)
            sts = list(by_el.items()) + ([("joint", joint)] if joint is not None else [])
            for el, st in sts:
                if st["kind"] == "none":
                    continue
                statements["total"] += 1
                kind = statements["by_kind"].setdefault(st["kind"], [0, 0])
                source = statements["by_element"].setdefault(str(el), [0, 0])
                kind[1] += 1
                source[1] += 1
                if tbound is None:
                    statements["unmatched"] += 1
                    continue
                if consistent(st, tbound["age_days"]):
                    statements["consistent"] += 1
                    kind[0] += 1
                    source[0] += 1
            if tbound is not None:
                matched.setdefault(tbound["id"], []).append((by_el, joint))
        for b in tb:
            found = matched.get(b["id"], [])
            # dates stated for this boundary: each element's own, and the joint age of the whole-crystal model
            dates = [st for by_el, joint in found for st in [*by_el.values(), joint]
                     if st is not None and st["kind"] == "date"]
            ev = by_event.setdefault(b["event"], {"boundaries": 0, "found": 0, "dated": 0, "dated_true": 0})
            ev["boundaries"] += 1
            ev["found"] += bool(found)
            ev["dated"] += bool(dates)
            if dates:
                n_dated_any += 1
            if any(consistent(st, b["age_days"]) for st in dates):
                n_dated_ok += 1
                ev["dated_true"] += 1
            else:
                failures.append(f"{key[0]}/{key[1]} {b['id']} ({b['event']}, {b['age_days']:.3g} d at "
                                f"{b['position_um']:.1f} µm): " + (_describe(found) if found else "not found"))
            joints = [j for _, j in found if j is not None and j["kind"] == "date"]
            if joints:
                n_joint += 1
                n_joint_ok += bool(consistent(joints[0], b["age_days"]))
        # gaps
        if tc["gaps"]:
            gaps, _ = _fitted_gaps(rec, positions_by_id)
            pos_of = {b["id"]: b["position_um"] for b in tb}
            all_ok = True
            for g in tc["gaps"]:
                outer, inner = pos_of[g["younger"]], pos_of[g["older"]]
                cands = [st for o, i, st in gaps if abs(o - outer) <= MATCH_UM and abs(i - inner) <= MATCH_UM]
                if not any(consistent(st, g["days"]) for st in cands):
                    all_ok = False
            crystals_ok += all_ok
    events = _score_events(results.get("population") or {}, truth)
    figures = {
        "boundaries_dated_true": _frac(n_dated_ok, n_bound),
        "boundaries_dated_any": _frac(n_dated_any, n_bound),
        "joint_age_true": _frac(n_joint_ok, n_joint) if n_joint else None,
        "statements_consistent": _frac(statements["consistent"], statements["total"]),
        "crystals_gaps_true": _frac(crystals_ok, crystals_gap),
        "events_pass": events["pass"],
    }
    return {
        "figures": figures,
        "by_event": dict(sorted(by_event.items())),
        "counts": {"boundaries": n_bound, "dated_true": n_dated_ok, "dated_any": n_dated_any,
                   "joint_dated": n_joint, "joint_true": n_joint_ok,
                   "statements": statements, "crystals_with_gaps": crystals_gap, "crystals_gaps_true": crystals_ok},
        "sources": sorted(sources),
        "events": events,
        "failures": failures,
        "done": bool(all(v is not None and v >= THRESHOLD for k, v in figures.items()
                         if k in ("boundaries_dated_true", "statements_consistent", "crystals_gaps_true"))
                     and events["pass"]),
    }


def _describe(found):
    parts = []
    for by_el, joint in found:
        for el, st in by_el.items():
            parts.append(f"{el} {_fmt_st(st)}")
        if joint is not None:
            parts.append(f"joint {_fmt_st(joint)}")
    return "; ".join(parts)


def _fmt_st(st):
    if st["kind"] == "date":
        return f"{st['median']:.3g} d [{st['lo']:.3g}, {st['hi']:.3g}]"
    if st["kind"] in ("upper_bound", "lower_bound"):
        return ("< " if st["kind"] == "upper_bound" else "> ") + f"{st['bound']:.3g} d"
    return "no statement"


def _frac(a, b):
    return None if not b else a / b


def _event_ok(est, true_age):
    med, lo, hi = est.get("median"), est.get("p2_5"), est.get("p97_5")
    if med is None or lo is None or hi is None:
        return False
    return EVENT_RANGE[0] <= med / true_age <= EVENT_RANGE[1] and lo <= true_age <= hi


def _assign(estimates, truth_events):
    """Pair each true event with the nearest unused estimate in log time (smallest distance first)."""
    pairs = sorted(((abs(math.log(e["median"] / t["age_days"])), i, j)
                    for i, e in enumerate(estimates) if e.get("median")
                    for j, t in enumerate(truth_events)), key=lambda p: p[0])
    used_e, used_t, out = set(), set(), {}
    for _, i, j in pairs:
        if i in used_e or j in used_t:
            continue
        used_e.add(i)
        used_t.add(j)
        out[j] = i
    return out


def _judge(estimates, truth_events):
    pairing = _assign(estimates, truth_events)
    rows = []
    for j, t in enumerate(truth_events):
        i = pairing.get(j)
        est = estimates[i] if i is not None else None
        rows.append({"truth": t["id"], "true_days": t["age_days"], "estimate": est,
                     "recovered": bool(est is not None and _event_ok(est, t["age_days"]))})
    extra = len(estimates) - len(pairing)
    return {"rows": rows, "n_estimated": len(estimates), "extra": extra,
            "pass": all(r["recovered"] for r in rows) and extra == 0}


def _score_events(population, truth):
    truth_events = truth["events"]
    model = population.get("events")
    if isinstance(model, dict) and model.get("events") is not None:
        ests = [dict(e.get("age_days") or {}, id=e.get("id")) for e in model["events"]]
        out = _judge(ests, truth_events)
        out["source"] = f"population events ({model.get('criterion', '?')})"
        return out
    by_element = {}
    for el, data in (population.get("elements") or {}).items():
        ests = [{"id": e["id"], "median": e.get("median_days"), "p2_5": e.get("p2_5_days"),
                 "p97_5": e.get("p97_5_days")} for e in data.get("events") or []]
        by_element[el] = _judge(ests, truth_events)
    if not by_element:
        return {"source": "not available", "pass": False, "rows": [], "n_estimated": 0, "extra": 0}
    best = max(by_element, key=lambda el: (by_element[el]["pass"], sum(r["recovered"] for r in by_element[el]["rows"])))
    out = dict(by_element[best])
    out["source"] = f"single-fit chained events, element {best} (best of {', '.join(sorted(by_element))})"
    out["by_element"] = by_element
    return out


# --------------------------------------------------------------------------- printing
def _pct(x):
    return "not available" if x is None else f"{100.0 * x:.1f} %"


def format_report(s: dict) -> str:
    f, c = s["figures"], s["counts"]
    st = c["statements"]
    lines = [
        f"source of boundary ages: {', '.join(s['sources']) or 'not available'}",
        f"1. recharge boundaries dated with the truth inside the 95 % interval: {_pct(f['boundaries_dated_true'])} "
        f"({c['dated_true']}/{c['boundaries']}; dated at all {c['dated_any']}/{c['boundaries']}) [goal ≥ 90 %]",
    ]
    lines.append("   by event: " + "; ".join(
        f"{e} found {v['found']}/{v['boundaries']}, dated {v['dated']}, truth inside {v['dated_true']}"
        for e, v in s["by_event"].items()))
    if f["joint_age_true"] is not None:
        lines.append(f"   joint (all elements) ages with the truth inside: {_pct(f['joint_age_true'])} "
                     f"({c['joint_true']}/{c['joint_dated']})")
    else:
        lines.append("   joint ages (whole-crystal model): not available")
    kinds = ", ".join(f"{k} {v[0]}/{v[1]}" for k, v in sorted(st["by_kind"].items()))
    lines.append(f"2. statements consistent with the truth: {_pct(f['statements_consistent'])} "
                 f"({st['consistent']}/{st['total']}; {kinds}; at no true boundary {st['unmatched']}) [goal ≥ 90 %]")
    lines.append("   by element: " + ", ".join(f"{k} {v[0]}/{v[1]}" for k, v in sorted(st["by_element"].items())))
    lines.append(f"3. crystals with every gap's truth inside its 95 % interval: {_pct(f['crystals_gaps_true'])} "
                 f"({c['crystals_gaps_true']}/{c['crystals_with_gaps']}) [goal ≥ 90 %]")
    ev = s["events"]
    lines.append(f"4. events ({ev['source']}): {'PASS' if ev['pass'] else 'FAIL'}; "
                 f"{ev['n_estimated']} estimated, {ev['extra']} extra")
    for r in ev["rows"]:
        e = r["estimate"]
        got = "none" if e is None else f"{e['median']:.3g} d [{e['p2_5']:.3g}, {e['p97_5']:.3g}]"
        lines.append(f"   {r['truth']} {r['true_days']:.3g} d -> {got}: {'recovered' if r['recovered'] else 'missed'}")
    lines.append(f"done-when met: {'yes' if s['done'] else 'no'}")
    return "\n".join(lines)


def load(results_path, truth_path):
    rp = Path(results_path)
    if rp.is_dir():
        rp = rp / "results.json"
    return json.loads(rp.read_text(encoding="utf-8")), json.loads(Path(truth_path).read_text(encoding="utf-8"))


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.validation.score",
                                     description="Score campaign results against a validation truth.")
    parser.add_argument("results", help="results folder (or its results.json)")
    parser.add_argument("truth", help="truth.json written by tests.validation.population")
    parser.add_argument("--json", help="also write the figures and details to this file")
    parser.add_argument("--failures", action="store_true", help="list the boundaries that were not dated right")
    args = parser.parse_args(argv)
    try:
        results, truth = load(args.results, args.truth)
    except (OSError, ValueError) as exc:
        print(f"score: {exc}", file=sys.stderr)
        return 2
    try:
        s = score(results, truth)
    except (KeyError, TypeError, ValueError, ZeroDivisionError) as exc:
        print(f"score: {args.results} or {args.truth} does not have the expected layout ({exc!r})", file=sys.stderr)
        return 2
    print(format_report(s))
    if args.failures:
        print("\n".join(["boundaries not dated right:"] + ["  " + x for x in s["failures"]]))
    if args.json:
        Path(args.json).write_text(json.dumps(s, indent=2, default=str) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
