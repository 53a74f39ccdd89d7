"""`zoneprofile demo` end to end: the report recovers what the generator planted.

The demo is written and run once per session (``demo_dir``); the checks
compare the report with ``truth.json``, the seeded forward model's own record
of the two recharge events and every boundary it made. Invented data: this is
a self-consistency test of the whole pipeline, the science itself is checked
against outside sources in the stage tests.
"""

from __future__ import annotations

import json
import re
import shutil
import tomllib

import pytest

from conftest import run_cli, run_cli_process

#: A dated boundary is the planted one when within this distance (µm): about
#: two analysis steps, the zoning stage's position precision on the demo data.
MATCH_UM = 5.0


def dated_boundaries(rec):
    """A crystal's dated boundaries as (position µm, time summary, source): the whole-crystal
    model's joint ages where the crystal was dated by it, else its single (Mg) fits."""
    cm = rec.get("crystal_model") or {}
    if cm.get("boundaries"):
        return [(b["position_um"], b["age_days"], "crystal model") for b in cm["boundaries"]]
    return [(b["position_um"], b["time_days"], "single fit") for b in rec["boundaries"] if b["element"] == "Mg"]


def match_truth(results, truth):
    """Pair each planted boundary with the dated boundary nearest to it."""
    out = []
    records = {(r["sample"], r["crystal"]): r for r in results["crystals"]}
    for c in truth["crystals"]:
        rec = records[(c["sample"], c["crystal"])]
        for b in c["boundaries"]:
            near = [d for d in dated_boundaries(rec) if abs(d[0] - b["position_um"]) <= MATCH_UM]
            near.sort(key=lambda d: abs(d[0] - b["position_um"]))
            out.append({"crystal": c["crystal"], "truth_um": b["position_um"], "truth_days": b["time_days"],
                        "dated": near[0][1] if near else None, "source": near[0][2] if near else None})
    return out


@pytest.fixture(scope="session")
def demo_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "zoneprofile-demo"
    code, _, err = run_cli_process("demo", "--out", out)  # the README's first command, as a user runs it
    assert code == 0, err
    return out


@pytest.fixture(scope="session")
def results(demo_dir):
    return json.loads((demo_dir / "results.json").read_text())


@pytest.fixture(scope="session")
def truth(demo_dir):
    return json.loads((demo_dir / "campaign" / "truth.json").read_text())


def test_demo_writes_report_results_tables_figures_and_campaign(demo_dir, results):
    page = (demo_dir / "report.html").read_text()
    assert len(re.findall(r"<img ", page)) >= 4
    # the hazard caution the project's rules require, in words
    text = " ".join(re.sub(r"<[^>]+>", " ", page).split())
    for words in ("inform", "do not replace", "hazard assessment", "observatory", "local authorities"):
        assert words in text, words
    assert list((demo_dir / "tables").glob("*.csv"))
    assert list((demo_dir / "figures").glob("*.png")) and list((demo_dir / "figures").glob("*.svg"))
    campaign = demo_dir / "campaign" / "emberfell.toml"
    doc = tomllib.loads(campaign.read_text())
    samples = {c["sample"] for c in doc["crystals"]}
    assert len(doc["crystals"]) >= 6 and len(samples) == 2
    assert sum("map" in c for c in doc["crystals"]) == 1
    assert all(r["error"] is None for r in results["crystals"])


def test_results_hold_dated_boundaries_intervals_and_provenance(results, demo_dir):
    # the demo campaign uses the whole-crystal model: crystals of two boundaries are dated by it
    # (ages and the gap between them), one-boundary crystals by today's single fit, and each
    # record says which way it went
    by_model = {"crystal": [], "boundary": []}
    for r in results["crystals"]:
        by_model[r["model"]["used"]].append(r)
        assert r["model"]["requested"] == "crystal"
    assert len(by_model["crystal"]) >= 4
    for r in by_model["crystal"]:
        cm = r["crystal_model"]
        assert len(cm["boundaries"]) == 2 and len(cm["gaps"]) == 1 and cm["method"] == "whole-crystal"
        assert r["boundaries"] == [] and r["recharge_intervals_days"] == []  # no per-boundary Monte Carlo
    for r in by_model["boundary"]:
        assert r["crystal_model"] is None and len(r["boundaries"]) == 1
        assert r["model"]["note"].startswith("one boundary")
    boundaries = [b for r in results["crystals"] for b in r["boundaries"]]
    prov = results["provenance"]
    assert prov["software"]["name"] == "zoneprofile"
    # every input is listed with the sha256 of its bytes (hashlib, an independent recomputation)
    import hashlib

    listed = {i["path"]: i["sha256"] for i in prov["inputs"]}
    for rel, digest in listed.items():
        assert hashlib.sha256((demo_dir / "campaign" / rel).read_bytes()).hexdigest() == digest
    assert len(listed) >= 8
    laws = prov["laws"]
    assert laws and all(law.get("citation") for law in (laws.values() if isinstance(laws, dict) else laws))
    assert "curve" not in boundaries[0] and "time_draws_days" not in boundaries[0]
    # the crystal-model ages and gaps are in the tables too
    import pandas as pd

    gaps = pd.read_csv(demo_dir / "tables" / "gaps.csv")
    assert set(gaps["source"]) == {"crystal model"} and len(gaps) == len(by_model["crystal"])
    ages = pd.read_csv(demo_dir / "tables" / "crystal_model.csv")
    assert len(ages[ages["element"] == "joint"]) == 2 * len(by_model["crystal"])


