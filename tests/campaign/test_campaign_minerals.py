"""One olivine crystal through the campaign pipeline (self-consistency, invented data).

The traverse is made with the project's own forward model
(:func:`zoneprofile.diffusion.simulate_boundary`, Fe–Mg in olivine, Dohmen &
Chakraborty 2007 law) and stoichiometric olivine oxides, then run through
read -> recalc -> zones -> fit. Olivine has no melt-equivalent fingerprint, so
a reverse step (Fo rising toward the rim) counts as recharge-like.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from zoneprofile.campaign import build_tasks, load_campaign, process_crystal
from zoneprofile.diffusion import simulate_boundary
from zoneprofile.minerals import olivine_oxides

TRUE_DAYS = 1.0  # a step sharp enough for the zoning stage to see as a step in every noise draw tried


@pytest.fixture(scope="module")
def olivine_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("olivine")
    x = np.arange(0.0, 200.01, 2.0)
    fo = simulate_boundary(x, element="FeMg", mineral="olivine", temperature_c=1150, time_days=TRUE_DAYS,
                           boundary_um=60.0, inner=80.0, outer=86.0, fo2_pa=1e-7, beam_um=2.0)
    rng = np.random.default_rng(7)
    ox = olivine_oxides(fo + rng.normal(0.0, 0.15, x.size))
    table = pd.DataFrame({"Point": np.arange(1, x.size + 1), "distance_um": x})
    for name in ox.columns:
        table[name] = ox[name].round(3)
    table.to_csv(folder / "ol.csv", index=False)
    return folder


def record_for(folder, extra=""):
    (folder / "c.toml").write_text(
        'draws = 300\n[defaults]\nmineral = "olivine"\ntemperature_c = 1150\ntemperature_sd_c = 10\nbeam_um = 2\n'
        f'fo2_pa = 1e-7\n{extra}[samples.S]\n[[crystals]]\nsample = "S"\nid = "ol1"\ntraverse = "ol.csv"\n')
    return process_crystal(build_tasks(load_campaign(folder / "c.toml"))[0])


def test_reverse_olivine_step_is_dated_by_default(olivine_folder):
    r = record_for(olivine_folder)
    assert r["error"] is None, r["error"]
    (b,) = r["boundaries"]
    assert b["element"] == "FeMg" and abs(b["position_um"] - 60.0) < 3.0
    assert b["time_days"]["p2_5"] <= TRUE_DAYS <= b["time_days"]["p97_5"]


def test_listed_position_is_dated_on_its_own_segment(olivine_folder):
    # the listed position stands for the zoning step next to it; it is not cut off by it
    r = record_for(olivine_folder, "boundaries = [60]\n")
    assert r["error"] is None, r["error"]
    (b,) = r["boundaries"]
    assert b["position_um"] == 60.0
    assert b["time_days"]["p2_5"] <= TRUE_DAYS <= b["time_days"]["p97_5"]


def test_quartz_titanium_from_a_trace_table(tmp_path):
    # Ti in quartz (Cherniak, Watson & Wark 2007 law), a reverse Ti step made by the project's forward model
    x = np.arange(0.0, 200.01, 2.0)
    ti = simulate_boundary(x, element="Ti", mineral="quartz", temperature_c=1000, time_days=200.0,
                           boundary_um=70.0, inner=50.0, outer=90.0, beam_um=3.0)
    rng = np.random.default_rng(3)
    pd.DataFrame({"distance_um": x, "Ti_ppm": (ti + rng.normal(0.0, 1.0, x.size)).round(2)}).to_csv(
        tmp_path / "q.csv", index=False)
    head = ('draws = 300\n[defaults]\nmineral = "quartz"\ntemperature_c = 1000\ntemperature_sd_c = 10\n'
            'trace_beam_um = 3\ntrace_beam_shape = "gaussian"\n[samples.S]\n[[crystals]]\nsample = "S"\nid = "q1"\n')
    (tmp_path / "c.toml").write_text(head + 'trace = "q.csv"\n')
    r = process_crystal(build_tasks(load_campaign(tmp_path / "c.toml"))[0])
    assert r["error"] is None, r["error"]
    (b,) = r["boundaries"]
    assert b["element"] == "Ti" and abs(b["position_um"] - 70.0) < 3.0
    assert b["time_days"]["p2_5"] <= 200.0 <= b["time_days"]["p97_5"]
    # a quartz crystal with a microprobe traverse is refused when the campaign is read
    (tmp_path / "c.toml").write_text(head + 'traverse = "q.csv"\n')
    from zoneprofile._validation import InputError

    with pytest.raises(InputError, match="line 12, key 'traverse' of crystal #1: quartz"):
        load_campaign(tmp_path / "c.toml")
