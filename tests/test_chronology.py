"""Recharge chronology: intervals from paired draws, ECDF/DKW, KDE, event grouping."""

import math

import numpy as np
import pytest
from scipy import stats
from scipy.integrate import trapezoid

from zoneprofile import InputError
from zoneprofile.chronology import (
    crystal_intervals,
    dkw_halfwidth,
    ecdf_with_band,
    kde_log10,
    population_summary,
)


def _b(pos, draws, **kw):
    return {"position_um": pos, "time_draws_days": np.asarray(draws), **kw}


# --------------------------------------------------------------------------- intervals
def test_independent_draws_give_root_sum_of_squares_sd():
    # variance of a difference of independent variables (standard result):
    # sd(t2 - t1) = sqrt(s1^2 + s2^2)
    rng = np.random.default_rng(1)
    n = 200_000
    t_outer = rng.normal(100.0, 10.0, n)
    t_inner = rng.normal(300.0, 20.0, n)
    (iv,) = crystal_intervals([_b(12.0, t_outer), _b(60.0, t_inner)])
    assert iv["outer_um"] == 12.0 and iv["inner_um"] == 60.0
    assert iv["sd"] == pytest.approx(math.hypot(10.0, 20.0), rel=0.01)
    assert iv["median"] == pytest.approx(200.0, abs=0.3)
    # percentiles of a normal difference: mean +- 1.95996 sd (normal quantile)
    assert iv["p97_5"] - iv["p2_5"] == pytest.approx(2 * 1.959964 * math.hypot(10, 20), rel=0.02)
    assert iv["n_draws"] == n and iv["fraction_negative"] == 0.0 and iv["warnings"] == []


def test_shared_temperature_draw_narrows_interval_exactly():
    # t = t0 / D(T): both boundaries divide by the same D draw, so the interval is
    # (t0_inner - t0_outer) * g and its sd is (t0_inner - t0_outer) * sd(g) exactly
    rng = np.random.default_rng(2)
    g = np.exp(rng.normal(0.0, 0.4, 50_000))  # shared temperature factor per draw
    outer, inner = 30.0 * g, 400.0 * g
    (paired,) = crystal_intervals([_b(10, outer), _b(80, inner)])
    assert paired["sd"] == pytest.approx(370.0 * np.std(g, ddof=1), rel=1e-9)
    # breaking the pairing (independent draws) must widen it: variance of a
    # difference loses the covariance term 2 cov(t1, t2) > 0
    (unpaired,) = crystal_intervals([_b(10, rng.permutation(outer)), _b(80, inner)])
    expected = math.sqrt(np.var(outer, ddof=1) + np.var(inner, ddof=1))
    assert unpaired["sd"] == pytest.approx(expected, rel=0.02)
    assert paired["sd"] < 0.95 * unpaired["sd"]


def test_negative_intervals_are_reported_not_clipped():
    rng = np.random.default_rng(3)
    n = 100_000
    # inner mean 110, outer mean 100, both sd 10: P(diff < 0) = Phi(-10 / (10 sqrt 2))
    # (normal distribution, scipy.stats.norm as reference)
    (iv,) = crystal_intervals([_b(5, rng.normal(100, 10, n)), _b(50, rng.normal(110, 10, n))])
    expected = stats.norm.cdf(-10 / (10 * math.sqrt(2)))
    assert iv["fraction_negative"] == pytest.approx(expected, abs=0.005)
    assert iv["p2_5"] < 0  # kept, not clipped at zero
    assert any("negative" in w for w in iv["warnings"])
    # inner clearly younger than outer: the warning says it is not physical
    (bad,) = crystal_intervals([_b(5, rng.normal(300, 10, n)), _b(50, rng.normal(100, 10, n))])
    assert bad["median"] < 0
    assert any("not physical" in w for w in bad["warnings"])


