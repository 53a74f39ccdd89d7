"""The validation's own forward model and generator (tests/validation), checked against outside references.

The validation population is only as good as its forward model, so the model is
checked here against analytical solutions (Crank 1975), against a second time
integration of the same equations (scipy's expm_multiply), for conservation of
mass, and the generator for determinism. None of this imports zoneprofile's
solver, fitting, laws or partition code.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.special import erfc

from tests.validation import physics as P
from tests.validation import score as S
from tests.validation.population import make_population

DAY = 86400.0


def _grid(length_um, h_um):
    h = h_um * 1e-6
    n = int(round(length_um / h_um))
    return h, (np.arange(n) + 0.5) * h


# --------------------------------------------------------------------------- published laws, re-typed
def test_retyped_laws_match_the_formulas_evaluated_by_hand():
    # Costa et al. (2003): log10 D = log10 2.92 − 4.1·X − 3.1 − 266000/(R·T·ln 10), evaluated by hand at
    # 1000 °C, X = 0.6: 0.46538 − 2.46 − 3.1 − 10.91316 = −16.0078
    assert math.log10(P.diffusivity("Mg", 0.6, 1000.0)) == pytest.approx(-16.0078, abs=5e-4)
    # Zellmer et al. (1999): 0.46538 − 2.46 − 4.08 − 11.32342 = −17.3980
    assert math.log10(P.diffusivity("Sr", 0.6, 1000.0)) == pytest.approx(-17.3980, abs=5e-4)
    # Bindeman et al. (1998): K = exp((A·X + B)/RT); Mg at X 0.6, 1000 °C: exp(−41360/10585.5) = 0.02010
    assert P.partition("Mg", 0.6, 1000.0) == pytest.approx(0.02010, rel=2e-3)
    # Sr: exp(10260/10585.5) = 2.636
    assert P.partition("Sr", 0.6, 1000.0) == pytest.approx(2.636, rel=2e-3)


# --------------------------------------------------------------------------- Crank's solutions
def _erf_error(h_um):
    h, z = _grid(300.0, h_um)
    d = 1e-16
    t = 50 * DAY
    v = P.evolve_cn(np.where(z < 150e-6, 1.0, 0.0), np.full(z.size, d), np.ones(z.size), h, duration_s=t)
    exact = 0.5 * erfc((z - 150e-6) / (2.0 * math.sqrt(d * t)))       # Crank (1975) eq. 2.14
    return float(np.max(np.abs(v - exact))), math.sqrt(d * t) / 1e-6


def test_constant_d_step_relaxes_as_crank_erf_with_second_order_convergence():
    """Crank (1975) The Mathematics of Diffusion, 2nd ed., eq. 2.14 (extended initial distribution).

    Error analysis: the three-point finite-volume Laplacian is second order, its
    error ≈ (h²/12)·|∂⁴C/∂x⁴|·D·t, of order (h/√(Dt))²/12 for an erf profile;
    bound used: (h/√(Dt))². Halving h must divide the error by about 4 (> 3).
    The domain (±150 µm, ≥ 7 diffusion lengths) keeps the closed ends' effect below 1e-12.
    """
    e1, ell = _erf_error(0.5)
    e2, _ = _erf_error(0.25)
    assert e2 < (0.25 / ell) ** 2
    assert e1 / e2 > 3.0


def _composite_error(h_um):
    """Two semi-infinite plagioclase zones, An 75 | An 55, Mg at 1000 °C, with the An-coupled partitioning."""
    h, z = _grid(600.0, h_um)
    b = 300e-6
    x = np.where(z < b, 0.75, 0.55)
    d = P.diffusivity("Mg", x, 1000.0)
    k = P.partition("Mg", x, 1000.0)
    t = 60 * DAY
    v = P.evolve_cn(np.where(z < b, 1.0, 0.0), d, k, h, duration_s=t)
    # Crank (1975) §3.4 (composite media; section number from memory): medium 1 (x < 0) starts at C0,
    # medium 2 (x > 0) at 0, C2 = κ·C1 at the interface, flux continuous. Then
    #   C1 = C0 − A1·erfc(−x/2√(D1 t)),  C2 = A2·erfc(x/2√(D2 t)),
    #   A2 = κ·C0 / (1 + κ·√(D2/D1)),    A1 = A2·√(D2/D1).
    # Here κ = K2/K1, the ratio of the plagioclase/melt partition coefficients (equilibrium between zones).
    d1, d2, k1, k2 = d[0], d[-1], k[0], k[-1]
    c0, kappa = k1, k2 / k1
    a2 = kappa * c0 / (1.0 + kappa * math.sqrt(d2 / d1))
    a1 = a2 * math.sqrt(d2 / d1)
    xx = z - b
    exact = np.where(xx < 0, c0 - a1 * erfc(-xx / (2 * np.sqrt(d1 * t))), a2 * erfc(xx / (2 * np.sqrt(d2 * t))))
    return float(np.max(np.abs(k * v - exact)) / c0)


def test_an_step_with_partitioning_matches_crank_composite_media():
    """Composition-dependent D and K: the chemical-potential term against an analytical route.

    Error analysis as above (second order; the D and K jump sits on a cell face, where
    the harmonic conductance is exact): ~(h/√(D1 t))²/12 ≈ 2e-4·/12 at h = 0.25 µm,
    √(D1 t) = 11 µm; bound 1e-4 of C0, and halving h divides the error by > 3.
    """
    e1 = _composite_error(0.5)
    e2 = _composite_error(0.25)
    assert e2 < 1e-4
    assert e1 / e2 > 3.0


# --------------------------------------------------------------------------- invariants
def test_closed_crystal_conserves_mass_and_open_rim_reaches_the_melt():
    h, z = _grid(200.0, 0.5)
    an = np.where(z < 60e-6, 0.78 - 400.0 * z, 0.55)            # normal zoning over an An step
    d, k = P.diffusivity("Mg", an, 1050.0), P.partition("Mg", an, 1050.0)
    rng = np.random.default_rng(3)
    v0 = 1.0 + 0.5 * rng.random(z.size)
    v = P.evolve_cn(v0, d, k, h, duration_s=300 * DAY)
    # conservation: the scheme is conservative by construction; only round-off and the banded solve
    # (relative 1e-15 per step, 300 steps) change the total
    assert np.sum(k * v) == pytest.approx(np.sum(k * v0), rel=1e-10)
    # equilibrium of a closed crystal: v uniform (C/K the same everywhere), at the mass-weighted mean
    long = P.evolve_cn(v0, d, k, h, duration_s=1e5 * DAY)
    assert np.ptp(long) < 1e-6
    assert long[0] == pytest.approx(np.sum(k * v0) / np.sum(k), rel=1e-9)
    # a rim open to a melt of 2.0 ppm: the whole crystal ends in equilibrium with it, C = K·c_melt
    open_ = P.evolve_cn(v0, d, k, h, duration_s=1e5 * DAY, v_rim=2.0)
    np.testing.assert_allclose(k * open_, 2.0 * k, rtol=1e-6)


def _expm_reference(edges, an, boundary_cells, melts, durations, element, temperature_c):
    """The growing crystal integrated stage by stage with scipy's expm_multiply (exact in time)."""
    h = (edges[1] - edges[0]) * 1e-6
    x = an / 100.0
    d, k = P.diffusivity(element, x, temperature_c), P.partition(element, x, temperature_c)
    starts = list(boundary_cells) + [0]
    v = np.full(x.size, melts[0])
    for j, dur in enumerate(durations):
        first = starts[j + 1]
        v[first:starts[j]] = melts[j + 1]
        v[first:] = P.evolve_expm(v[first:], d[first:], k[first:], h, duration_s=dur * DAY, v_rim=melts[j + 1])
    return k * v