def test_each_planted_boundary_is_found_and_its_time_recovered(results, truth):
    matches = match_truth(results, truth)
    planted = sum(len(c["boundaries"]) for c in truth["crystals"])
    found = [m for m in matches if m["dated"] is not None and m["dated"]["statement"] == "date"]
    assert len(found) == planted, matches  # every planted recharge boundary was dated
    inside = [m for m in found if m["dated"]["p2_5"] <= m["truth_days"] <= m["dated"]["p97_5"]]
    assert len(inside) >= 0.8 * len(found), matches
    # and no boundary is dated where nothing was planted
    n_dated = sum(len(dated_boundaries(r)) for r in results["crystals"])
    assert n_dated == len(found)


def test_each_crystal_gap_holds_the_true_time_between_the_recharges(results, truth):
    """The gap between a crystal's two recharges (the whole-crystal model's residence time)."""
    true_gap = abs(truth["events"][0]["time_days"] - truth["events"][1]["time_days"])
    gaps = [g["days"] for r in results["crystals"] for g in (r["crystal_model"] or {}).get("gaps", [])]
    two = sum(1 for c in truth["crystals"] if len(c["boundaries"]) == 2)
    assert len(gaps) == two
    for g in gaps:
        assert g["statement"] == "date" and g["p2_5"] > 0  # ordered by construction: never negative
    inside = [g for g in gaps if g["p2_5"] <= true_gap <= g["p97_5"]]
    assert len(inside) >= 0.8 * len(gaps), gaps


def test_the_mapped_crystal_is_corrected_for_obliquity(results, truth):
    mapped = next(c for c in truth["crystals"] if c["kind"] == "map")
    rec = next(r for r in results["crystals"] if r["crystal"] == mapped["crystal"])
    assert rec["map"]["calibration"]["r2"] >= 0.98
    angles = [b["obliquity_deg"] for b in rec["boundaries"]]
    if rec["crystal_model"]:
        assert rec["crystal_model"]["obliquity"]["kind"] == "measured"
        angles.append(rec["crystal_model"]["obliquity"]["deg"])
    assert angles
    for angle in angles:
        assert angle == pytest.approx(mapped["boundaries"][0]["obliquity_deg"], abs=5)


def test_the_two_recharge_events_are_found(results, truth):
    """The population's events (results["population"]["events"], E1 the oldest)."""
    block = results["population"]["events"]
    events = block["events"]
    assert len(events) == 2, [(e["age_days"], e["n_boundaries"]) for e in events]
    assert [e["id"] for e in events] == ["E1", "E2"]
    assert events[0]["age_days"]["median"] > events[1]["age_days"]["median"]  # E1 the oldest
    planted = sorted(truth["events"], key=lambda e: -e["time_days"])
    n_analysed = len(results["crystals"])
    for event, true in zip(events, planted):
        age = event["age_days"]
        assert age["statement"] == "date" and age["p2_5"] <= true["time_days"] <= age["p97_5"]
        holders = [c for c in truth["crystals"] if any(b["event"] == true["name"] for b in c["boundaries"])]
        assert event["n_crystals"] == len(holders)
        assert event["fraction_of_crystals"] == pytest.approx(len(holders) / n_analysed)
        for sample in {c["sample"] for c in truth["crystals"]}:
            assert event["by_sample"][sample] == sum(1 for c in holders if c["sample"] == sample)


