"""Campaigns with ``model = "crystal"``: the key, and the whole-crystal model inside a crystal's record."""

from __future__ import annotations

import re

import pytest

from zoneprofile._validation import InputError
from zoneprofile.campaign import load_campaign

CAMPAIGN = """\
title = "t"
seed = 3
draws = 200

[defaults]
mineral = "plagioclase"
elements = ["Mg"]
temperature_c = 1000
model = "{model}"

[samples.S1]
comment = "one sample"

[[crystals]]
sample = "S1"
id = "c1"
traverse = "c1.csv"
"""


def _write(folder, model):
    (folder / "c1.csv").write_text("x\n1\n")
    path = folder / "camp.toml"
    path.write_text(CAMPAIGN.format(model=model))
    return path


def test_model_key_default_crystal_and_boundary(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    (tmp_path / "c").mkdir()
    assert load_campaign(_write(tmp_path / "c", "boundary")).crystals[0].parameters["model"] == "boundary"
    c = load_campaign(_write(tmp_path / "a", "crystal"))
    assert c.crystals[0].parameters["model"] == "crystal"
    assert "campaign_seed" in c.crystals[0].parameters  # per-sample temperature draws
    text = CAMPAIGN.replace('model = "{model}"\n', "")
    (tmp_path / "b" / "c1.csv").write_text("x\n1\n")
    (tmp_path / "b" / "camp.toml").write_text(text)
    # the default is the whole-crystal model (it met issue 10's recovery and speed goals)
    assert load_campaign(tmp_path / "b" / "camp.toml").crystals[0].parameters["model"] == "crystal"


def test_model_key_bad_value_names_line(tmp_path):
    with pytest.raises(InputError) as exc:
        load_campaign(_write(tmp_path, "whole"))
    assert "line 9" in str(exc.value) and "model" in str(exc.value)


@pytest.mark.slow
def test_demo_crystals_get_a_whole_crystal_record(tmp_path):
    """Two demo crystals (invented, seeded) run with the crystal model: ids oldest first, truth inside."""
    import json

    from zoneprofile.campaign._run import build_tasks
    from zoneprofile.campaign._pipeline import process_crystal
    from zoneprofile.demo import make_demo

    make_demo(tmp_path, n_crystals=2, draws=300)
    toml = next(tmp_path.glob("*.toml"))
    text = toml.read_text()
    text = re.sub(r'^model = "[a-z]+"', 'model = "crystal"', text, flags=re.M)  # the demo's own choice, pinned
    assert 'model = "crystal"' in text
    toml.write_text(text)
    truth = json.loads((tmp_path / "truth.json").read_text())
    events = sorted(e["time_days"] for e in truth["events"])
    camp = load_campaign(toml)
    for task in build_tasks(camp):
        rec = process_crystal(task)
        assert rec["error"] is None
        assert rec["model"]["used"] == "crystal" and rec["boundaries"] == []  # no per-boundary fits first
        cm = rec["crystal_model"]
        assert cm is not None and cm["method"] == "whole-crystal"
        pos = [b["position_um"] for b in cm["boundaries"]]
        assert pos == sorted(pos, reverse=True)
        for b in cm["boundaries"]:
            s = b["age_days"]
            if s["statement"] == "date":
                # some recharge of the invented history lies inside each dated interval
                assert any(s["p2_5"] <= t <= s["p97_5"] for t in events), (b, events)


def _demo_tasks(tmp_path, model, crystals):
    from zoneprofile.campaign._run import build_tasks
    from zoneprofile.demo import make_demo

    make_demo(tmp_path, draws=100, only=sorted(crystals))
    toml = next(tmp_path.glob("*.toml"))
    text = re.sub(r'^model = "[a-z]+"', f'model = "{model}"', toml.read_text(), flags=re.M)
    toml.write_text(text)
    return [t for t in build_tasks(load_campaign(toml)) if t["crystal"] in crystals]


@pytest.mark.slow  # 5 s under load (a full single-boundary fit); the demo test covers the same path
def test_one_boundary_crystal_is_dated_by_the_single_fit_and_says_so(tmp_path):
    """Demo crystal p04 records one recharge: the whole-crystal model reduces to today's fit."""
    from zoneprofile.campaign._pipeline import process_crystal

    (task,) = _demo_tasks(tmp_path, "crystal", {"p04"})
    rec = process_crystal(task)
    assert rec["error"] is None and rec["crystal_model"] is None
    assert rec["model"]["used"] == "boundary" and "one boundary" in rec["model"]["note"]
    assert [b["element"] for b in rec["boundaries"]] == ["Mg"]


@pytest.mark.slow  # 5 s under load (two full single-boundary fits)
def test_crystal_the_model_refuses_falls_back_to_per_boundary_fits(tmp_path, monkeypatch):
    """When the whole-crystal model refuses a crystal, its boundaries are dated one by one, with a warning."""
    import zoneprofile.diffusion.crystal as crystal_module
    from zoneprofile.campaign._pipeline import process_crystal

    def refuse(*args, **kwargs):
        raise InputError("boundaries closer than the resolution")

    monkeypatch.setattr(crystal_module, "fit_crystal", refuse)
    (task,) = _demo_tasks(tmp_path, "crystal", {"p01"})
    rec = process_crystal(task)
    assert rec["error"] is None and rec["crystal_model"] is None
    assert rec["model"]["used"] == "boundary" and "not run" in rec["model"]["note"]
    assert any("whole-crystal model not run: boundaries closer" in w for w in rec["warnings"])
    assert len(rec["boundaries"]) == 2 and len(rec["recharge_intervals_days"]) == 1


def test_the_zonings_undated_an_steps_reach_the_crystal_model(tmp_path, monkeypatch):
    """Demo crystal p02 (invented) has a normal An step near 297 µm inside the zone of its older recharge:
    the campaign hands it to the model as a place where the frozen An steps (docs/whole-crystal-model.md)."""
    import zoneprofile.diffusion.crystal as crystal_module
    from zoneprofile.campaign._pipeline import process_crystal

    seen = []
    original = crystal_module.fit_crystal

    def spy(*args, **kwargs):
        seen.append(kwargs)
        return original(*args, **kwargs)

    monkeypatch.setattr(crystal_module, "fit_crystal", spy)
    (task,) = _demo_tasks(tmp_path, "crystal", {"p02"})
    rec = process_crystal(task)
    assert rec["error"] is None and rec["crystal_model"] is not None
    splits = seen[0]["an_splits_um"]
    dated = [b["position_um"] for b in rec["crystal_model"]["boundaries"]]
    assert splits and any(abs(s - 297.0) < 5.0 for s in splits)
    assert all(abs(s - p) > 1e-6 for s in splits for p in dated)
