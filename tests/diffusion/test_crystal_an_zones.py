"""Frozen An of the whole-crystal model near its boundaries (zoneprofile.diffusion._crystal_model.AnZones).

References outside the model: a straight line seen through a Gaussian beam
(the line is reproduced exactly where the beam does not reach the step;
a 10 mol% step leaks 10·Φ(−3) = 0.013 mol% into a point 3 beam sd away,
scipy's normal cdf), and the independent forward model of the validation
package (tests/validation/physics.py: finite volumes, Crank–Nicolson).
"""

import math

import numpy as np
import pytest
from scipy.special import ndtr

from zoneprofile.diffusion._crystal_model import AnZones

BEAM_FWHM = 3.0
SIG = BEAM_FWHM / (2.0 * math.sqrt(2.0 * math.log(2.0)))


def _measured_an(x, boundary, inner=(70.0, 0.02), outer=(80.0, -0.4)):
    """A thin outer zone (80 mol% at the boundary, falling 0.4 mol%/µm toward the rim), seen by the beam.

    Each zone is a line; the beam average of a line is the line, so the measured value is the line of
    each side weighted by the share of the beam on that side (exact for a Gaussian beam).
    """
    share_outer = ndtr((boundary - x) / SIG)
    a_in = inner[0] + inner[1] * (x - boundary)
    a_out = outer[0] + outer[1] * (x - boundary)
    # the mean position of the beam's part on each side shifts the line a little (first moment)
    phi = np.exp(-0.5 * ((boundary - x) / SIG) ** 2) / math.sqrt(2.0 * math.pi)
    with np.errstate(divide="ignore", invalid="ignore"):
        shift_out = np.where(share_outer > 1e-12, -SIG * phi / share_outer, 0.0)
        shift_in = np.where(share_outer < 1 - 1e-12, SIG * phi / (1.0 - share_outer), 0.0)
    return (share_outer * (a_out + outer[1] * shift_out)
            + (1.0 - share_outer) * (a_in + inner[1] * shift_in))


def test_zone_line_reaches_the_boundary():
    boundary = 14.0
    x = np.arange(0.0, 60.0, 2.0)
    an = _measured_an(x, boundary)
    zones = AnZones(x, an, [boundary], 60.0, (3.0 * SIG, 2.0 * SIG, 1.5 * SIG))
    centres = np.array([12.5, 13.5, 13.9, 14.1, 14.5, 16.0])
    zone_of = (centres > boundary).astype(int)  # zone 0 the core side, zone 1 the rim zone
    got = 100.0 * zones.cells(centres, 1 - zone_of)
    want = np.where(centres < boundary, 80.0 - 0.4 * (centres - boundary), 70.0 + 0.02 * (centres - boundary))
    # leak of the 10 mol% step into the points kept (>= 3 sd away): 10·Φ(-3); the line's fit adds nothing
    tol = 10.0 * ndtr(-3.0) + 1e-9
    assert np.max(np.abs(got - want)) <= tol + 0.01, (got, want)


