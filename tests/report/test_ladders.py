"""Event ladders in the outputs: results, events.csv, event_members.csv, gaps.csv and the report.

Self-consistency checks on invented records (the sample records of the report
tests, and crystal-model records written here in the shared layout); the
science of the event model is checked in test_event_model.py.
"""

from __future__ import annotations

import csv
import json
import math
import re

import pytest

from zoneprofile.chronology import population_summary
from zoneprofile.report import write_outputs
from zoneprofile.report._sample import sample_records
from zoneprofile.report.ladders import gaps_table, ladders_html, members_table

Z975 = 1.959963984540054  # normal 97.5 % quantile (scipy.stats.norm.ppf)


def _rows(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _records(frame):
    """DataFrame rows as dicts, missing cells as '' (as in the CSV)."""
    return [{k: "" if v is None or (isinstance(v, float) and math.isnan(v)) else v for k, v in r.items()}
            for r in frame.to_dict("records")]


def _td(med, s=0.08):
    return {"median": med, "p2_5": med * 10 ** (-Z975 * s), "p97_5": med * 10 ** (Z975 * s),
            "statement": "date", "upper_bound": None, "lower_bound": None}


def crystal_model_records():
    """Six crystals with a whole-crystal model: three recharges (400, 80, 7 d), gaps, concordance."""
    recs = []
    for i in range(6):
        f = 1.0 + 0.03 * (i % 3)
        ages = [400.0 * f, 80.0 * f, 7.0 * f]
        bs = [{"id": f"B{k + 1}", "position_um": 150.0 - 60 * k, "age_days": _td(a),
               "by_element": {"Mg": _td(a, 0.1), "Sr": _td(a, 0.2)},
               "concordance": {"status": "concordant", "reasons": []}} for k, a in enumerate(ages)]
        if i == 5:  # the youngest boundary too narrow for the beam: an upper bound only
            bs[2]["age_days"] = {"median": None, "p2_5": None, "p97_5": None, "statement": "upper_bound",
                                 "upper_bound": 15.0, "lower_bound": None}
            bs[1]["concordance"] = {"status": "discordant", "reasons": ["temperature"]}
        gaps = [{"older": f"B{k + 1}", "younger": f"B{k + 2}",
                 "days": _td(ages[k] - ages[k + 1], 0.1)} for k in range(2)]
        recs.append({"sample": "S1" if i < 3 else "S2", "crystal": f"k{i}", "error": None, "boundaries": [],
                     "recharge_intervals_days": [],
                     "crystal_model": {"boundaries": bs, "gaps": gaps, "elements": ["Mg", "Sr"],
                                       "temperature_c": 1000.0, "n_draws": 500, "warnings": [],
                                       "method": "whole-crystal"}})
    return recs


def test_population_events_from_crystal_models_in_results_and_tables(tmp_path):
    recs = crystal_model_records()
    pop = population_summary(recs, n_bootstrap=0)
    pe = pop["events"]
    assert [e["id"] for e in pe["events"]] == ["E1", "E2", "E3"]
    for e, t in zip(pe["events"], (400.0, 80.0, 7.0)):
        age = e["age_days"]
        assert age["statement"] == "date" and age["p2_5"] <= t * 1.03 and t <= age["p97_5"]
        assert e["n_crystals"] == 6 and e["by_sample"] == {"S1": 3, "S2": 3}
    assert pe["events"][2]["n_bounds"] == 1  # the upper bound joins the youngest event
    write_outputs(recs, pop, {}, tmp_path, formats=("png",))
    results = json.loads((tmp_path / "results.json").read_text())
    assert results["population"]["events"]["criterion"] == "BIC"
    assert [e["id"] for e in results["population"]["events"]["events"]] == ["E1", "E2", "E3"]
    events = _rows(tmp_path / "tables/events.csv")
    assert [(e["scope"], e["event"]) for e in events] == [("population", f"E{k}") for k in (1, 2, 3)]
    members = _rows(tmp_path / "tables/event_members.csv")
    assert len(members) == 18
    assert [m["event"] for m in members if m["crystal"] == "k0"] == ["E1", "E2", "E3"]
    bound = next(m for m in members if m["crystal"] == "k5" and m["boundary"] == "B3")
    assert bound["statement"] == "upper_bound" and float(bound["upper_bound_days"]) == pytest.approx(15.0)
    gaps = _rows(tmp_path / "tables/gaps.csv")
    assert len(gaps) == 12 and {g["source"] for g in gaps} == {"crystal model"}
    g0 = next(g for g in gaps if g["crystal"] == "k0" and g["older"] == "B1")
    assert (g0["older_event"], g0["younger_event"]) == ("E1", "E2")
    assert float(g0["median_days"]) == pytest.approx(320.0)
    page = (tmp_path / "report.html").read_text()
    text = " ".join(re.sub(r"<[^>]+>", " ", page).split())
    for words in ("Recharge events of the population", "Event ladders, crystal by crystal", "E1 → E2",
                  "discordant (temperature)", "&lt; 15 d", "BIC by number of events"):
        assert words in text or words in page, words


def test_single_fit_population_ladders_and_gaps():
    recs = sample_records(seed=11, samples=("North", "South"), crystals_per_sample=3)
    pop = population_summary(recs, n_bootstrap=0)
    pe = pop["events"]
    # two recharges planted near 300 and 20 days (report sample records)
    assert len(pe["events"]) == 2
    assert pe["events"][0]["age_days"]["median"] > pe["events"][1]["age_days"]["median"]
    n_boundaries = sum(len({round(b["position_um"]) for b in r["boundaries"]}) for r in recs if not r["error"])
    assert len(pe["members"]) + len(pe["excluded"]) == n_boundaries  # none dropped silently
    gaps = _records(gaps_table(recs, pop))
    assert len(gaps) == sum(len(r.get("recharge_intervals_days") or []) for r in recs if not r["error"])
    assert all(g["source"] == "single fits" for g in gaps)
    resolved = [g for g in gaps if g["older_event"] and g["younger_event"]]
    assert resolved and all((g["older_event"], g["younger_event"]) == ("E1", "E2") for g in resolved)
    for m in _records(members_table(pop)):
        if m["event"]:
            probs = dict(x.split(":") for x in m["probabilities"].split("; "))
            assert math.isclose(sum(float(p) for p in probs.values()), 1.0, abs_tol=2e-3)
    assert "Event ladders, crystal by crystal" in ladders_html(recs, pop)
