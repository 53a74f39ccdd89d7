"""Without --boundary-um, ``fit`` dates the recharge-like steps the zoning analysis finds, as campaigns do.

Self-consistency on invented olivine profiles made with the project's forward
model (two well separated boundaries, 90 µm apart after 1 day at 1150 °C, where
each diffused zone is a few µm wide, so the sum of two one-step profiles is the
two-step profile to far below the noise). Olivine has no melt-equivalent
fingerprint: a reverse step (Fo rising toward the rim) is recharge-like, as in
campaigns. Run in-process with ``main([...])``.
"""

import json
import re

import numpy as np
import pandas as pd
import pytest

from zoneprofile.cli import main
from zoneprofile.diffusion import simulate_boundary

KW = dict(element="FeMg", mineral="olivine", temperature_c=1150, time_days=1.0, fo2_pa=1e-7, beam_um=2.0)


def _table(tmp_path, steps):
    x = np.arange(0.0, 240.01, 2.0)
    fo = 80.0 + sum(simulate_boundary(x, boundary_um=b, inner=i, outer=o, **KW) - 80.0 for b, i, o in steps)
    rng = np.random.default_rng(7)
    path = tmp_path / "ol.csv"
    pd.DataFrame({"distance_um": x, "Fo": (fo + rng.normal(0, 0.15, x.size)).round(3)}).to_csv(path, index=False)
    return path


def _fit(path, tmp_path, capsys):
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "FeMg", "--mineral", "olivine", "--temperature-c", "1150",
                 "--temperature-sd-c", "10", "--fo2-pa", "1e-7", "--beam-um", "2", "--direction", "[001]",
                 "--draws", "200", "-o", str(out)])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    return json.loads(out.read_text())["fits"], printed.out


def test_recharge_step_dated_not_the_larger_normal_step(tmp_path, capsys):
    # reverse (recharge-like) step of 6 Fo at 60 µm; a larger normal step of 8 Fo at 150 µm
    path = _table(tmp_path, [(60.0, 80.0, 86.0), (150.0, 88.0, 80.0)])
    fits, printed = _fit(path, tmp_path, capsys)
    assert len(fits) == 1
    (fit,) = fits
    assert abs(fit["position_um"] - 60.0) < 3.0
    assert fit["time_days"]["p2_5"] <= KW["time_days"] <= fit["time_days"]["p97_5"]
    warnings = " ".join(fit["warnings"])
    assert "step(s) left undated: 150.0 µm (normal)" in warnings
    assert printed.count("step(s) left undated") == 1


def test_two_equal_recharge_steps_are_both_dated(tmp_path, capsys):
    path = _table(tmp_path, [(60.0, 80.0, 84.0), (150.0, 76.0, 80.0)])
    fits, _ = _fit(path, tmp_path, capsys)
    assert sorted(round(f["position_um"]) for f in fits) == pytest.approx([60, 150], abs=3)
    for f in fits:
        assert f["time_days"]["p2_5"] <= KW["time_days"] <= f["time_days"]["p97_5"]
        assert not any("left undated" in w for w in f["warnings"])


def test_no_recharge_step_the_largest_is_dated_and_the_other_named(tmp_path, capsys):
    # two equal normal steps: one is dated, the other is named, never silently dropped
    path = _table(tmp_path, [(60.0, 84.0, 80.0), (150.0, 88.0, 84.0)])
    fits, _ = _fit(path, tmp_path, capsys)
    (fit,) = fits
    warnings = " ".join(fit["warnings"])
    assert "no recharge-like step" in warnings
    other = 150.0 if abs(fit["position_um"] - 60.0) < 3.0 else 60.0
    listed = re.search(r"step\(s\) left undated: ([0-9.]+) µm \(normal\)", warnings)
    assert listed and abs(float(listed.group(1)) - other) < 3.0
