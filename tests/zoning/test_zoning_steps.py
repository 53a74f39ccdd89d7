"""Step detection: recall and false alarms on seeded profiles, independent cross-checks, invariances."""

import itertools

import numpy as np
import pytest

from zoneprofile.zoning import analyse_zoning, detect_steps, estimate_noise_sd, synthetic_case, synthetic_zoned_profile
from zoneprofile.zoning.steps import candidate_change_points


def _match(found, truth, tol_um=2.0):
    """Greedy one-to-one matching by position and kind; returns (hits, extras)."""
    used, hits = set(), 0
    for t in truth:
        near = [i for i, s in enumerate(found)
                if i not in used and abs(s.position_um - t["position_um"]) <= tol_um and s.kind == t["kind"]]
        if near:
            used.add(near[0])
            hits += 1
    return hits, len(found) - len(used)


def test_four_steps_recall_and_extras_over_seeds():
    # self-consistency on invented data: 4 planted steps of 4-12 mol%, noise sd 0.3-1, spacing 1-3 µm
    hits = total = 0
    worst_extra = 0
    for seed in range(10):
        x, y, truth = synthetic_case("steps", seed)
        res = analyse_zoning(x, y)  # noise not given: estimated
        h, extra = _match(res.steps, truth["steps"])
        hits += h
        total += len(truth["steps"])
        worst_extra = max(worst_extra, extra)
    assert hits / total >= 0.95
    assert worst_extra <= 1


def test_no_step_on_noise_or_smooth_zoning():
    for seed in range(8):
        for case in ("noise", "smooth"):
            x, y, _ = synthetic_case(case, seed)
            res = analyse_zoning(x, y)
            assert all(abs(s.change) < 3.0 for s in res.steps), (case, seed)
            assert res.oscillatory_bands == [], (case, seed)


def test_noise_estimate_matches_numpy_scatter_on_flat_noise():
    # reference: numpy's sample standard deviation of the planted noise (general library)
    ratios = []
    for seed in range(20):
        x, y, truth = synthetic_case("noise", seed)
        ratios.append(estimate_noise_sd(x, y) / np.std(y - truth["clean"], ddof=1))
    assert abs(np.mean(ratios) - 1.0) < 0.08


def test_noise_estimate_ignores_steps_and_linear_zoning():
    x, y, truth = synthetic_zoned_profile(seed=3, length_um=300, spacing_um=(1, 2), noise_sd=0.5,
                                          steps=[(100, 10), (200, -15)], trend_per_um=0.1)
    assert estimate_noise_sd(x, y) == pytest.approx(0.5, rel=0.2)


def _brute_force_two_changes(y):
    # independent check: exhaustive least-squares optimum over all pairs of change points
    n = y.size
    best, arg = np.inf, None
    for a, b in itertools.combinations(range(2, n - 1), 2):
        if b - a < 2:
            continue
        cost = sum(((seg - seg.mean()) ** 2).sum() for seg in (y[:a], y[a:b], y[b:]))
        if cost < best:
            best, arg = cost, (a, b)
    return arg


def test_step_positions_agree_with_brute_force_optimum():
    # cross-check against an exhaustive search of the two-change-point least-squares optimum
    for seed in range(4):
        x, y, truth = synthetic_zoned_profile(seed=seed, length_um=40, spacing_um=1.0, noise_sd=0.5,
                                              steps=[(12.5, 5.0), (27.5, -6.0)])
        a, b = _brute_force_two_changes(y)
        steps = detect_steps(x, y, 0.5)
        assert len(steps) == 2
        for s, k in zip(steps, (a, b)):
            assert x[k - 1] - 0.5 <= s.position_um <= x[k] + 0.5


def test_candidates_match_ruptures_pelt_l2():
    # independent implementation: ruptures' pure-Python PELT with the l2 cost
    import ruptures as rpt

    x, y, truth = synthetic_case("steps", 5)
    sigma = 0.6
    ours = candidate_change_points(y, sigma)
    ref = rpt.Pelt(model="l2", min_size=2, jump=1).fit(y).predict(pen=sigma**2 * np.log(y.size))[:-1]
    assert ours == ref


