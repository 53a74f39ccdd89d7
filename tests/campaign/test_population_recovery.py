"""Recovery of a known recharge history by a whole campaign (issue 10, "Done when").

A population is written by the validation's own forward model
(tests/validation/physics.py: zone-by-zone growth, Mg and Sr diffusing with the
published laws re-typed from their sources, Crank–Nicolson finite volumes), with
noise, beam and laser-spot convolution and traverse obliquity as in a real
session; the campaign runs on it with the whole-crystal model, and the four
figures are measured against the truth (tests/validation/score.py).

The thresholds are the issue's goals, not tuned to pass: ≥ 90 % of recharge
boundaries dated with the truth inside the 95 % interval, ≥ 90 % of statements
consistent with the truth, ≥ 90 % of crystals with every gap's truth inside its
95 % interval, every event recovered (median within −20 %/+25 %, truth inside
its 95 % interval) and no extra event.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from tests.validation import score as S
from tests.validation.population import CAMPAIGN_NAME, make_population

SEED = 2026


@pytest.mark.slow
def test_campaign_recovers_a_known_recharge_history(tmp_path):
    folder = tmp_path / "population"
    make_population(folder, seed=SEED, model="crystal")
    out = tmp_path / "results"
    proc = subprocess.run([sys.executable, "-m", "zoneprofile", "run", str(folder / CAMPAIGN_NAME),
                           "--out", str(out), "--workers", "2", "--no-cache", "--quiet"],
                          capture_output=True, text=True, timeout=1800)
    assert proc.returncode == 0, proc.stderr
    results = json.loads((out / "results.json").read_text())
    truth = json.loads((folder / "truth.json").read_text())
    s = S.score(results, truth)
    report = S.format_report(s)
    f = s["figures"]
    assert "crystal_model" in s["sources"], report
    assert f["boundaries_dated_true"] >= 0.90, report
    assert f["statements_consistent"] >= 0.90, report
    assert f["crystals_gaps_true"] >= 0.90, report
    assert s["events"]["source"].startswith("population events"), report
    assert s["events"]["pass"], report
