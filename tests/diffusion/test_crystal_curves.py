"""The whole-crystal model keeps its best-fit profile of each element (``crystal_model.curves``).

Checks: the stored curve is the prediction the fit's χ² is made of (the sum of
squared weighted differences to the data equals the record's ``chi2`` when no
An is fitted: an invariant), and it follows Crank's (1975, eq. 2.14) erf
solution of the noise-free profile to well within the noise (a least-squares
curve with 4 free parameters over 119 points has an RMS error of about
σ·√(4/119) ≈ 0.18 σ; the bound 0.5 σ allows for the model's cell and grid
discretisation, common practice).
"""

import math

import numpy as np
from scipy.special import erf

from zoneprofile.diffusion.crystal import fit_crystal
from zoneprofile.diffusion.laws import default_law

DAY = 86400.0


def test_crystal_model_keeps_its_best_fit_profile():
    law = default_law("Ti", "quartz")
    dt_um2 = float(law.d_m2_s(850.0)) * 300.0 * DAY * 1e12
    x = np.arange(0.5, 60.0, 0.5)
    sd = 0.5
    truth = 40.0 + 60.0 * 0.5 * (1 + erf((x - 30.0) / (2 * math.sqrt(dt_um2))))
    y = truth + np.random.default_rng(5).normal(0, sd, x.size)
    rec = fit_crystal({"Ti": {"distance_um": x, "value": y, "sd": np.full(x.size, sd)}}, mineral="quartz",
                      positions_um=[30.0], temperature_c=850.0, rim="closed", obliquity=None, draws=100,
                      seed=1).to_record()
    curve = rec["curves"]["Ti"]
    model = np.asarray(curve["model"])
    assert np.array_equal(curve["distance_um"], x)
    assert math.isclose(float(np.sum(((model - y) / sd) ** 2)), rec["chi2"], rel_tol=1e-9)
    assert float(np.sqrt(np.mean((model - truth) ** 2))) < 0.5 * sd