def test_flipping_the_traverse_swaps_kinds():
    x, y, truth = synthetic_case("steps", 2)
    res = analyse_zoning(x, y, noise_sd=truth["noise_sd"])
    flipped = analyse_zoning((x[-1] - x)[::-1], y[::-1], noise_sd=truth["noise_sd"])
    assert len(flipped.steps) == len(res.steps)
    for s, f in zip(res.steps, reversed(flipped.steps)):
        assert f.position_um == pytest.approx(x[-1] - s.position_um, abs=0.3)
        assert f.change == pytest.approx(-s.change, abs=0.3)
        assert {s.kind, f.kind} == {"normal", "reverse"}
    kinds = [z["kind"] for z in res.zones]
    flipped_kinds = [z["kind"] for z in reversed(flipped.zones)]
    swap = {"normal": "reverse", "reverse": "normal", "flat": "flat"}
    assert flipped_kinds == [swap[k] for k in kinds]


def test_changing_distance_units_scales_positions_only():
    # the same traverse with distances given in units 1000 times smaller (mm read as µm and
    # rescaled) must give the same steps once every length setting is scaled alike
    x, y, truth = synthetic_case("steps", 7)
    a = detect_steps(x, y, truth["noise_sd"], window_um=15.0, max_width_um=12.0)
    b = detect_steps(x / 1000.0, y, truth["noise_sd"], window_um=0.015, max_width_um=0.012)
    assert len(a) == len(b)
    for s, t in zip(a, b):
        assert t.position_um * 1000.0 == pytest.approx(s.position_um, abs=0.05)
        assert t.change == pytest.approx(s.change, abs=0.05)  # optimiser tolerance
        assert t.kind == s.kind


def test_width_sharp_and_gradational_and_position_sd():
    x, y, _ = synthetic_zoned_profile(seed=1, length_um=120, spacing_um=0.5, noise_sd=0.3,
                                      steps=[(40, -8.0, 0.0), (80, 8.0, 6.0)])
    steps = detect_steps(x, y, 0.3)
    assert [s.kind for s in steps] == ["normal", "reverse"]
    assert steps[0].sharpness == "sharp" and steps[0].width_um < 1.0
    assert steps[1].sharpness == "gradational"
    assert steps[1].width_um == pytest.approx(6.0, rel=0.3)
    assert all(0 < s.position_sd_um < 1.0 for s in steps)


def test_uneven_spacing_and_missing_points():
    x, y, truth = synthetic_zoned_profile(seed=4, length_um=150, spacing_um=(0.8, 3.0), noise_sd=0.5,
                                          steps=[(50, 7.0), (100, -9.0)])
    keep = np.ones(x.size, dtype=bool)
    keep[[10, 11, 30, 45]] = False  # points flagged by QC left out
    steps = detect_steps(x[keep], y[keep], 0.5)
    assert [round(s.position_um / 10) for s in steps] == [5, 10]


def test_staircase_of_close_steps_is_resolved():
    # four same-sign steps 13 µm apart: wide windows alone would read them as a ramp
    # or a 13 µm "oscillation"; self-consistency on invented data, recall >= 90 %
    hits_total = 0
    for seed in range(3):
        steps = [(30.0 + 13.0 * i, 6.5, 1.0) for i in range(4)]
        x, y, truth = synthetic_zoned_profile(seed=seed, length_um=110, spacing_um=(1.0, 2.5), noise_sd=0.8,
                                              core_value=40.0, steps=steps)
        res = analyse_zoning(x, y)
        hits, extra = _match(res.steps, truth["steps"])
        hits_total += hits
        assert extra <= 1 and res.oscillatory_bands == [], seed
    assert hits_total >= 11