def test_the_report_shows_the_chronology(demo_dir):
    text = " ".join(re.sub(r"<[^>]+>", " ", (demo_dir / "report.html").read_text()).split())
    assert "Recharge events of the population" in text
    # at a glance: the population's two events (every crystal), not the single-fit crystals' own
    glance = text[text.index("Recharge events at a glance"):text.index("Recharge chronology For")]
    assert " E1 all " in glance and " E2 all " in glance and "Mg-E" not in glance
    # each crystal dated by the whole-crystal model shows its ages and its gap
    assert text.count("Whole-crystal model: ages (oldest first)") == 5
    assert text.count("Whole-crystal model: time between recharges") == 5
    assert "No boundary dated in this crystal" not in text


@pytest.mark.slow  # two worker processes; 3 s idle, 11 s with the machine shared
def test_campaign_reruns_to_the_same_times_with_two_workers(demo_dir, results, tmp_path):
    out = tmp_path / "again"
    code, _, err = run_cli("run", demo_dir / "campaign" / "emberfell.toml", "--out", out, "--workers", "2",
                           "--no-cache", "--quiet")
    assert code == 0, err
    again = json.loads((out / "results.json").read_text())
    assert again["provenance"]["run"]["from_cache"] == []
    first = {(r["sample"], r["crystal"]): dated_boundaries(r) for r in results["crystals"]}
    second = {(r["sample"], r["crystal"]): dated_boundaries(r) for r in again["crystals"]}
    assert first == second
    assert [r["crystal_model"] and r["crystal_model"]["gaps"] for r in results["crystals"]] == [
        r["crystal_model"] and r["crystal_model"]["gaps"] for r in again["crystals"]]


def test_edit_one_temperature_recomputes_one_crystal(demo_dir, tmp_path):
    folder = tmp_path / "campaign"
    shutil.copytree(demo_dir / "campaign", folder)
    toml = folder / "emberfell.toml"
    text = toml.read_text()
    text = text.replace('id = "p04"\n', 'id = "p04"\ntemperature_c = 1010\n')
    toml.write_text(text)
    code, _, err = run_cli("run", toml, "--out", tmp_path / "out")
    assert code == 0, err
    assert "1 computed, 6 from cache, 0 failed" in err
    prov = json.loads((tmp_path / "out" / "results.json").read_text())["provenance"]
    assert prov["run"]["computed"] == ["EF-A/p04"]


def test_demo_refuses_existing_output_without_force(demo_dir):
    before = (demo_dir / "results.json").read_bytes()
    code, out, err = run_cli("demo", "--out", demo_dir)
    assert code == 2 and "--force" in err and len(err.strip().splitlines()) == 1
    assert (demo_dir / "results.json").read_bytes() == before


@pytest.mark.slow
def test_dask_cluster_on_loopback_gives_the_same_times(demo_dir, results, tmp_path):
    """Two demo crystals run on a real local Dask cluster: the same times as the demo run.

    Tasks sent to a scheduler address carry their files' bytes (workers need
    not share the file system); each crystal's draws come from its own seed.
    """
    distributed = pytest.importorskip("distributed")
    import logging

    from zoneprofile.campaign import execute_campaign, load_campaign

    source = (demo_dir / "campaign" / "emberfell.toml").read_text()
    head, *blocks = source.split("[[crystals]]")
    keep = [b for b in blocks if 'id = "p04"' in b or 'id = "p06"' in b]
    assert len(keep) == 2
    folder = tmp_path / "subset"
    shutil.copytree(demo_dir / "campaign" / "microprobe", folder / "microprobe")
    (folder / "subset.toml").write_text(head + "".join("[[crystals]]" + b for b in keep))
    campaign = load_campaign(folder / "subset.toml")
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address="127.0.0.1:0",  # None still binds 8787: clashes
                                  silence_logs=logging.ERROR) as cluster:  # with a second run on one machine
        summary = execute_campaign(campaign, scheduler=cluster.scheduler_address, workers=2, progress=False,
                                   cache=False)
    assert summary.provenance["run"]["scheduler"].startswith("tcp://127.0.0.1:")
    on_cluster = {r["crystal"]: [b["time_days"] for b in r["boundaries"]] for r in summary.records}
    in_demo = {r["crystal"]: [b["time_days"] for b in r["boundaries"]] for r in results["crystals"]
               if r["crystal"] in on_cluster}
    assert on_cluster == in_demo and len(on_cluster["p04"]) == 1
    assert all(f and {"png", "svg"} <= set(f) for f in summary.figures)  # drawn on the workers