@pytest.mark.parametrize("element", ["Mg", "Sr"])
def test_growing_crystal_crank_nicolson_agrees_with_exact_time_integration(element):
    """Time error of the geometric Crank–Nicolson steps against expm_multiply on the same grid.

    Both integrate the same semi-discrete system, so only the time error differs; CN is
    second order and 300 geometric steps per stage (four backward-Euler steps first) keep it
    well below 1e-3 of the concentration scale (measured 8e-7 for Mg, 2e-7 for Sr).
    """
    edges = np.arange(0.0, 200.0 + 1e-9, 1.0)
    z = 0.5 * (edges[:-1] + edges[1:])
    an = np.where(z > 120, 55.0, np.where(z > 40, 76.0 - 0.05 * (120 - z), 80.0 - 0.3 * (40 - z)))
    cells = [120, 40]                       # boundaries at 120 and 40 µm
    melts = {"Mg": [12000.0, 18000.0, 26000.0], "Sr": [400.0, 440.0, 480.0]}[element]
    durations = [300.0, 60.0]
    cn = P.grow_and_diffuse(edges, an, cells, melts, durations, element=element, temperature_c=1000.0)
    ref = _expm_reference(edges, an, cells, melts, durations, element, 1000.0)
    assert np.max(np.abs(cn - ref)) / np.max(ref) < 1e-3


def test_measure_averages_over_the_footprint():
    s = np.arange(0.0, 100.0, 0.05)
    step = np.where(s < 50.0, 0.0, 1.0)
    # a square spot of 5 µm centred 1 µm past the step sees 3.5/5 of the upper side
    assert P.measure(s, step, [51.0], width_um=5.0, shape="square")[0] == pytest.approx(0.7, abs=0.011)
    # a Gaussian beam centred on the step sees half of each side
    assert P.measure(s, step, [50.0], width_um=3.0, shape="gaussian")[0] == pytest.approx(0.5, abs=0.01)
    # at the rim only the crystal is seen: a constant stays constant
    assert P.measure(s, np.full(s.size, 7.0), [0.0], width_um=5.0, shape="square")[0] == pytest.approx(7.0)