def test_two_adjacent_noisy_points_are_not_a_step():
    # Self-consistency (invented data): one resorption step at 70 µm; by chance
    # two neighbouring points near 160 µm deviate by -1.9 and +2.5 sigma. A
    # slope-plus-jump fit in a short window once read them as a 5 mol% normal
    # step; the plain means on either side show no step there.
    rng = np.random.default_rng(11)
    d = np.cumsum(rng.uniform(1.0, 2.5, 140))
    d -= d[0]
    rng.normal(0, 0.6, d.size)  # draws used by other profiles of the same set
    rng.normal(0, 0.8, d.size)
    d3 = np.arange(0, 250, 1.0) + rng.uniform(-0.2, 0.2, 250)
    rng.normal(0, 0.5, d3.size)
    an = np.where(d < 70, 68.0, 53.0) + rng.normal(0, 0.6, d.size)
    an = np.round(an, 2)
    assert np.ptp(an[(d > 157) & (d < 162)]) > 3.0  # the chance excursion is there
    steps = analyse_zoning(np.round(d, 2), an).to_dict()["steps"]
    assert [s["kind"] for s in steps] == ["reverse"]
    assert abs(steps[0]["position_um"] - 70.0) < 2.0


@pytest.mark.slow  # 3.8 s CPU on an idle core
def test_batched_jump_tests_match_window_by_window_least_squares(monkeypatch):
    # invariant: the batch of local jump tests (all windows of all candidates in one
    # padded least-squares batch) picks the same gap, window and half-width as the
    # window-by-window fits, with the same jump, error and z (rounding apart)
    from zoneprofile.zoning import steps as steps_module
    from zoneprofile.zoning._local import median_spacing
    from zoneprofile.zoning.steps import _bounds_for, _multi_scale_test_general, _multi_scale_tests

    fallbacks = []
    monkeypatch.setattr(steps_module, "_multi_scale_test_general",
                        lambda *a: fallbacks.append(a[2]) or _multi_scale_test_general(*a))
    rng = np.random.default_rng(7)
    compared = 0
    for case, seed in itertools.product(("steps", "close-steps", "band", "noise"), range(3)):
        x, y, _ = synthetic_case(case, seed)
        sigma, spacing = estimate_noise_sd(x, y), median_spacing(x)
        centre = rng.uniform(x[10], x[-10])
        k_edge = min(int(np.searchsorted(x, centre + 30.0)), x.size - 3)
        # one blocked zone; another whose edge falls exactly on a point (tested point by point)
        blocked = [(centre - 2.0, centre + 2.0), (float(x[k_edge]), float(x[k_edge]) + 1.5)]
        ks = [k for k in range(2, x.size - 1) if not any(a <= 0.5 * (x[k - 1] + x[k]) <= b for a, b in blocked)]
        bounds = [_bounds_for(0.5 * (x[k - 1] + x[k]), blocked) for k in ks]
        half = max(15.0, 6.0 * spacing)
        for halves in ((half,), (min(max(0.4 * half, 4.0 * spacing), half), half)):
            batch = _multi_scale_tests(x, y, ks, bounds, halves, sigma, blocked, 1e-3, 3 * sigma, spacing)
            for k, b, got in zip(ks, bounds, batch):
                ref = _multi_scale_test_general(x, y, k, b, halves, sigma, blocked, 1e-3, 3 * sigma, spacing)
                assert (got is None) == (ref is None), (case, seed, k)
                if ref is None:
                    continue
                assert (got["k"], got["lo"], got["hi"], got["half"]) == (ref["k"], ref["lo"], ref["hi"], ref["half"])
                for key in ("change", "se", "z", "p"):
                    assert got[key] == pytest.approx(ref[key], rel=1e-9)
                compared += 1
    assert compared > 50
    assert fallbacks  # the windows holding a point on a blocked edge went point by point


def _erf_cases():
    for seed, (pos, change, width) in enumerate([(40.0, -8.0, 0.0), (41.3, 6.0, 3.0), (39.0, -4.0, 1.0)] * 3):
        x, y, _ = synthetic_zoned_profile(seed=seed, length_um=80, spacing_um=(1.0, 2.5), noise_sd=0.5,
                                          steps=[(pos, change, width)], trend_per_um=0.02)
        sel = (x > pos - 15) & (x < pos + 15)
        k = int(np.searchsorted(x, pos))
        lower = np.array([-np.inf, -np.inf, -np.inf, x[k - 2], np.log(0.02)])
        upper = np.array([np.inf, np.inf, np.inf, x[k + 1], np.log(3.0)])
        scale = [60.0, 0.1, abs(change), 1.5, 1.0]
        for s0 in (0.3, 1.5):
            yield x[sel], y[sel], [60.0, 0.0, change, 0.5 * (x[k - 1] + x[k]), np.log(s0)], lower, upper, scale


