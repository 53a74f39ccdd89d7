"""Orchestration: the per-crystal cache, interrupted runs, failing crystals, seeds.

These tests exercise the campaign machinery with a light per-crystal function
(``counting_process`` below: a seeded lognormal sample of times), so they run
in a fraction of a second; the real science runs end to end in
``test_demo.py``.
"""

from __future__ import annotations

import json
import textwrap

import numpy as np
import pytest

from zoneprofile._validation import InputError
from zoneprofile.campaign import ResultCache, execute_campaign, load_campaign, process_crystal

CALLS: list[str] = []


def counting_process(task):
    """Record the call; return a crystal record whose draws come from the crystal's seed only."""
    CALLS.append(f"{task['sample']}/{task['crystal']}")
    rng = np.random.default_rng(task["parameters"]["seed"])
    draws = np.exp(rng.normal(np.log(50.0), 0.3, task["parameters"]["draws"]))
    q = np.percentile(draws, [2.5, 16, 50, 84, 97.5])
    boundary = {
        "position_um": 20.0, "fitted_position_um": 20.0, "kind": "reverse", "recharge": None, "element": "Mg",
        "obliquity_deg": None, "mineral": task["mineral"], "law": "x", "law_citation": None, "law_status": None,
        "temperature_c": 1000.0, "temperature_sd_c": 20.0, "resolved": True, "warnings": [],
        "time_days": {"best": float(q[2]), "median": float(q[2]), "p2_5": float(q[0]), "p16": float(q[1]),
                      "p84": float(q[3]), "p97_5": float(q[4]), "upper_bound": None, "lower_bound": None,
                      "statement": "date"},
        "log10_dt_m2": {"best": -10.0}, "d_ref_m2_s": 1e-18, "parameters": {}, "chi2": 1.0, "reduced_chi2": 1.0,
        "n_points": 10, "boundary_fixed": False, "uncertainty_budget_log10_time_sd": {},
        "uncertainty_budget_settings": {}, "obliquity": None, "temperature_nodes": None, "an_profile": {},
        "draws": len(draws), "noise_method": "none", "model_setup": {}, "points": {},
        "time_draws_days": draws.tolist(), "curve": {"distance_um": [], "data": []},
    }
    zones = {"column": "An", "n_points": 1, "noise_sd": 1.0, "noise_source": "given", "steps": [],
             "resorption_surfaces": [], "oscillatory_bands": [], "zones": [], "mantles": [], "temperature_c": 1000.0,
             "warnings": [], "settings": {}, "conventions": {}}
    return {  # the layout of zoneprofile._records.CrystalRecord: the cache gives back only such records
        "sample": task["sample"], "crystal": task["crystal"], "mineral": task["mineral"], "error": None,
        "inputs": [{"path": i["rel"], "sha256": i["sha256"], "role": i["role"]} for i in task["inputs"]],
        "parameters": task["parameters"], "profile": None, "trace_profile": None, "zones": zones,
        "boundaries": [boundary], "recharge_intervals_days": [], "map": None, "model": None, "warnings": [],
        "timing_s": {},
    }


class Interrupt:
    """Stands for the user pressing Ctrl-C (or the machine going down) after ``n`` crystals."""

    def __init__(self, n):
        self.n = n

    def __call__(self, task):
        if len(CALLS) >= self.n:
            raise KeyboardInterrupt
        return counting_process(task)


def campaign_text(n=5, *, temperature_of_third=1000):
    blocks = [textwrap.dedent("""\
        seed = 11
        draws = 200
        [defaults]
        temperature_c = 1000
        [samples.A]
        [samples.B]
        """)]
    for k in range(n):
        sample = "A" if k < 3 else "B"
        t = f"temperature_c = {temperature_of_third}\n" if k == 2 else ""
        blocks.append(f'[[crystals]]\nsample = "{sample}"\nid = "c{k}"\ntraverse = "t{k}.csv"\n{t}')
    return "\n".join(blocks)


@pytest.fixture
def folder(tmp_path):
    for k in range(5):
        (tmp_path / f"t{k}.csv").write_text(f"point,distance_um,An\n1,0,5{k}\n")
    (tmp_path / "c.toml").write_text(campaign_text())
    CALLS.clear()
    return tmp_path


def run(folder, **kw):
    return execute_campaign(load_campaign(folder / "c.toml"), progress=False, process=kw.pop("process", counting_process),
                            **kw)


def medians(summary):
    return {f"{r['sample']}/{r['crystal']}": r["boundaries"][0]["time_days"]["median"] for r in summary.records}


def test_second_run_takes_everything_from_the_cache(folder):
    first = run(folder)
    assert len(first.computed) == 5 and first.from_cache == []
    assert len(ResultCache(folder / ".zoneprofile-cache")) == 5
    CALLS.clear()
    second = run(folder)
    assert CALLS == [] and len(second.from_cache) == 5 and second.computed == []
    assert medians(second) == medians(first)
    assert second.provenance["run"]["from_cache"] == second.from_cache