def test_order_by_position_and_chains_per_element():
    rng = np.random.default_rng(4)
    g = np.exp(rng.normal(0, 0.2, 2000))
    bs = [
        _b(90.0, 500 * g, element="Mg"),
        _b(20.0, 50 * g, element="Mg"),
        _b(55.0, 120 * g, element="Mg"),
        _b(20.0, 150 * g, element="Sr"),
        _b(90.0, 900 * g, element="Sr"),
    ]
    ivs = crystal_intervals(bs)
    mg = [(i["outer_um"], i["inner_um"]) for i in ivs if i["element"] == "Mg"]
    sr = [(i["outer_um"], i["inner_um"]) for i in ivs if i["element"] == "Sr"]
    assert mg == [(20.0, 55.0), (55.0, 90.0)]
    assert sr == [(20.0, 90.0)]
    mg_first = next(i for i in ivs if i["element"] == "Mg")
    assert mg_first["median"] == pytest.approx(70 * np.median(g), rel=1e-9)
    # one chain whatever the element when asked
    assert len(crystal_intervals(bs, per_element=False)) == 4


def test_unresolved_unequal_and_undated_boundaries():
    rng = np.random.default_rng(5)
    bs = [_b(10, rng.normal(20, 2, 300), resolved=False), _b(40, rng.normal(200, 20, 500)),
          {"position_um": 70.0, "time_draws_days": []}]
    (iv,) = crystal_intervals(bs)
    assert iv["resolved"] is False
    assert iv["n_draws"] == 300
    assert any("upper bound" in w for w in iv["warnings"])
    assert any("different numbers of draws" in w for w in iv["warnings"])
    assert crystal_intervals([]) == [] and crystal_intervals(None) == []
    with pytest.raises(InputError, match="position_um"):
        crystal_intervals([{"time_draws_days": [1.0, 2.0]}])


# --------------------------------------------------------------------------- ECDF / DKW
def test_ecdf_matches_scipy():
    # scipy.stats.ecdf is the independent reference for the empirical CDF
    rng = np.random.default_rng(6)
    x = np.round(rng.lognormal(3, 1, 57), 1)  # rounding creates ties
    mine = ecdf_with_band(x)
    ref = stats.ecdf(x).cdf
    np.testing.assert_allclose(mine["x"], ref.quantiles)
    np.testing.assert_allclose(mine["cdf"], ref.probabilities, rtol=1e-12)
    eps = mine["halfwidth"]
    np.testing.assert_allclose(mine["lower"], np.clip(ref.probabilities - eps, 0, 1))
    np.testing.assert_allclose(mine["upper"], np.clip(ref.probabilities + eps, 0, 1))


@pytest.mark.parametrize("n", [5, 20, 100, 1000])
def test_dkw_band_is_conservative_against_exact_ks_distribution(n):
    # The DKW band (Massart 1990 constant) must be at least as wide as the exact
    # 95% quantile of the two-sided Kolmogorov-Smirnov statistic (scipy.stats.kstwo)
    # and close to it for large n (asymptotic KS quantile 1.3581/sqrt(n)).
    eps = dkw_halfwidth(n, confidence=0.95)
    exact = stats.kstwo.ppf(0.95, n)
    assert eps >= exact
    if n >= 100:
        assert eps == pytest.approx(exact, rel=0.03)


def test_dkw_coverage_by_simulation():
    # coverage of the true CDF by the band: simulated sup|F_n - F| against the
    # exact KS distribution (scipy.stats.kstwo.cdf), and >= 95% (DKW guarantee)
    rng = np.random.default_rng(7)
    n, trials = 30, 4000
    eps = dkw_halfwidth(n)
    u = np.sort(rng.uniform(size=(trials, n)), axis=1)
    k = np.arange(1, n + 1)
    d = np.maximum((k / n - u).max(axis=1), (u - (k - 1) / n).max(axis=1))
    coverage = np.mean(d <= eps)
    assert coverage >= 0.95 - 3 * math.sqrt(0.05 * 0.95 / trials)
    assert coverage == pytest.approx(stats.kstwo.cdf(eps, n), abs=4 * math.sqrt(0.05 * 0.95 / trials))