def test_erf_jacobian_is_the_derivative():
    # independent route: central differences D(h), h = eps^(1/3) max(1, |p|). Their truncation error
    # h^2 f^(3) / 6 is estimated from D(2h) - D(h) = 3 h^2 f^(3) / 6 (Richardson), their rounding
    # error is below 4 eps |f| / h; the analytic column must agree within twice their sum
    from zoneprofile.zoning.steps import _erf_model, _erf_problem

    eps = np.finfo(float).eps

    def central(p, i, h, t):
        up, down = p.copy(), p.copy()
        up[i] += h
        down[i] -= h
        return (_erf_model(up, t) - _erf_model(down, t)) / (up[i] - down[i])

    for t, yy, p0, lower, upper, _ in _erf_cases():
        _, jacobian = _erf_problem(t, yy, lower, upper)
        for p in (np.array(p0, dtype=float), np.array(p0, dtype=float) + [1.0, 0.01, 0.5, 0.3, 0.2]):
            ours = jacobian(p)
            size = np.abs(_erf_model(p, t)) + np.abs(yy)
            for i in range(5):
                h = eps ** (1 / 3) * max(1.0, abs(p[i]))
                d1, d2 = central(p, i, h, t), central(p, i, 2 * h, t)
                bound = np.abs(d2 - d1) / 3 + 4 * eps * size / h
                assert np.all(np.abs(ours[:, i] - d1) <= 2 * bound + 1e-300), i


def test_erf_fit_agrees_with_least_squares_and_its_own_differences():
    """The fit (public least_squares, analytic Jacobian) against least_squares with its '2-point' differences.

    Tolerance from the solver's stopping rule: with ``ftol = 1e-8`` each run stops when the last
    step lowered the cost C by less than ftol C, and near the optimum (Gauss-Newton, superlinear) the
    remaining excess is below that last reduction, so each cost lies within ftol C* of the minimum C*:
    |C1 - C2| <= ftol C*. In the linearised problem the fitted curves then differ by
    ||J dp|| <= sqrt(2 ftol C*) + sqrt(2 ftol C*) = sqrt(8 ftol C*), and in units of the parameters'
    standard errors (covariance s^2 (J'J)^-1, s^2 = 2 C* / (n - 5)) by
    |dp_i| / sd_i <= sqrt(8 ftol C*) / s = 2 sqrt((n - 5) ftol).
    """
    from scipy.optimize import least_squares

    from zoneprofile.zoning.steps import _erf_model, _erf_problem, _trust_region_fit

    ftol = 1e-8  # scipy's default, used by _trust_region_fit
    checked_sd = 0
    for t, yy, p0, lower, upper, scale in _erf_cases():
        residuals, jacobian = _erf_problem(t, yy, lower, upper)
        ours = _trust_region_fit(residuals, jacobian, p0, lower, upper, scale)
        ref = least_squares(lambda p: _erf_model(p, t) - yy, p0, bounds=(lower, upper), x_scale=scale)
        assert ours.success and ref.success
        c_star = min(ours.cost, ref.cost)
        assert abs(ours.cost - ref.cost) <= ftol * c_star
        curve = _erf_model(ours.x, t) - _erf_model(ref.x, t)
        assert np.linalg.norm(curve) <= np.sqrt(8 * ftol * c_star)
        jtj = ref.jac.T @ ref.jac
        if np.linalg.cond(jtj) < 1e12:  # the standard errors exist (not a sharp step at its width bound)
            sd = np.sqrt(np.diag(np.linalg.inv(jtj)) * 2 * c_star / (t.size - 5))
            assert np.all(np.abs(ours.x - ref.x) / sd <= 2 * np.sqrt((t.size - 5) * ftol))
            checked_sd += 1
    assert checked_sd >= 10