def test_editing_one_temperature_recomputes_only_that_crystal(folder):
    run(folder)
    (folder / "c.toml").write_text(campaign_text(temperature_of_third=1010))
    CALLS.clear()
    again = run(folder)
    assert CALLS == ["A/c2"]
    assert again.computed == ["A/c2"] and len(again.from_cache) == 4


def test_changing_an_input_byte_or_the_seed_recomputes(folder):
    run(folder)
    (folder / "t4.csv").write_text("point,distance_um,An\n1,0,99\n")
    CALLS.clear()
    run(folder)
    assert CALLS == ["B/c4"]
    (folder / "c.toml").write_text(campaign_text().replace("seed = 11", "seed = 12"))
    CALLS.clear()
    run(folder)
    assert len(CALLS) == 5


def test_interrupted_run_resumes_without_redoing_finished_crystals(folder):
    with pytest.raises(KeyboardInterrupt):
        run(folder, process=Interrupt(3))
    assert len(ResultCache(folder / ".zoneprofile-cache")) == 3
    done_before = list(CALLS)
    CALLS.clear()
    resumed = run(folder)
    assert sorted(resumed.from_cache) == sorted(done_before)
    assert len(CALLS) == 2 and not set(CALLS) & set(done_before)
    # and the resumed campaign equals an uninterrupted one
    ref = execute_campaign(load_campaign(folder / "c.toml"), progress=False, cache=False, process=counting_process)
    assert medians(resumed) == medians(ref)


def test_crystal_that_raises_is_reported_and_not_cached(folder):
    def flaky(task):
        if task["crystal"] == "c1":
            raise RuntimeError("boom")
        return counting_process(task)

    s = run(folder, process=flaky)
    bad = [r for r in s.records if r["error"]]
    assert [(r["crystal"], r["error"]) for r in bad] == [("c1", "internal error (RuntimeError): boom")]
    assert s.failed == [("A/c1", "internal error (RuntimeError): boom")]
    assert len(ResultCache(folder / ".zoneprofile-cache")) == 4
    CALLS.clear()
    run(folder)
    assert CALLS == ["A/c1"]  # tried again next time


def test_corrupt_cache_entry_is_recomputed(folder):
    run(folder)
    files = sorted((folder / ".zoneprofile-cache").glob("??/*.json"))
    files[0].write_text("{ not json")
    CALLS.clear()
    run(folder)
    assert len(CALLS) == 1


def test_cache_can_be_switched_off_or_moved(folder):
    run(folder, cache=False)
    assert not (folder / ".zoneprofile-cache").exists()
    text = campaign_text().replace("seed = 11", 'seed = 11\ncache = "elsewhere/cache"')
    (folder / "c.toml").write_text(text)
    run(folder)
    assert len(ResultCache(folder / "elsewhere" / "cache")) == 5
    (folder / "c.toml").write_text(text.replace('cache = "elsewhere/cache"', "cache = false"))
    CALLS.clear()
    run(folder)
    assert len(CALLS) == 5


def test_seeds_do_not_depend_on_order_or_workers(folder):
    ref = medians(run(folder, cache=False))
    blocks = campaign_text().split("[[crystals]]")
    (folder / "c.toml").write_text(blocks[0] + "".join("[[crystals]]" + b for b in reversed(blocks[1:])))
    assert medians(run(folder, cache=False)) == ref
    pooled = run(folder, cache=False, workers=2)
    assert medians(pooled) == ref


def test_workers_must_be_positive(folder):
    with pytest.raises(InputError, match="at least 1"):
        run(folder, workers=0)


def test_real_pipeline_reports_a_bad_table_in_the_record(tmp_path):
    # a traverse table with a non-numeric cell: the crystal fails with the file, row and column named
    (tmp_path / "bad.csv").write_text("Point,distance_um,SiO2,Al2O3,CaO,Na2O,K2O\n1,0,50,31,14,3.2,0.1\n"
                                      "2,2,50,31,abc,3.2,0.1\n3,4,50,31,14,3.2,0.1\n")
    (tmp_path / "c.toml").write_text('[defaults]\ntemperature_c = 1000\n[samples.A]\n'
                                     '[[crystals]]\nsample = "A"\nid = "x"\ntraverse = "bad.csv"\n')
    from zoneprofile.campaign import build_tasks

    task = build_tasks(load_campaign(tmp_path / "c.toml"))[0]
    record = process_crystal(task)
    assert record["error"].startswith("reading traverse: ")
    assert "bad.csv" in record["error"] and "row 3" in record["error"] and "CaO" in record["error"]
    json.dumps(record)  # a record is plain JSON


def test_unwritable_cache_folder_is_a_note_not_a_crash(folder):
    # the cache path is taken by a plain file, so no folder can be made there (fails for any user)
    (folder / "blocker").write_text("a file, not a folder")
    (folder / "c.toml").write_text(campaign_text().replace("seed = 11", 'seed = 11\ncache = "blocker"'))
    s = run(folder)
    assert len(s.computed) == 5 and not s.failed
    assert any("not writable" in n for n in s.notes)
    assert (folder / "blocker").read_text() == "a file, not a folder"
