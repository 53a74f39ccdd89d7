"""A boundary the data cannot date at all: no bound is claimed and nothing overflows.

For a trace element in plagioclase the equilibrium profile keeps a step where
An steps (the partition coefficient depends on An; Bindeman et al. 1998), so a
Sr profile grown from one melt across an An step fits an undiffused step and a
fully relaxed profile alike. The fit must say so rather than report an upper
bound set by the edge of the range it searched.
"""

import numpy as np
import pytest

from zoneprofile.chronology import population_summary
from zoneprofile.diffusion import fit_boundary, simulate_boundary


@pytest.mark.parametrize("days", [1e5, 1e6])
def test_equilibrium_profile_gives_no_time_and_no_bound(days):
    x = np.arange(2.0, 120.0, 4.0)
    an = np.where(x < 40, 75.0, 65.0)
    y = simulate_boundary(x, element="Sr", mineral="plagioclase", temperature_c=1000, time_days=days,
                          boundary_um=40, inner=900.0, outer=900.0, an=an, beam_um=5, beam_shape="square")
    y = y * (1 + 0.01 * np.random.default_rng(3).standard_normal(x.size))
    # warnings are errors in this suite: an overflow of 10**log_tau would fail here
    r = fit_boundary(x, y, element="Sr", mineral="plagioclase", temperature_c=1000, temperature_sd_c=15, an=an,
                     boundary_um=40, beam_um=5, beam_shape="square", draws=500, seed=1)
    assert not r.resolved
    assert r.time_days["upper_bound"] is None
    assert any("do not bound the time" in w for w in r.warnings)
    assert "do not bound the time" in r.report() and "time <" not in r.report()
    assert np.all(np.isfinite(r.time_draws_days))
    # the draws stay inside the range of D·t the fit searched
    lo, hi = np.min(r.log10_dt_draws), np.max(r.log10_dt_draws)
    assert hi - lo < 10.0


def _record(upper_bound, p97_5):
    td = {"best": 5.0, "median": 5.0, "p2_5": 1.0, "p16": 2.0, "p84": 8.0, "p97_5": p97_5,
          "upper_bound": upper_bound}
    b = {"position_um": 30.0, "element": "Sr", "kind": "reverse", "law": "x", "time_days": td, "resolved": False,
         "time_draws_days": [1.0, 5.0, 9.0]}
    return {"sample": "S", "crystal": "c1", "mineral": "plagioclase", "error": None, "boundaries": [b]}


def test_chronology_uses_the_fit_upper_bound_and_keeps_unbounded_out():
    pop = population_summary([_record(40.0, 1e9)], n_bootstrap=0)
    (u,) = pop["unresolved"]
    assert u["upper_bound_days"] == 40.0  # the fit's bound, not the 97.5th percentile of its draws
    pop = population_summary([_record(None, 1e9)], n_bootstrap=0)
    (u,) = pop["unresolved"]
    assert u["upper_bound_days"] is None and "do not bound" in u["note"]