def test_no_private_module_of_a_library_is_imported():
    import ast
    from pathlib import Path

    import zoneprofile

    root = Path(zoneprofile.__file__).parent
    private = []
    for path in root.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = []
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            for name in names:
                parts = name.split(".")
                if parts[0] != "zoneprofile" and any(p.startswith("_") and not p.startswith("__")
                                                     for p in parts[1:]):
                    private.append(f"{path.relative_to(root)}: {name}")
    assert not private


def test_shared_work_between_passes_gives_the_same_steps():
    x, y, truth = synthetic_case("steps", 3)
    sigma = truth["noise_sd"]
    reuse = {}
    shared = [detect_steps(x, y, sigma, windows=w, reuse=reuse) for w in ("wide", "both", "both")]
    alone = [detect_steps(x, y, sigma, windows=w) for w in ("wide", "both")]
    assert [s.to_dict() for s in shared[0]] == [s.to_dict() for s in alone[0]]
    assert [s.to_dict() for s in shared[1]] == [s.to_dict() for s in alone[1]]
    assert [s.to_dict() for s in shared[2]] == [s.to_dict() for s in alone[1]]  # copies: callers cannot spoil it
    with pytest.raises(ValueError, match="another profile"):
        detect_steps(x, y + 1.0, sigma, reuse=reuse)


def test_grid_segmentation_is_ruptures_optimum_on_every_gap():
    # independent reference: ruptures' exact kernel change-point search with the linear kernel (l2 cost)
    import ruptures as rpt

    from zoneprofile.zoning.steps import segment_on_grid

    for seed, n in [(0, 400), (1, 1201), (2, 2000)]:
        rng = np.random.default_rng(seed)
        idx = np.arange(n)
        y = 60 + 10 * (idx > 0.3 * n) - 8 * (idx > 0.7 * n) + 3 * (idx > 0.5 * n) + rng.normal(0, 0.5, n)
        pen = 0.25 * np.log(n)
        ref = [int(b) for b in rpt.KernelCPD(kernel="linear", min_size=2).fit(y).predict(pen=pen)[:-1]]
        assert segment_on_grid(y, pen, grid=1) == ref


def test_long_profiles_place_steps_on_the_exact_gap():
    # above CANDIDATE_EXACT_MAX points the candidates sit on every 5th gap; the local tests over gaps
    # k-2 ... k+2 must still put each step on its true gap, including gaps between grid gaps
    from zoneprofile.zoning.steps import CANDIDATE_EXACT_MAX

    n = CANDIDATE_EXACT_MAX + 5003
    x = np.arange(n) * 0.5
    rng = np.random.default_rng(3)
    cuts = [7001, 16003]  # neither a multiple of 5
    y = 60 + 10.0 * (np.arange(n) >= cuts[0]) - 8.0 * (np.arange(n) >= cuts[1]) + rng.normal(0, 0.5, n)
    found = detect_steps(x, y, 0.5)
    assert len(found) == 2
    for step, k in zip(sorted(found, key=lambda s: s.position_um), cuts):
        assert x[k - 1] < step.position_um < x[k]  # between the last point before and the first after


def test_sine_statistic_in_chunks_equals_one_batch(monkeypatch):
    from zoneprofile.zoning import oscillatory

    rng = np.random.default_rng(0)
    x = np.sort(rng.uniform(0, 300, 700))
    r = 0.8 * np.sin(2 * np.pi * x / 12.0) + rng.normal(0, 0.5, x.size)
    lams = np.linspace(6, 40, 17)
    whole = oscillatory.local_sine_statistic(x, r, 0.5, lams, 2 * lams)
    monkeypatch.setattr(oscillatory, "_BATCH_CELLS", 3 * x.size)  # three wavelengths per batch
    parts = oscillatory.local_sine_statistic(x, r, 0.5, lams, 2 * lams)
    assert np.array_equal(whole, parts, equal_nan=True)