# --------------------------------------------------------------------------- KDE
def test_kde_matches_scipy_gaussian_kde():
    # scipy.stats.gaussian_kde (Scott's rule) is the independent reference
    rng = np.random.default_rng(8)
    x = np.concatenate([rng.normal(1.3, 0.1, 15), rng.normal(2.5, 0.15, 9)])
    grid = np.linspace(0, 4, 301)
    dens, h = kde_log10(x, grid)
    ref = stats.gaussian_kde(x)
    np.testing.assert_allclose(dens, ref(grid), rtol=1e-10, atol=1e-14)
    assert h == pytest.approx(math.sqrt(ref.covariance[0, 0]), rel=1e-12)  # covariance includes factor**2
    # a fixed bandwidth equals scipy's with bw_method scaled by the sample sd
    dens2, _ = kde_log10(x, grid, bandwidth=0.2)
    ref2 = stats.gaussian_kde(x, bw_method=0.2 / np.std(x, ddof=1))
    np.testing.assert_allclose(dens2, ref2(grid), rtol=1e-10, atol=1e-14)


# --------------------------------------------------------------------------- events
def _planted(seed=9):
    """Crystals recording events planted at 10, 100 and 1000 days (self-consistency data)."""
    rng = np.random.default_rng(seed)
    truth = {"E10": 10.0, "E100": 100.0, "E1000": 1000.0}
    layout = {  # sample -> crystal -> events recorded
        "A": {"a1": ["E10", "E100"], "a2": ["E10", "E1000"], "a3": ["E100"], "a4": []},
        "B": {"b1": ["E10", "E100", "E1000"], "b2": ["E1000"]},
    }
    recs = []
    for s, crystals in layout.items():
        for c, evs in crystals.items():
            g = np.exp(rng.normal(0, 0.15, 800))
            bs = []
            for k, e in enumerate(evs):
                t = truth[e] * math.exp(rng.normal(0, 0.05))
                d = t * g * np.exp(rng.normal(0, 0.05, 800))
                q = np.percentile(d, [2.5, 16, 50, 84, 97.5])
                bs.append({"position_um": 10.0 + 30 * k, "element": "Mg", "kind": "reverse", "resolved": True,
                           "time_days": dict(zip(["p2_5", "p16", "median", "p84", "p97_5"], q.tolist())),
                           "time_draws_days": d.tolist()})
            recs.append({"sample": s, "crystal": c, "error": None, "boundaries": bs})
    recs.append({"sample": "B", "crystal": "bx", "error": "fit failed", "boundaries": []})
    return recs, layout, truth


def test_population_recovers_planted_events():
    recs, layout, truth = _planted()
    pop = population_summary(recs, n_bootstrap=50)
    block = pop["elements"]["Mg"]
    events = block["events"]
    # ids oldest first
    assert [e["id"] for e in events] == ["Mg-E1", "Mg-E2", "Mg-E3"]
    for e, t in zip(events, [1000.0, 100.0, 10.0]):
        assert e["median_days"] == pytest.approx(t, rel=0.15)
        assert e["p2_5_days"] < t < e["p97_5_days"]
    # membership and fractions: denominators are crystals analysed without error (6)
    members = [{(c["sample"], c["crystal"]) for c in e["crystals"]} for e in events]
    assert members[2] == {("A", "a1"), ("A", "a2"), ("B", "b1")}
    assert members[0] == {("A", "a2"), ("B", "b1"), ("B", "b2")}
    assert events[1]["fraction_of_crystals"] == pytest.approx(3 / 6)
    assert events[0]["by_sample"]["B"] == {"n_crystals": 2, "n_analysed": 2, "fraction": 1.0}
    assert events[0]["by_sample"]["A"]["fraction"] == pytest.approx(1 / 4)
    assert pop["n_crystals"] == 7 and pop["n_failed"] == 1
    assert block["campaign"]["n_boundaries"] == 9
    assert set(block["samples"]) == {"A", "B"}
    assert block["samples"]["A"]["n_boundaries"] == 5
    # the population block (every boundary, all elements) finds the same three events, oldest first
    pe = pop["events"]
    assert pe["criterion"] == "BIC" and [e["id"] for e in pe["events"]] == ["E1", "E2", "E3"]
    assert min(pe["bic_by_k"], key=pe["bic_by_k"].get) == "3"
    assert [e["n_crystals"] for e in pe["events"]] == [3, 3, 3]


