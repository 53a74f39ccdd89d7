"""The second look for a thin rim zone (zoneprofile.zoning.rim).

The profiles are invented (a straight line per zone plus normal noise); the
references are the noise model itself: with known noise the jump statistic of
a profile without a jump is normal, so the false-alarm rate of the whole
search is at most ``alpha`` (Bonferroni), and a jump of 15 noise sd is found
with certainty for practical purposes.
"""

import numpy as np
import pytest
from scipy.stats import binom

from zoneprofile.zoning import analyse_zoning
from zoneprofile.zoning.rim import find_rim_step
from zoneprofile.zoning.steps import Step, detect_steps

NOISE = 0.45
X = np.arange(0.0, 200.0, 2.0)  # µm from the rim, microprobe spacing
CORE_STEP = Step(position_um=60.0, position_sd_um=0.5, before=58.0, after=70.9, change=12.9, change_se=0.3,
                 kind="reverse", width_um=1.0, width_resolved=False, sharpness="sharp", z_score=40.0, gap_index=30)


def _thin_rim(rng, jump=7.0):
    """A rim zone 15 µm thick falling 0.4 mol%/µm toward the rim, a flat zone inside it, a core step at 60 µm."""
    inner = 68.0 + 0.02 * (X - 15.0)
    rim = inner[np.searchsorted(X, 15.0)] + jump - 0.4 * (15.0 - X)
    y = np.where(X < 15.0, rim, np.where(X < 60.0, inner, 58.0))
    return y + rng.normal(0.0, NOISE, X.size)


def test_thin_rim_zone_with_own_zoning_is_found():
    # the shared-slope detector misses this step on most seeds (it did in the validation
    # populations); the rim search must find it on every one, within one point spacing
    missed_by_detector = 0
    for seed in range(8):
        y = _thin_rim(np.random.default_rng(seed))
        if not any(abs(s.position_um - 15.0) < 3.0 for s in detect_steps(X, y, NOISE)):
            missed_by_detector += 1
        steps = analyse_zoning(X, y, noise_sd=NOISE).steps
        near = [s for s in steps if abs(s.position_um - 15.0) <= 2.0]
        assert near, f"seed {seed}: rim step not found ({[round(s.position_um, 1) for s in steps]})"
        assert near[0].kind == "reverse"
    assert missed_by_detector >= 4  # the case the search exists for


def test_change_of_slope_alone_is_not_a_step():
    # a hinge (continuous zoning that steepens toward the rim) has no jump: the null model of the
    # test. With alpha = 0.01 per profile, P(more than 2 false alarms in 60) = binom.sf(2, 60, 0.01)
    assert binom.sf(2, 60, 0.01) < 0.03
    false = 0
    for seed in range(60):
        rng = np.random.default_rng(1000 + seed)
        y = np.where(X < 15.0, 70.0 - 0.4 * (15.0 - X), 70.0 + 0.02 * (X - 15.0))
        y = np.where(X < 60.0, y, 58.0) + rng.normal(0.0, NOISE, X.size)
        found = find_rim_step(X, y, NOISE, [CORE_STEP], alpha=0.01)
        false += found is not None
    assert false <= 2


def test_no_search_without_a_known_step_or_beyond_it():
    rng = np.random.default_rng(3)
    y = 70.0 + rng.normal(0.0, NOISE, X.size)
    assert find_rim_step(X, y, NOISE, []) is None
    # a step beyond the first known one is not the rim search's business
    y = _thin_rim(np.random.default_rng(4))
    first = [s for s in detect_steps(X, y, NOISE) if s.position_um > 50.0]
    found = find_rim_step(X, y, NOISE, first)
    assert found is not None and found.position_um < first[0].position_um
    assert found.extra["found_by"] == "rim search"


def test_possible_step_below_the_threshold_is_said_not_omitted():
    # a 2.2 mol% jump (5 noise sd, min_change 3 sd) on 7 rim points: evidence between the note's
    # looser threshold and the acceptance one on this seed; the zoning warns instead of staying silent
    hits = notes_made = 0
    for seed in range(30):
        y = _thin_rim(np.random.default_rng(500 + seed), jump=2.2)
        notes = []
        found = find_rim_step(X, y, NOISE, [CORE_STEP], notes=notes)
        hits += found is not None
        notes_made += bool(notes)
        assert not (found is not None and notes)  # one or the other
        for n in notes:
            assert "not accepted" in n and "µm below the rim" in n
    assert notes_made >= 1


def test_running_sum_scan_equals_one_least_squares_fit_per_gap():
    # the O(n) scan against numpy's lstsq at every gap (an independent route to the same fits);
    # tolerance: both are float64 least squares on well-conditioned centred designs of ≤ 80 rows, so
    # they agree to ~1e-9 of the total sum of squares
    from zoneprofile.zoning.rim import MIN_SIDE_POINTS, _scan

    rng = np.random.default_rng(3)
    x = np.sort(rng.uniform(0.0, 60.0, 80))
    y = 50 + 0.3 * x + np.where(x < 17.0, 6.0, 0.0) + rng.normal(0, 0.4, x.size)
    js, rss_jump, rss_hinge = _scan(x, y)
    assert list(js) == list(range(MIN_SIDE_POINTS, x.size - MIN_SIDE_POINTS + 1))
    tot = float(np.sum((y - y.mean()) ** 2))
    for j, rj, rh in zip(js, rss_jump, rss_hinge):
        xb = 0.5 * (x[j - 1] + x[j])
        t, r = x - xb, (np.arange(x.size) < j).astype(float)
        for cols, got in (([np.ones_like(t), t * (1 - r), t * r, r], rj), ([np.ones_like(t), t, t * r], rh)):
            _, res, *_ = np.linalg.lstsq(np.column_stack(cols), y, rcond=None)
            assert got == pytest.approx(float(res[0]), abs=1e-9 * tot)