@pytest.mark.slow
def test_forward_model_agrees_with_the_independent_one_at_the_true_parameters():
    from tests.validation import physics
    from zoneprofile.diffusion.crystal import fit_crystal

    fine = 0.25
    depths = [130.0, 57.0, 14.0]
    ages = [421.0, 90.5, 7.36]
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
        frac = (z[inside] - lo) / (hi - lo)
        an[inside] = a_out + (a_in - a_out) * frac
    cells = [int(round(d / fine)) for d in depths]
    melts = {"Mg": [12000.0 * 1.5 ** k for k in range(4)], "Sr": [400.0 * 1.1 ** k for k in range(4)]}
    durations = [ages[0] - ages[1], ages[1] - ages[2], ages[2]]
    length = depths[0] + 140.0
    an_x = np.arange(0.0, length + 1e-9, 2.0)
    an_m = physics.measure(z, an, an_x, width_um=BEAM_FWHM, shape="gaussian")
    la_x = np.arange(2.5, length - 2.0 + 1e-9, 2.5)
    profiles = {}
    for el in ("Mg", "Sr"):
        c = physics.grow_and_diffuse(edges, an, cells, melts[el], durations, element=el, temperature_c=t_c)
        profiles[el] = {"distance_um": la_x, "value": physics.measure(z, c, la_x, width_um=5.0, shape="square"),
                        "beam_um": 5.0, "beam_shape": "square"}
    res = fit_crystal(profiles, mineral="plagioclase", positions_um=depths, temperature_c=t_c, an_distance_um=an_x,
                      an=an_m, an_beam_um=BEAM_FWHM, obliquity=None, draws=50, position_window_um=0.0)
    obj = res.objective
    x_true = np.array([math.log10(ages[2]), math.log10(ages[0] - ages[1]), math.log10(ages[1] - ages[2])])
    states, _, _ = obj.state(x_true)
    # relative noise of the laser analyses of the validation population: Mg 2.5 %, Sr 1.5 % (common practice)
    for em, (pred, _c, _b, _f) in zip(obj.elements, states):
        v, _ = obj.solve_values(pred, em.y, np.ones_like(em.y))
        rel = np.abs(em.y - v @ pred) / em.y
        noise = {"Mg": 0.025, "Sr": 0.015}[em.element]
        # two forward models on different grids (0.25 µm against ~0.9 µm cells) agree to a small part of
        # the noise; 0.3 sd is where a systematic misfit over a few points starts to pass for a width
        # (before the zone lines reached their boundaries and the rim: Mg 0.33 sd, Sr 0.52 sd)
        assert rel.max() <= 0.3 * noise, (em.element, rel.max() / noise)
        # with the rim as a zone edge too (a spot at the rim sees partly outside the crystal), over the
        # boundaries (away from the closed end, which the model cannot place: the crystal's centre is
        # 80 µm beyond the traverse) the two models agree to 0.1 noise sd (before: Sr 0.25)
        near = em.x_um < depths[0] + 20.0
        assert rel[near].max() <= 0.1 * noise, (em.element, rel[near].max() / noise)


def test_an_steps_inside_a_zone_where_the_zoning_found_an_undated_step():
    """A normal step inside the core zone (An 62 → 50 at 40 µm, no recharge) is kept as a step: each
    stretch is its own line (here flat), exact away from the step by more than the guard (the beam leaks
    12·Φ(−3) = 0.016 mol% into the points kept, scipy's normal cdf). Without the split the zone is one
    line through both levels, wrong by several mol% at either end."""
    boundary, split = 14.0, 40.0
    x = np.arange(0.0, 80.0, 2.0)
    # each side of each step seen through the beam: the shares of a Gaussian spot (exact for flat zones)
    an = (80.0 * ndtr((boundary - x) / SIG) + 50.0 * (ndtr((split - x) / SIG) - ndtr((boundary - x) / SIG))
          + 62.0 * ndtr((x - split) / SIG))
    guards = (3.0 * SIG, 2.0 * SIG, 1.5 * SIG)
    centres = np.arange(15.0, 79.0, 1.0)
    far = np.abs(centres - split) > 3.0 * SIG
    want = np.where(centres < split, 50.0, 62.0)
    tol = 12.0 * ndtr(-3.0) + 0.01
    split_zones = AnZones(x, an, [boundary], 80.0, guards, splits_um=[split])
    got = 100.0 * split_zones.cells(centres, np.zeros(centres.size, int))
    assert np.max(np.abs(got - want)[far]) <= tol
    one_line = 100.0 * AnZones(x, an, [boundary], 80.0, guards).cells(centres, np.zeros(centres.size, int))
    assert np.max(np.abs(one_line - want)[far]) > 3.0
    # the step across the dated boundary is measured on the stretch next to it: |80 - 50|
    assert split_zones.step_sizes() == pytest.approx([30.0], abs=tol)
    # a split at the dated boundary itself (within the widest guard) is the boundary, not a second step
    same = AnZones(x, an, [boundary], 80.0, guards, splits_um=[boundary + 1.0])
    assert len(same.zones[0][1]) == 1
