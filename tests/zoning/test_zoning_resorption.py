"""Resorption surfaces, their evidence, species and mantles, the zone table."""

import numpy as np
import pandas as pd
import pytest

from zoneprofile.zoning import analyse_zoning, feldspar_species, species_change, synthetic_case, \
    synthetic_zoned_profile


def test_resorption_surface_found_alone_over_seeds():
    # self-consistency on invented data: one reverse step of 8-18 mol% on normally zoned growth
    for seed in range(8):
        x, y, truth = synthetic_case("resorption", seed)
        res = analyse_zoning(x, y)
        true = truth["steps"][0]
        assert len(res.resorption_surfaces) == 1, seed
        assert len(res.steps) == 1, seed
        assert res.resorption_surfaces[0]["position_um"] == pytest.approx(true["position_um"], abs=2.0)
        assert res.resorption_surfaces[0]["evidence"][0].startswith("An +")


def test_evidence_lists_other_columns():
    x, an, _ = synthetic_zoned_profile(seed=5, length_um=100, spacing_um=1.0, noise_sd=0.4, core_value=50,
                                       steps=[(50.0, 15.0)])
    rng = np.random.default_rng(1)
    rim = x < 50
    extra = pd.DataFrame({"FeO": np.where(rim, 0.55, 0.35) + rng.normal(0, 0.02, x.size),
                          "Mg_ppm": np.where(rim, 480.0, 300.0) + rng.normal(0, 10, x.size),
                          "K2O": 0.1 + rng.normal(0, 0.01, x.size)})
    res = analyse_zoning(x, an, extra=extra)
    ev = res.resorption_surfaces[0]["evidence"]
    assert ev[0].startswith("An +") and "over" in ev[0]
    assert any(e.startswith("FeO +0.2") and e.endswith("wt%") for e in ev)
    assert any(e.startswith("Mg_ppm +18") for e in ev)
    assert not any(e.startswith("K2O") for e in ev)  # no change, no evidence


def test_map_evidence_merged_by_position():
    x, y, truth = synthetic_case("resorption", 0)
    pos = truth["steps"][0]["position_um"]
    res = analyse_zoning(x, y, boundary_evidence=[{"position_um": pos + 1.0, "evidence": ["truncated zones"]},
                                                  {"position_um": 20.0, "evidence": ["embayment"]}])
    by_source = {s["source"]: s for s in res.resorption_surfaces}
    assert "map: truncated zones" in by_source["profile+map"]["evidence"]
    assert by_source["map"]["position_um"] == 20.0


def test_normal_steps_are_not_resorption():
    x, y, _ = synthetic_zoned_profile(seed=2, length_um=120, spacing_um=1.5, noise_sd=0.5,
                                      steps=[(60.0, -12.0)])
    res = analyse_zoning(x, y)
    assert len(res.steps) == 1 and res.resorption_surfaces == []


@pytest.mark.parametrize("an, name", [(5, "albite"), (10, "oligoclase"), (29.9, "oligoclase"), (30, "andesine"),
                                      (50, "labradorite"), (70, "bytownite"), (89.9, "bytownite"),
                                      (90, "anorthite"), (100, "anorthite")])
def test_plagioclase_names(an, name):
    # docs/references.md §2 (common practice): albite 0-10, oligoclase 10-30, andesine 30-50,
    # labradorite 50-70, bytownite 70-90, anorthite 90-100 mol% An
    assert feldspar_species([an]) == [name]


def test_alkali_feldspar_core_mantled_by_plagioclase():
    # docs/references.md §2: sanidine Or-rich; a change of feldspar series is a mantle
    x, an, _ = synthetic_zoned_profile(seed=1, length_um=100, spacing_um=1.0, noise_sd=0.4, core_value=3.0,
                                       steps=[(40.0, 42.0)])
    or_ = np.where(x < 40, 1.5, 45.0)
    res = analyse_zoning(x, an, extra=pd.DataFrame({"Or": or_}))
    assert len(res.mantles) == 1
    assert res.mantles[0]["inner_species"] == "sanidine"
    assert res.mantles[0]["outer_species"] == "andesine"
    assert res.zones[0]["species"] == "sanidine"
    assert species_change(["andesine"] * 3, ["andesine"] * 3) is None


def test_zone_table_core_to_rim_with_trends():
    x, y, _ = synthetic_zoned_profile(seed=3, length_um=150, spacing_um=1.0, noise_sd=0.3, core_value=70,
                                      steps=[(75.0, -15.0)], trend_per_um=-0.1)
    res = analyse_zoning(x, y)
    table = res.zones_table()
    assert list(table["zone"]) == [1, 2]
    assert table["start_um"].iloc[0] == pytest.approx(75.0, abs=1.0)  # core zone spans 75-150 µm
    assert table["end_um"].iloc[0] == pytest.approx(150.0)
    # truth: -0.1 mol% per µm toward the rim in both zones (normal zoning)
    assert table["trend_per_um"].to_numpy() == pytest.approx([-0.1, -0.1], abs=0.02)
    assert list(table["kind"]) == ["normal", "normal"]
    flat = analyse_zoning(*synthetic_case("noise", 1)[:2])
    assert [z["kind"] for z in flat.zones] == ["flat"]
