"""A campaign weights its fits by the analyses' 1-sigma precision (``<value>_sd``) when the table gives
one for every analysis fitted, as ``zoneprofile fit`` does; a column with gaps is not used and the
crystal's warnings say so. (Before, ``run`` ignored the column that ``fit`` used.)"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from zoneprofile.campaign import load_campaign


def _laser_task(tmp_path, model, sd_of):
    """Demo crystal p03 (invented, seeded) with Mg from its laser table only, which gets ``Mg_ppm_sd``."""
    from zoneprofile.campaign._run import build_tasks
    from zoneprofile.demo import make_demo

    make_demo(tmp_path, draws=60, only=["p03"])
    toml = next(tmp_path.glob("*.toml"))
    toml.write_text(re.sub(r'^model = "[a-z]+"', f'model = "{model}"', toml.read_text(), flags=re.M))
    probe = next(tmp_path.glob("**/microprobe/*p03.csv"))
    frame = pd.read_csv(probe)
    frame.drop(columns=[c for c in frame.columns if c.startswith("Mg")]).to_csv(probe, index=False)
    laser = next(tmp_path.glob("**/laser/*p03.csv"))
    table = pd.read_csv(laser)
    table["Mg_ppm_sd"] = sd_of(table["Mg_ppm"].to_numpy(float))
    table.to_csv(laser, index=False)
    (task,) = [t for t in build_tasks(load_campaign(toml)) if t["crystal"] == "p03"]
    return task, table


def _capture(monkeypatch, module, name):
    seen = []
    original = getattr(module, name)

    def spy(*args, **kwargs):
        seen.append((args, kwargs))
        return original(*args, **kwargs)

    monkeypatch.setattr(module, name, spy)
    return seen


def test_crystal_model_gets_the_laser_precision(tmp_path, monkeypatch):
    import zoneprofile.diffusion.crystal as crystal_module
    from zoneprofile.campaign._pipeline import process_crystal

    task, table = _laser_task(tmp_path, "crystal", lambda v: np.round(0.03 * v, 3))
    seen = _capture(monkeypatch, crystal_module, "fit_crystal")
    rec = process_crystal(task)
    assert rec["error"] is None and seen
    profile = seen[0][0][0]["Mg"]
    keep = np.isfinite(table["Mg_ppm"].to_numpy(float))
    assert np.allclose(profile["sd"], table["Mg_ppm_sd"].to_numpy(float)[keep])


def test_boundary_fits_get_the_precision_and_a_gap_is_said(tmp_path, monkeypatch):
    import zoneprofile.diffusion as diffusion
    from zoneprofile.campaign._pipeline import process_crystal

    def with_gap(v):
        sd = np.round(0.03 * v, 3)
        sd[5] = np.nan  # one analysis without its precision
        return sd

    task, _ = _laser_task(tmp_path, "boundary", with_gap)
    seen = _capture(monkeypatch, diffusion, "fit_boundary")
    rec = process_crystal(task)
    assert rec["error"] is None and seen
    assert all(kwargs.get("value_sd") is None for _, kwargs in seen)
    assert sum("Mg_ppm_sd is blank or not positive for 1 of the" in w for w in rec["warnings"]) == 1


def test_usable_sd_keeps_the_fitted_analyses_only():
    from zoneprofile.campaign._frames import usable_sd

    x = np.array([0.0, 1.0, 2.0, 3.0])
    v = np.array([5.0, np.nan, 7.0, 8.0])
    warnings = []
    assert np.array_equal(usable_sd(x, v, np.array([0.1, np.nan, 0.2, 0.3]), "Mg_ppm", warnings), [0.1, 0.2, 0.3])
    assert warnings == []  # the gap sits beside a value that is left out anyway
    assert usable_sd(x, v, np.array([0.1, 0.5, 0.0, 0.3]), "Mg_ppm", warnings) is None
    assert warnings and "for 1 of the 3 analyses" in warnings[0]


def test_boundary_fits_weighted_by_the_precision_draw_its_error_bars(tmp_path, monkeypatch):
    import zoneprofile.diffusion as diffusion
    from zoneprofile.campaign._pipeline import process_crystal

    task, table = _laser_task(tmp_path, "boundary", lambda v: np.round(0.03 * v, 3))
    seen = _capture(monkeypatch, diffusion, "fit_boundary")
    rec = process_crystal(task)
    assert rec["error"] is None and seen
    assert all(kwargs.get("value_sd") is not None for _, kwargs in seen)
    curve = rec["boundaries"][0]["curve"]
    bars = np.asarray([np.nan if s is None else s for s in curve["data_sd"]], float)
    data = np.asarray([np.nan if d is None else d for d in curve["data"]], float)
    drawn = np.isfinite(data)
    # each fitted analysis carries the precision of its row (3 % of the value, rounded to 0.001)
    assert np.all(np.isfinite(bars[drawn]))
    assert np.allclose(bars[drawn], np.round(0.03 * data[drawn], 3), atol=0.0015)
