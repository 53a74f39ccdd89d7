"""An event whose own gap is only bounded above is dated between the younger event and its bound.

Ages are ordered by construction (t_k > t_{k+1}), so P(t_k < a) <= P(t_{k+1} < a): the younger
event's 2.5 % point is a 2.5 % point of the older age too, and with the older event's 97.5 %
upper bound it makes an interval of at least 95 %. The crystal is made by the independent forward
model of the validation package (tests/validation/physics.py: finite volumes, Crank–Nicolson),
with two recharges 4 days apart, which the Mg profile cannot separate at 990 °C.
"""

import math

import numpy as np
import pytest

from zoneprofile.diffusion.crystal import _concordance


def _crystal(seed):
    from tests.validation import physics

    fine = 0.25
    depths = [130.0, 57.0, 14.0]
    ages = [94.5, 90.5, 7.36]
    t_c = 990.0
    centre = depths[0] + 220.0
    edges = np.arange(int(round(centre / fine)) + 1) * fine
    z = 0.5 * (edges[:-1] + edges[1:])
    zones = [(55.0, 52.0), (72.0, 66.0), (75.0, 70.0), (80.0, 75.0)]  # (deep side, rim side), core first
    bounds = [centre, *depths, 0.0]
    an = np.empty_like(z)
    for j, (a_in, a_out) in enumerate(zones):
        lo, hi = bounds[j + 1], bounds[j]
        inside = (z >= lo) & (z < hi) if j else z >= lo
        an[inside] = a_out + (a_in - a_out) * (z[inside] - lo) / (hi - lo)
    cells = [int(round(d / fine)) for d in depths]
    durations = [ages[0] - ages[1], ages[1] - ages[2], ages[2]]
    length = depths[0] + 140.0
    rng = np.random.default_rng(seed)
    an_x = np.arange(0.0, length + 1e-9, 2.0)
    an_m = physics.measure(z, an, an_x, width_um=3.0, shape="gaussian") + rng.normal(0.0, 0.35, an_x.size)
    la_x = np.arange(2.5, length - 2.0 + 1e-9, 2.5)
    c = physics.grow_and_diffuse(edges, an, cells, [12000.0 * 1.5 ** k for k in range(4)], durations,
                                 element="Mg", temperature_c=t_c)
    v = physics.measure(z, c, la_x, width_um=5.0, shape="square")
    v = v * (1.0 + 0.02 * rng.standard_normal(v.size))
    prof = {"Mg": {"distance_um": la_x, "value": v, "beam_um": 5.0, "beam_shape": "square"}}
    return prof, depths, ages, an_x, an_m, t_c


@pytest.mark.slow
def test_bounded_gap_gives_an_interval_between_younger_age_and_bound():
    from zoneprofile.diffusion.crystal import fit_crystal

    n_converted = 0
    for seed in (1,):
        prof, depths, ages, an_x, an_m, t_c = _crystal(seed)
        rec = fit_crystal(prof, mineral="plagioclase", positions_um=depths, temperature_c=t_c, an_distance_um=an_x,
                          an=an_m, an_beam_um=3.0, obliquity=None, draws=400, seed=seed).to_record()
        b1, b2 = rec["boundaries"][0], rec["boundaries"][1]
        gap = rec["gaps"][0]["days"]
        assert gap["statement"] == "upper_bound"  # the 4-day gap is not resolved
        a1 = b1["age_days"]
        if a1.get("interval_from"):
            n_converted += 1
            assert a1["statement"] == "date"
            assert a1["p2_5"] == b2["age_days"]["p2_5"]
            assert a1["p97_5"] == a1["upper_bound"]
            assert a1["p2_5"] <= a1["median"] <= a1["p97_5"]
            assert a1["p2_5"] <= ages[0] <= a1["p97_5"]
    assert n_converted == 1


def test_concordance_of_intervals_made_of_bounds_uses_overlap():
    a = {"statement": "date", "median": 100.0, "p2_5": 60.0, "p97_5": 150.0, "interval_from": "x"}
    b = {"statement": "date", "median": 120.0, "p2_5": 90.0, "p97_5": 140.0}
    far = {"statement": "date", "median": 900.0, "p2_5": 400.0, "p97_5": 2000.0}
    draws = np.full(10, 100.0)
    assert _concordance({"Mg": (a, draws), "Sr": (b, draws * 5)})["status"] == "concordant"
    assert _concordance({"Mg": (a, draws), "Sr": (far, draws)})["status"] == "discordant"