def test_population_kde_and_ecdf_blocks():
    recs, _, _ = _planted()
    pop = population_summary(recs, n_bootstrap=100, seed=3)
    camp = pop["elements"]["Mg"]["campaign"]
    kde = camp["kde"]
    g = np.asarray(kde["log10_time_days"])
    dens = np.asarray(kde["density_per_log10_day"])
    # a density integrates to one (trapezoid rule on the padded grid)
    assert trapezoid(dens, g) == pytest.approx(1.0, abs=0.01)
    meds = [b["median_days"] for b in pop["boundaries"]]
    ref = stats.gaussian_kde(np.log10(meds))
    np.testing.assert_allclose(dens, ref(g), rtol=1e-9)
    low, high = np.asarray(kde["band_low"]), np.asarray(kde["band_high"])
    assert np.all(low <= high) and np.all(high > 0)
    # the band is the sampling uncertainty of this curve: it brackets the curve where there is density
    # (a percentile bootstrap of a fixed-bandwidth KDE is centred on it; Efron & Tibshirani 1993, from memory)
    where = dens > 0.05 * dens.max()
    inside = (low[where] <= dens[where] + 1e-12) & (dens[where] <= high[where] + 1e-12)
    assert inside.mean() >= 0.95, inside.mean()
    assert camp["ecdf"]["n"] == 9 and camp["ecdf"]["cdf"][-1] == 1.0
    assert camp["ecdf"]["halfwidth"] == pytest.approx(math.sqrt(math.log(40) / 18))
    env = camp["ecdf"]["draw_envelope"]
    assert np.all(np.asarray(env["low"]) <= np.asarray(env["high"]))
    # same seed, same answer
    again = population_summary(recs, n_bootstrap=100, seed=3)
    assert again["elements"]["Mg"]["campaign"]["kde"]["band_low"] == kde["band_low"]


def test_unresolved_listed_but_left_out_and_elements_separate():
    recs, _, _ = _planted()
    recs[0]["boundaries"][0]["resolved"] = False
    recs[1]["boundaries"][0]["element"] = "Sr"
    pop = population_summary(recs, n_bootstrap=0)
    assert len(pop["unresolved"]) == 1
    u = pop["unresolved"][0]
    assert (u["sample"], u["crystal"]) == ("A", "a1")
    assert u["upper_bound_days"] == pytest.approx(recs[0]["boundaries"][0]["time_days"]["p97_5"])
    assert pop["elements"]["Mg"]["campaign"]["n_boundaries"] == 7
    assert pop["elements"]["Mg"]["campaign"]["n_unresolved"] == 1
    assert pop["elements"]["Sr"]["campaign"]["n_boundaries"] == 1
    assert all(b["crystal"] != "a1" or b["position_um"] != 10.0 for b in pop["boundaries"])


def test_population_without_draws_and_empty():
    recs, _, _ = _planted()
    for r in recs:
        for b in r["boundaries"]:
            b.pop("time_draws_days")
    pop = population_summary(recs, n_bootstrap=20)
    ev = pop["elements"]["Mg"]["events"]
    assert len(ev) == 3 and ev[0]["basis"].startswith("mixture")
    empty = population_summary([])
    assert empty["elements"] == {} and empty["boundaries"] == []


