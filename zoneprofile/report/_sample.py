"""Seeded synthetic crystal records for tests and examples of the report.

The records follow the crystal-record layout of ``docs/report.md``. Profiles
are made by a simple forward model: flat zones joined by steps, each step
relaxed as an error function of width ``sqrt(D t)``; Monte Carlo time draws
share a temperature factor per draw, as the fits do. Names are invented.
This is not a diffusion fit: the report layer only needs plausible records.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

from zoneprofile._units import SECONDS_PER_DAY
from zoneprofile.chronology import crystal_intervals

__all__ = ["sample_records", "sample_provenance"]


def _step_profile(x, positions, levels, widths):
    """Piecewise-constant ``levels`` (rim first) joined by erf steps at ``positions``."""
    y = np.full_like(x, levels[-1], dtype=float)
    # build from core outwards: each step changes the value on its rim side
    for pos, w, rim_side, core_side in zip(positions, widths, levels[:-1], levels[1:]):
        frac = 0.5 * (1 - erf((x - pos) / max(w, 1e-6)))  # 1 on rim side, 0 on core side
        y = y + (rim_side - core_side) * frac
    return y


def _record(rng, sample, crystal, *, times_true, n_draws, with_map=False, unresolved=False,
            error=None, temperature_c=1000.0):
    record = {
        "sample": sample,
        "crystal": crystal,
        "mineral": "plagioclase",
        "error": error,
        "inputs": [
            {"path": f"inputs/{sample}_{crystal}_traverse.csv",
             "sha256": f"{rng.integers(0, 2**63):016x}" * 4, "role": "traverse"},
        ],
        "parameters": {"temperature_c": temperature_c, "temperature_sd_c": 15.0,
                       "elements": ["Mg"], "draws": n_draws, "beam_um": 3.0},
        "warnings": [],
    }
    if error:
        record.update({"profile": None, "zones": None, "boundaries": [], "recharge_intervals_days": [],
                       "map": None})
        return record

    x = np.arange(0.0, 200.0, 2.0)
    pos = [float(30 + rng.normal(0, 3)), float(110 + rng.normal(0, 5))]
    an_levels = [72.0 + rng.normal(0, 1.5), 58.0 + rng.normal(0, 1.5), 50.0 + rng.normal(0, 1.5)]
    an = _step_profile(x, pos, an_levels, [1.0, 1.0]) + rng.normal(0, 0.6, x.size)
    # Mg relaxes with width ~ sqrt(D t): D ~ 1e-16 m2/s gives ~ 3 um in 1 day scale
    d_um2_day = 1e-16 * 1e12 * SECONDS_PER_DAY
    widths = [2 * math.sqrt(d_um2_day * t) for t in times_true]
    mg_levels = [520.0, 380.0, 300.0]
    mg_true = _step_profile(x, pos, mg_levels, widths)
    mg = mg_true + rng.normal(0, 8, x.size)
    qc = ["ok"] * x.size
    qc[int(rng.integers(5, x.size - 5))] = "low total (97.8 wt%)"
    record["profile"] = {
        "distance_um": x.tolist(), "An": an.tolist(), "Mg_ppm": mg.tolist(), "qc": qc,
        "point": [f"p{k + 1}" for k in range(x.size)],
    }
    steps, zones = [], []
    edges = [0.0, *pos, float(x[-1])]
    for k, p in enumerate(pos):
        before, after = an_levels[k + 1], an_levels[k]
        steps.append({"position_um": p, "before": before, "after": after, "change": after - before,
                      "kind": "reverse" if after > before else "normal", "width_um": 2.0,
                      "position_sd_um": 1.0, "recharge": "recharge-like"})
    for k in range(3):
        zones.append({"start_um": edges[k], "end_um": edges[k + 1], "mean": an_levels[k],
                      "trend_per_um": 0.0, "kind": "plateau"})
    record["zones"] = {
        "column": "An", "noise_sd": 0.6, "steps": steps,
        "resorption_surfaces": [{"position_um": pos[1], "evidence": ["An step", "Mg step"]}],
        "oscillatory_bands": [{"start_um": 150.0, "end_um": 195.0, "wavelength_um": 9.0,
                               "amplitude": 1.2, "p_value": 0.03}],
        "zones": zones,
    }
    # time draws sharing the temperature factor
    z_t = rng.normal(0, 1, n_draws)
    boundaries = []
    for k, (p, t) in enumerate(zip(pos, times_true)):
        draws = t * np.exp(0.30 * z_t + 0.12 * rng.normal(0, 1, n_draws))
        sel = (x > p - 30) & (x < p + 30)
        xs = x[sel]
        model = _step_profile(xs, [p], mg_levels[k:k + 2], [widths[k]])
        lo = _step_profile(xs, [p], mg_levels[k:k + 2], [widths[k] * 0.8])
        hi = _step_profile(xs, [p], mg_levels[k:k + 2], [widths[k] * 1.25])
        initial = _step_profile(xs, [p], mg_levels[k:k + 2], [1e-6])
        res = not (unresolved and k == 0)
        s = np.percentile(draws, [2.5, 16, 50, 84, 97.5])
        boundaries.append({
            "position_um": p, "kind": "reverse", "element": "Mg", "law": "mg-plag-sample",
            "time_days": {"best": float(t), "median": float(s[2]), "p2_5": float(s[0]), "p16": float(s[1]),
                          "p84": float(s[3]), "p97_5": float(s[4])},
            "log10_dt_m2": float(math.log10(1e-16 * t * SECONDS_PER_DAY)), "resolved": res,
            "warnings": [] if res else ["profile not wider than the beam: time is an upper bound"],
            "obliquity_deg": None,
            "curve": {"distance_um": xs.tolist(), "data": mg[sel].tolist(), "model": model.tolist(),
                      "initial": initial.tolist(), "band_low": np.minimum(lo, hi).tolist(),
                      "band_high": np.maximum(lo, hi).tolist()},
            "time_draws_days": draws.tolist(),
        })
    record["boundaries"] = boundaries
    record["recharge_intervals_days"] = crystal_intervals(boundaries)
    if with_map:
        yy, xx = np.mgrid[0:60, 0:80]
        r = np.hypot(xx - 40, yy - 30) * 2.0  # um from the centre, 2 um pixels
        dist = np.clip(70 - r, 0, None) * (200 / 70)
        img = np.interp(dist, x, _step_profile(x, pos, an_levels, [1.0, 1.0]))
        img[r > 70] = np.nan
        record["map"] = {"image": img.tolist(), "pixel_um": 2.0, "line": [5.0, 30.0, 40.0, 30.0],
                         "calibration": {"slope": 0.21, "intercept": 11.3, "r2": 0.97, "rmse": 1.1, "n": 14},
                         "boundaries": [{"position_um": pos[0], "obliquity_deg": 12.0}]}
    else:
        record["map"] = None
    return record


def sample_records(*, seed: int = 0, samples=("North vent", "South flank"), crystals_per_sample: int = 3,
                   n_draws: int = 400, event_days=(20.0, 300.0), with_failure: bool = True,
                   with_map: bool = True, with_unresolved: bool = True) -> list[dict]:
    """Seeded crystal records: two recharge boundaries per crystal, times near ``event_days``.

    The outer (rim-side) boundary dates near ``event_days[0]`` and the inner one
    near ``event_days[1]`` (days before eruption), each crystal scattered by
    ~15% around them. Adds one crystal with a map, one with an unresolved
    boundary and one failed crystal when asked.
    """
    rng = np.random.default_rng(seed)
    recs = []
    for i, s in enumerate(samples):
        for j in range(crystals_per_sample):
            times = [event_days[0] * math.exp(rng.normal(0, 0.15)), event_days[1] * math.exp(rng.normal(0, 0.15))]
            recs.append(_record(rng, s, f"c{j + 1:02d}", times_true=times, n_draws=n_draws,
                                with_map=with_map and i == 0 and j == 0,
                                unresolved=with_unresolved and i == 1 and j == 0))
    if with_failure:
        recs.append(_record(rng, samples[-1], "c99", times_true=[], n_draws=n_draws,
                            error="fit failed: no boundary wider than the beam (inputs/c99.csv)"))
    return recs


def sample_provenance(records) -> dict:
    """A provenance block in the layout ``write_outputs`` expects."""
    return {
        "software": {"name": "zoneprofile", "version": "0.1.0"},
        "created_utc": "2026-01-01T00:00:00Z",
        "campaign_file": "campaign.toml",
        "inputs": [dict(i, sample=r["sample"], crystal=r["crystal"]) for r in records for i in r["inputs"]],
        "parameters": {"defaults": {"draws": 400, "beam_um": 3.0}},
        "laws": [{"id": "mg-plag-sample", "element": "Mg", "mineral": "plagioclase",
                  "citation": "Sample law for tests (invented), not a published law",
                  "status": "from memory", "range": "800-1200 °C"}],
    }