# --------------------------------------------------------------------------- the generator
def _files(folder):
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_generator_is_deterministic_per_seed_and_follows_the_story(tmp_path):
    a, b, c = tmp_path / "a", tmp_path / "b", tmp_path / "c"
    ta = make_population(a, seed=5, n_crystals=4)
    make_population(b, seed=5, n_crystals=4)
    make_population(c, seed=6, n_crystals=4)
    assert _files(a) == _files(b)
    assert _files(a)["truth.json"] != _files(c)["truth.json"]
    truth = json.loads((a / "truth.json").read_text())
    assert truth == json.loads(json.dumps(ta))
    ages = [e["age_days"] for e in truth["events"]]
    assert ages == sorted(ages, reverse=True)                  # E1 the oldest
    for nominal, age in zip((400.0, 80.0, 7.0), ages):
        assert 0.5 < age / nominal < 2.0                         # ±4.6 σ of the log-normal jitter
    for crystal in truth["crystals"]:
        depths = [bd["depth_um"] for bd in crystal["boundaries"]]
        assert depths == sorted(depths, reverse=True)            # oldest (deepest) first
        assert all(30.0 - 0.25 <= o - y <= 110.0 + 0.25 for o, y in zip(depths, depths[1:]))
        if crystal["boundaries"][-1]["event"] == "E3":
            assert 10.0 - 0.25 <= depths[-1] <= 16.0 + 0.25
        assert all(bd["an_step"] >= 7.0 - 1e-9 for bd in crystal["boundaries"])   # every recharge a reverse step
        assert all(g["days"] > 0 for g in crystal["gaps"])
    text = (a / "validation.toml").read_text()
    assert text.count("[[crystals]]") == 4


# --------------------------------------------------------------------------- the scorer
def _td(median, lo, hi, statement=None, upper=None, lower=None):
    d = {"median": median, "p2_5": lo, "p97_5": hi, "upper_bound": upper, "lower_bound": lower}
    if statement:
        d["statement"] = statement
    return d


def test_score_reads_statements_both_ways():
    truth = {"events": [{"id": "E1", "age_days": 100.0}],
             "crystals": [{"sample": "S", "crystal": "c1", "gaps": [],
                           "boundaries": [{"id": "B1", "event": "E1", "age_days": 100.0, "position_um": 50.0}]}]}
    fits = [  # (element, time_days, resolved): one right date, one bound on each side that holds, one that fails
        ("Mg", _td(110.0, 60.0, 200.0), True),
        ("Sr", _td(None, None, None, "lower_bound", lower=30.0), False),
        ("Ba", _td(None, None, None, "upper_bound", upper=90.0), False),
    ]
    results = {"crystals": [{"sample": "S", "crystal": "c1", "error": None,
                             "boundaries": [{"position_um": 52.0, "element": el, "time_days": td, "resolved": r}
                                            for el, td, r in fits]}],
               "population": {"events": {"criterion": "BIC", "events": [
                   {"id": "E1", "age_days": _td(120.0, 80.0, 150.0, "date")}]}}}
    s = S.score(results, truth)
    assert s["figures"]["boundaries_dated_true"] == 1.0
    assert s["counts"]["statements"]["total"] == 3
    assert s["figures"]["statements_consistent"] == pytest.approx(2 / 3)   # "< 90 d" is wrong for 100 d
    assert s["events"]["pass"]                                             # 1.2× within −20 %/+25 %
    results["population"]["events"]["events"][0]["age_days"] = _td(130.0, 80.0, 150.0, "date")
    assert not S.score(results, truth)["events"]["pass"]                   # 1.3× is outside
    # a fitted boundary 7 µm from the true one stands for nothing: its statements are not about the truth
    for b in results["crystals"][0]["boundaries"]:
        b["position_um"] = 57.0
    s = S.score(results, truth)
    assert s["figures"]["boundaries_dated_true"] == 0.0
    assert s["counts"]["statements"]["unmatched"] == 3


def test_tools_refuse_bad_input_with_one_line(tmp_path, capsys):
    from tests.validation import population

    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "keep.txt").write_text("mine")
    assert population.main(["--seed", "1", "--out", str(busy)]) == 2
    assert (busy / "keep.txt").read_text() == "mine" and len(list(busy.iterdir())) == 1   # nothing written
    assert S.main([str(tmp_path / "missing"), str(tmp_path / "truth.json")]) == 2
    bad = tmp_path / "truth.json"
    bad.write_text('{"crystals": [{"x": 1}]}')
    results = tmp_path / "results.json"
    results.write_text('{"crystals": []}')
    assert S.main([str(results), str(bad)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 3 and all(line.startswith(("population:", "score:")) for line in err)