def test_event_intervals_group_crystal_intervals():
    recs, _, _ = _planted()
    for r in recs:
        r["recharge_intervals_days"] = crystal_intervals(r["boundaries"])
    pop = population_summary(recs, n_bootstrap=0)
    eiv = {(x["from_event"], x["to_event"]): x for x in pop["elements"]["Mg"]["event_intervals"]}
    # a1: 10->100, a2: 10->1000, b1: 10->100 and 100->1000 (layout of _planted)
    # (events oldest first: Mg-E3 is the 10-day event, Mg-E1 the 1000-day one)
    assert set(eiv) == {("Mg-E3", "Mg-E2"), ("Mg-E3", "Mg-E1"), ("Mg-E2", "Mg-E1")}
    assert eiv[("Mg-E3", "Mg-E2")]["n_crystals"] == 2
    assert eiv[("Mg-E3", "Mg-E2")]["median_of_medians_days"] == pytest.approx(90.0, rel=0.2)
    assert eiv[("Mg-E2", "Mg-E1")]["median_of_medians_days"] == pytest.approx(900.0, rel=0.2)


def test_missing_numbers_from_json_nulls_do_not_crash():
    # NaN becomes null in JSON; a cached record may carry None in times and draws
    recs = [{"sample": "S", "crystal": "c1", "error": None, "boundaries": [
        {"position_um": 5.0, "element": "Mg", "resolved": True,
         "time_days": {"median": 12.0, "p2_5": None, "p97_5": None}, "time_draws_days": None},
        {"position_um": 9.0, "element": "Mg", "resolved": True,
         "time_days": {"median": 30.0, "p2_5": None, "p97_5": None},
         "time_draws_days": [20.0, None, 30.0, 40.0, 35.0]},
    ]}]
    pop = population_summary(recs, n_bootstrap=5)
    assert len(pop["unresolved"]) == 1 and pop["unresolved"][0]["position_um"] == 5.0
    (b,) = pop["boundaries"]
    assert b["p2_5_days"] == pytest.approx(np.percentile([20.0, 30.0, 40.0, 35.0], 2.5))
    (iv,) = crystal_intervals([{"position_um": 1.0, "time_draws_days": [1.0, None, 2.0]},
                               {"position_um": 2.0, "time_draws_days": [3.0, 4.0, None]}])
    assert iv["n_draws"] == 1 and iv["median"] == 2.0


@pytest.mark.parametrize("kwargs, text", [({"n_bootstrap": -1}, "n_bootstrap"), ({"grid_points": 1}, "grid_points"),
                                          ({"confidence": 1.0}, "confidence")])
def test_population_options_are_checked(kwargs, text):
    with pytest.raises(InputError, match=text):
        population_summary([], **kwargs)


def test_three_recharges_are_not_chained_into_one_event():
    # regression: linking overlapping 95 % intervals merged recharges at ~400, 80 and 7 days into one
    # event because a few wide intervals bridge the gaps; the mixture model keeps three (ids oldest first)
    rng = np.random.default_rng(21)
    recs = []
    for c in range(18):
        bs = []
        for k, t in enumerate((400.0, 80.0, 7.0)):
            s = 0.45 if c % 6 == 0 else rng.uniform(0.05, 0.15)  # every sixth crystal poorly resolved
            med = t * 10 ** rng.normal(0.0, s)
            bs.append({"position_um": 150.0 - 60 * k, "element": "Mg", "resolved": True,
                       "time_days": {"median": med, "p2_5": med * 10 ** (-1.96 * s), "p97_5": med * 10 ** (1.96 * s)}})
        recs.append({"sample": "S", "crystal": f"c{c}", "error": None, "boundaries": bs})
    pop = population_summary(recs, n_bootstrap=0)
    events = pop["elements"]["Mg"]["events"]
    assert [e["id"] for e in events] == ["Mg-E1", "Mg-E2", "Mg-E3"]
    for e, t in zip(events, (400.0, 80.0, 7.0)):
        assert e["p2_5_days"] <= t <= e["p97_5_days"]
        # the well-resolved crystals all record it (a poorly resolved boundary may land in a neighbour)
        assert {f"c{c}" for c in range(18) if c % 6} <= {x["crystal"] for x in e["crystals"]}
