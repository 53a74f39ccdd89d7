"""The whole-crystal model stores its best fit for the figures; the curves match an independent solver.

The crystal is made by the reference solver of tests/diffusion/test_crystal_model.py (finite volumes
with the An-coupled flux, matrix exponential by scipy's ``expm_multiply``; no project code), seen
through 4 µm spots with 2 % noise. Tolerances from the noise: the best fit follows the data to
within their noise, so its curve departs from the noise-free truth by much less than the 2 % point
noise (≈ 2 %/√(points per zone) for the levels, a little more near the boundaries where the ages'
uncertainty moves the curve); 2 % rms is allowed. The grown profile is each zone's K(An)·melt: its
levels carry the same least-squares precision; 3 % is allowed away from the fitted positions.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import erf

from test_crystal_model import _reference_crystal, _spots, _three_event_case
from zoneprofile.diffusion.crystal import fit_crystal
from zoneprofile.diffusion.laws import default_law

DAY = 86400.0


def test_stored_curves_follow_the_reference_crystal():
    ages = (400.0, 80.0, 7.0)
    profiles, x, an, shifted, t = _three_event_case(3, ages)
    res = fit_crystal(profiles, mineral="plagioclase", positions_um=shifted, temperature_c=t,
                      temperature_sd_c=0.0, an_distance_um=x, an=an, an_beam_um=4.0, seed=3, obliquity=None,
                      draws=200)
    rec = res.to_record()
    curves = rec["curves"]
    assert set(curves) == {"Mg", "Sr"}
    positions = [110.0, 60.0, 15.0]
    an_zones = [60.0, 78.0, 55.0, 72.0]
    fitted = [b["position_um"] for b in rec["boundaries"]]
    for el, melts in (("Mg", [600, 900, 500, 800]), ("Sr", [500, 700, 450, 650])):
        c = curves[el]
        xs = np.asarray(c["distance_um"])
        assert xs[0] == x[0] and xs[-1] == x[-1] and np.all(np.diff(xs) > 0)
        xf, cf = _reference_crystal(positions, ages, an_zones, melts, el, t)
        truth = _spots(xf, cf, xs, 4.0)
        rms = np.sqrt(np.mean(((np.asarray(c["model"]) - truth) / truth) ** 2))
        assert rms < 0.02, (el, rms)
        xg, cg = _reference_crystal(positions, (3e-9, 2e-9, 1e-9), an_zones, melts, el, t)  # nothing diffused
        grown_truth = np.interp(xs, xg, cg)
        away = np.min(np.abs(xs[:, None] - np.array(positions + fitted)[None, :]), axis=1) > 3.0
        rel = np.abs(np.asarray(c["grown"])[away] - grown_truth[away]) / grown_truth[away]
        assert np.max(rel) < 0.03, (el, float(np.max(rel)))


def test_stored_curve_is_the_fit_and_follows_crank():
    """The curve is the prediction the fit's χ² is made of (evaluated at the analyses: the sum of squared
    weighted differences equals the record's ``chi2`` when no An is fitted, an invariant), and it follows
    Crank's (1975, eq. 2.14) erf solution of the noise-free profile to well within the noise (a
    least-squares curve with 4 free parameters over 119 points has an rms error of about
    σ·√(4/119) ≈ 0.18 σ; the bound 0.5 σ allows for the model's cell and grid discretisation,
    common practice)."""
    law = default_law("Ti", "quartz")
    dt_um2 = float(law.d_m2_s(850.0)) * 300.0 * DAY * 1e12
    x = np.arange(0.5, 60.0, 0.5)
    sd = 0.5
    truth = 40.0 + 60.0 * 0.5 * (1 + erf((x - 30.0) / (2 * math.sqrt(dt_um2))))
    y = truth + np.random.default_rng(5).normal(0, sd, x.size)
    res = fit_crystal({"Ti": {"distance_um": x, "value": y, "sd": np.full(x.size, sd)}}, mineral="quartz",
                      positions_um=[30.0], temperature_c=850.0, rim="closed", obliquity=None, draws=100, seed=1)
    rec = res.to_record()
    at_data = np.asarray(res.objective.curves(res.joint_x, at=x)["Ti"]["model"])
    assert math.isclose(float(np.sum(((at_data - y) / sd) ** 2)), rec["chi2"], rel_tol=1e-9)
    stored = rec["curves"]["Ti"]
    model = np.interp(x, stored["distance_um"], stored["model"])  # 240 positions: linear interpolation
    assert float(np.sqrt(np.mean((model - truth) ** 2))) < 0.5 * sd


def _normal_step_crystal(seed):
    """The reference crystal (independent solver) with a normal An step at 150 µm (62 → 50 mol%) grown
    from the same melt, inside the core zone of three recharges at 400, 80 and 7 d (850 °C), seen through
    4 µm spots with 2 % noise: ``(x, {element: values}, An)``."""
    positions, an_zones, ages, t = [150.0, 110.0, 60.0, 15.0], [62.0, 50.0, 78.0, 55.0, 72.0], \
        (500.0, 400.0, 80.0, 7.0), 850.0
    rng = np.random.default_rng(seed)
    x = np.arange(1.0, 200.0, 2.0)
    values = {}
    for el, melts in (("Mg", [600, 600, 900, 500, 800]), ("Sr", [500, 500, 700, 450, 650])):
        xf, cf = _reference_crystal(positions, ages, an_zones, melts, el, t)
        values[el] = _spots(xf, cf, x, 4.0) * (1 + 0.02 * rng.standard_normal(x.size))
    xf = (np.arange(1100) + 0.5) * 0.2
    zone = np.zeros(xf.size, int)
    for k, p in enumerate(positions):
        zone[xf < p] = k + 1
    an = _spots(xf, np.array(an_zones)[zone], x, 4.0) + rng.normal(0, 0.5, x.size)
    return x, values, an


@pytest.mark.slow  # six whole-crystal fits (about 8 s)
def test_a_normal_step_inside_a_zone_no_longer_biases_the_fit():
    """The reference crystal (independent solver) has a normal An step at 150 µm (62 → 50 mol%) grown
    from the same melt, inside the core zone of the three recharges (400, 80, 7 d). Given the step
    (``an_splits_um``, as a campaign passes the zoning's undated steps), the model fits the data
    (χ² falls to under half: measured 0.19–0.24 of the one-line value over these seeds) and the
    oldest recharge's 95 % interval holds its truth; with one An line through the zone it misfits."""
    t = 850.0
    for seed in (1, 2, 3):
        x, values, an = _normal_step_crystal(seed)
        profiles = {el: {"distance_um": x, "value": y, "beam_um": 4.0} for el, y in values.items()}
        chi2 = {}
        for splits in (None, [150.0]):
            rec = fit_crystal(profiles, mineral="plagioclase", positions_um=[110.0, 60.0, 15.0], temperature_c=t,
                              temperature_sd_c=0.0, an_distance_um=x, an=an, an_beam_um=4.0, seed=seed,
                              obliquity=None, draws=300, an_splits_um=splits).to_record()
            chi2[splits is None] = rec["chi2"]
        oldest = rec["boundaries"][0]["age_days"]
        assert oldest["statement"] == "date" and oldest["p2_5"] <= 400.0 <= oldest["p97_5"], (seed, oldest)
        assert chi2[False] < 0.5 * chi2[True], (seed, chi2)


def test_fit_crystal_command_takes_the_zonings_undated_an_step(tmp_path, capsys):
    """``fit --crystal`` finds the normal An step the user did not list and holds the frozen An step there,
    as a campaign does (the same reference crystal as above, one seed), saying so in the warnings."""
    import json

    import pandas as pd

    from zoneprofile.cli import main

    x, values, an = _normal_step_crystal(1)
    table = {"distance_um": x, **{f"{el}_ppm": y for el, y in values.items()}, "An": an}
    path = tmp_path / "crystal.csv"
    pd.DataFrame(table).to_csv(path, index=False)
    out = tmp_path / "crystal.json"
    code = main(["fit", str(path), "--crystal", "--element", "Mg,Sr", "--mineral", "plagioclase",
                 "--temperature-c", "850", "--temperature-sd-c", "0", "--beam-um", "4", "--draws", "300",
                 "--boundary-um", "110", "60", "15", "--seed", "1", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    rec = json.loads(out.read_text())["crystal_model"]
    notes = [w for w in rec["warnings"] if w.startswith("An steps at")]
    assert len(notes) == 1
    found = float(notes[0].split("An steps at ", 1)[1].split(" µm", 1)[0].split(",")[0])
    assert abs(found - 150.0) <= 4.0  # two analysis steps, the zoning's position precision here
