"""Recharge chronology: intervals between boundaries and population statistics.

Two levels:

* :func:`crystal_intervals` — inside one crystal, the time between successive
  dated recharge boundaries (inner minus outer), propagated draw by draw from
  the Monte Carlo draws of the fits, so that the shared temperature draw cancels
  where it should instead of being counted twice.
* :func:`population_summary` — over samples and the whole campaign, the times
  of every dated boundary, their empirical CDF with a Dvoretzky–Kiefer–Wolfowitz
  band, a kernel density on log10(time) with a bootstrap band, and the recharge
  events: a censored mixture model of boundary ages in log time
  (:mod:`zoneprofile.event_model`), per dated element and for the population.

Times are in days throughout (``*_days``); the density is per log10(day).
The maths is in ``docs/chronology.md``.
"""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np

from zoneprofile._records import Interval, PopulationSummary  # the layouts returned, declared once
from zoneprofile._validation import InputError
from zoneprofile.event_model import population_events

__all__ = [
    "crystal_intervals",
    "population_summary",
    "ecdf_with_band",
    "dkw_halfwidth",
    "kde_log10",
]

_PCTS = (2.5, 16.0, 50.0, 84.0, 97.5)


# --------------------------------------------------------------------------- helpers
def _summary(values: np.ndarray) -> dict:
    p2_5, p16, p50, p84, p97_5 = np.percentile(values, _PCTS)
    return {
        "median": float(p50),
        "p2_5": float(p2_5),
        "p16": float(p16),
        "p84": float(p84),
        "p97_5": float(p97_5),
    }


def _draws(boundary) -> np.ndarray:
    raw = boundary.get("time_draws_days")
    if raw is None:
        return np.empty(0)
    return np.asarray(raw, dtype=float).ravel()


def _position(boundary, index: int) -> float:
    if "position_um" not in boundary:
        message = f"boundary {index} has no 'position_um'"
        raise InputError(message, column="position_um")
    x = float(boundary["position_um"])
    if not math.isfinite(x):
        message = f"boundary {index} has a non-finite 'position_um'"
        raise InputError(message, column="position_um", text=boundary["position_um"])
    return x


# --------------------------------------------------------------------------- per crystal
def crystal_intervals(boundaries, *, per_element: bool = True) -> list[Interval]:
    """Time between successive dated recharge boundaries of one crystal.

    Parameters
    ----------
    boundaries : list of dict
        Each with ``position_um`` (distance from the rim, µm) and
        ``time_draws_days`` (Monte Carlo draws of the time since the boundary
        formed, days). Optional ``element``, ``kind``, ``resolved``. Draw ``i``
        of every boundary of one crystal must come from the same temperature
        draw (the fits use one seed per crystal), so draws are paired by index.
    per_element : bool, default True
        Build one chain of successive boundaries per dated element (a boundary
        dated with Mg and with Sr gives one Mg interval and one Sr interval).
        With ``False`` all boundaries form one chain whatever the element.

    Returns
    -------
    list of dict
        One per pair of successive boundaries (ordered rim to core within each
        element): ``element, outer_um, inner_um, median, p2_5, p16, p84, p97_5,
        mean, sd, n_draws, fraction_negative, resolved, warnings``. Times in days.

    Notes
    -----
    Boundaries nearer the rim grew later, so the time since the outer boundary
    formed is shorter. For draw i the interval is
    ``dt_i = t_inner,i - t_outer,i`` and the reported numbers are percentiles of
    ``{dt_i}``. With independent normal errors ``sd(dt)^2 = s1^2 + s2^2``
    (variance of a difference); the shared temperature draw correlates the two
    times positively, which narrows the interval's spread. Draws with a negative
    interval (inner younger than outer) are not physical; they are kept, counted
    in ``fraction_negative`` and reported in ``warnings``, never clipped.
    Boundaries whose fit is only an upper bound (``resolved`` false) still give
    an interval, flagged ``resolved: false`` with a warning.
    """
    if boundaries is None:
        return []
    entries = []
    for i, b in enumerate(boundaries):
        if not isinstance(b, dict):
            message = f"boundary {i} must be a dict, got {type(b).__name__}"
            raise InputError(message)
        draws = _draws(b)
        if draws.size == 0:
            continue  # not dated: nothing to propagate
        entries.append(
            {
                "position_um": _position(b, i),
                "element": b.get("element") if per_element else None,
                "draws": draws,
                "resolved": bool(b.get("resolved", True)),
                "order": i,
            }
        )
    chains: dict = defaultdict(list)
    for e in entries:
        chains[e["element"]].append(e)

    out = []
    for element in sorted(chains, key=lambda k: "" if k is None else str(k)):
        chain = sorted(chains[element], key=lambda e: (e["position_um"], e["order"]))
        for outer, inner in zip(chain[:-1], chain[1:]):
            out.append(_interval(outer, inner, element))
    return out


def _interval(outer: dict, inner: dict, element) -> dict:
    warnings = []
    a, b = outer["draws"], inner["draws"]
    if a.size != b.size:
        n = min(a.size, b.size)
        warnings.append(
            f"the two boundaries carry different numbers of draws ({a.size} and {b.size}); "
            f"the first {n} were paired by index"
        )
        a, b = a[:n], b[:n]
    diff = b - a
    ok = np.isfinite(diff)
    diff = diff[ok]
    res = {
        "element": element,
        "outer_um": outer["position_um"],
        "inner_um": inner["position_um"],
    }
    if inner["position_um"] == outer["position_um"]:
        warnings.append("the two boundaries sit at the same position; check the boundary list")
    if diff.size == 0:
        warnings.append("no finite pair of draws; interval not computed")
        res.update({k: None for k in ("median", "p2_5", "p16", "p84", "p97_5", "mean", "sd")})
        res.update({"n_draws": 0, "fraction_negative": None, "resolved": False, "warnings": warnings})
        return res
    res.update(_summary(diff))
    res["mean"] = float(np.mean(diff))
    res["sd"] = float(np.std(diff, ddof=1)) if diff.size > 1 else 0.0
    res["n_draws"] = int(diff.size)
    frac = float(np.mean(diff < 0))
    res["fraction_negative"] = frac
    if frac > 0:
        pct = 100.0 * frac
        if res["median"] < 0:
            warnings.append(
                f"{pct:.0f}% of draws give a negative interval (median {res['median']:.3g} days): "
                "the inner boundary dates younger than the outer one, which is not physical; "
                "check the boundary assignment, temperatures and laws"
            )
        elif frac > 0.025:
            warnings.append(
                f"{pct:.1f}% of draws give a negative interval: the two boundaries are not "
                "separated in time at 95% confidence"
            )
        else:
            warnings.append(f"{pct:.1f}% of draws give a negative interval (kept, not clipped)")
    resolved = outer["resolved"] and inner["resolved"]
    if not resolved:
        which = "outer" if not outer["resolved"] else "inner"
        if not (outer["resolved"] or inner["resolved"]):
            which = "both"
        warnings.append(
            f"the {which} boundary time is only an upper bound (profile not wider than the "
            "resolution); the interval is indicative"
        )
    res["resolved"] = bool(resolved)
    res["warnings"] = warnings
    return res


# --------------------------------------------------------------------------- ECDF
def dkw_halfwidth(n: int, *, confidence: float = 0.95) -> float:
    """Half-width of the Dvoretzky–Kiefer–Wolfowitz confidence band.

    ``eps = sqrt(ln(2 / alpha) / (2 n))`` with ``alpha = 1 - confidence``
    (Massart 1990, Ann. Probab. 18:1269, tight constant). The band
    ``[F_n - eps, F_n + eps]`` holds the whole true CDF with probability at
    least ``confidence``.
    """
    if n < 1:
        message = "the DKW band needs at least one value"
        raise InputError(message)
    if not 0 < confidence < 1:
        message = f"confidence must lie between 0 and 1, got {confidence}"
        raise InputError(message)
    alpha = 1.0 - confidence
    return math.sqrt(math.log(2.0 / alpha) / (2.0 * n))


def ecdf_with_band(values, *, confidence: float = 0.95) -> dict:
    """Empirical CDF of ``values`` with its DKW band (a step function).

    Returns ``{"x": sorted distinct values, "cdf": F_n(x), "lower", "upper",
    "halfwidth", "n", "confidence"}``; ``cdf[k]`` is the fraction of values
    ``<= x[k]`` (right-continuous steps).
    """
    v = np.asarray(values, dtype=float).ravel()
    v = v[np.isfinite(v)]
    n = v.size
    if n == 0:
        return {"x": [], "cdf": [], "lower": [], "upper": [], "halfwidth": None, "n": 0,
                "confidence": confidence}
    x, counts = np.unique(v, return_counts=True)
    cdf = np.cumsum(counts) / n
    eps = dkw_halfwidth(n, confidence=confidence)
    return {
        "x": x.tolist(),
        "cdf": cdf.tolist(),
        "lower": np.clip(cdf - eps, 0.0, 1.0).tolist(),
        "upper": np.clip(cdf + eps, 0.0, 1.0).tolist(),
        "halfwidth": eps,
        "n": int(n),
        "confidence": confidence,
    }


# --------------------------------------------------------------------------- KDE
def _scott_bandwidth(x: np.ndarray) -> float | None:
    if x.size < 2:
        return None
    sd = float(np.std(x, ddof=1))
    if not sd > 0:
        return None
    return sd * x.size ** (-1.0 / 5.0)


def kde_log10(values, grid, *, bandwidth=None, fallback_bandwidth: float = 0.1) -> tuple[np.ndarray, float]:
    """Gaussian kernel density of ``values`` (already log10) on ``grid``.

    ``bandwidth`` (log10 units) defaults to Scott's rule, ``sd * n**(-1/5)``
    with the sample standard deviation (ddof 1), the rule used by
    ``scipy.stats.gaussian_kde``; with fewer than two distinct values
    ``fallback_bandwidth`` is used. Returns ``(density, bandwidth)``, the
    density integrating to one over the real line.
    """
    x = np.asarray(values, dtype=float).ravel()
    x = x[np.isfinite(x)]
    g = np.asarray(grid, dtype=float)
    if x.size == 0:
        return np.zeros_like(g), float("nan")
    h = bandwidth if bandwidth is not None else _scott_bandwidth(x)
    if h is None or not h > 0:
        h = float(fallback_bandwidth)
    z = (g[:, None] - x[None, :]) / h
    dens = np.exp(-0.5 * z * z).sum(axis=1) / (x.size * h * math.sqrt(2.0 * math.pi))
    return dens, float(h)


# --------------------------------------------------------------------------- population
def _boundary_rows(records):
    """Flatten records into dated-boundary rows; failed crystals are skipped."""
    rows, unresolved = [], []
    for rec in records:
        if rec.get("error"):
            continue
        for j, b in enumerate(rec.get("boundaries") or []):
            td = b.get("time_days") or {}
            draws = _draws(b)
            draws = draws[np.isfinite(draws) & (draws > 0)]
            med = td.get("median")
            lo = td.get("p2_5")
            hi = td.get("p97_5")
            if (med is None or lo is None or hi is None) and draws.size:
                s = _summary(draws)
                med = s["median"] if med is None else med
                lo = s["p2_5"] if lo is None else lo
                hi = s["p97_5"] if hi is None else hi
            row = {
                "sample": str(rec.get("sample", "")),
                "crystal": str(rec.get("crystal", "")),
                "position_um": b.get("position_um"),
                "element": b.get("element"),
                "kind": b.get("kind"),
                "law": b.get("law"),
                "index": j,
            }
            if med is None:
                continue  # not dated
            if not b.get("resolved", True):
                if "upper_bound" in td and td["upper_bound"] is None:
                    unresolved.append({**row, "upper_bound_days": None,
                                       "note": "the data do not bound the time; left out of the statistics"})
                    continue
                bound = td.get("upper_bound") or (hi if hi is not None else (td.get("best") or med))
                unresolved.append({**row, "upper_bound_days": float(bound)})
                continue
            if lo is None or hi is None or not (med > 0 and lo > 0 and hi > 0):
                unresolved.append({**row, "upper_bound_days": None,
                                   "note": "no positive time with a 95% interval; left out of the statistics"})
                continue
            row.update({"median_days": float(med), "p2_5_days": float(lo), "p97_5_days": float(hi)})
            row["_draws"] = draws
            rows.append(row)
    return rows, unresolved


def _draw_matrix(rows):
    """Draws of each row padded into a matrix (rows x max draws) with per-row counts.

    A row without draws uses its median as its only draw.
    """
    counts = np.array([max(r["_draws"].size, 1) for r in rows])
    mat = np.empty((len(rows), int(counts.max())))
    for i, r in enumerate(rows):
        d = r["_draws"] if r["_draws"].size else np.array([r["median_days"]])
        mat[i, : d.size] = d
    return mat, counts


def _kde_block(rows, grid, rng, *, n_boot, bandwidth, confidence):
    if not rows:
        return None
    pts = np.log10([r["median_days"] for r in rows])
    dens, h = kde_log10(pts, grid, bandwidth=bandwidth)
    crystal_of = {}
    members = []
    for i, r in enumerate(rows):
        key = (r["sample"], r["crystal"])
        if key not in crystal_of:
            crystal_of[key] = len(members)
            members.append([])
        members[crystal_of[key]].append(i)
    members = [np.asarray(m) for m in members]
    # the band is the sampling uncertainty of this curve: crystals resampled, the same
    # points (medians) and the same bandwidth, so the band brackets the curve; the dating
    # spread of each boundary is shown by the ECDF's draw envelope and the event strip
    boots = []
    for _ in range(n_boot):
        pick = rng.integers(0, len(members), size=len(members))
        idx = np.concatenate([members[k] for k in pick])
        dv, _ = kde_log10(pts[idx], grid, bandwidth=h)
        boots.append(dv)
    a = (1.0 - confidence) / 2.0
    if boots:
        low, high = np.percentile(np.asarray(boots), [100 * a, 100 * (1 - a)], axis=0)
    else:
        low = high = dens
    return {
        "log10_time_days": grid.tolist(),
        "density_per_log10_day": dens.tolist(),
        "band_low": np.asarray(low).tolist(),
        "band_high": np.asarray(high).tolist(),
        "bandwidth_log10": h,
        "n_bootstrap": int(n_boot) if boots else 0,
    }


def _draw_envelope(rows, x_eval, rng, *, n_env, confidence):
    """Envelope of ECDFs built from one random draw per boundary (measurement spread)."""
    if not rows or n_env <= 0 or not all(r["_draws"].size for r in rows):
        return None
    mat, counts = _draw_matrix(rows)
    n = len(rows)
    col = (rng.random((n_env, n)) * counts[None, :]).astype(int)
    vals = np.sort(mat[np.arange(n)[None, :], col], axis=1)
    curves = np.stack([np.searchsorted(v, x_eval, side="right") for v in vals]) / n
    a = (1.0 - confidence) / 2.0
    lo, hi = np.percentile(curves, [100 * a, 100 * (1 - a)], axis=0)
    return {"time_days": x_eval.tolist(), "low": lo.tolist(), "high": hi.tolist()}


def _scope_summary(rows, unresolved, n_analysed, grid, rng, *, n_boot, bandwidth, confidence):
    meds = np.array([r["median_days"] for r in rows])
    out = {
        "n_crystals_analysed": int(n_analysed),
        "n_crystals_dated": len({(r["sample"], r["crystal"]) for r in rows}),
        "n_boundaries": len(rows),
        "n_unresolved": len(unresolved),
    }
    if rows:
        out["time_days"] = {
            "median_of_medians": float(np.median(meds)),
            "min": float(meds.min()),
            "max": float(meds.max()),
        }
        ecdf = ecdf_with_band(meds, confidence=confidence)
        x_eval = np.geomspace(min(r["p2_5_days"] for r in rows), max(r["p97_5_days"] for r in rows), 120)
        ecdf["draw_envelope"] = _draw_envelope(rows, x_eval, rng, n_env=n_boot, confidence=confidence)
        out["ecdf"] = ecdf
        out["kde"] = _kde_block(rows, grid, rng, n_boot=n_boot, bandwidth=bandwidth, confidence=confidence)
    else:
        out["time_days"] = None
        out["ecdf"] = None
        out["kde"] = None
    return out


def population_summary(
    records,
    *,
    confidence: float = 0.95,
    n_bootstrap: int = 200,
    bandwidth: float | None = None,
    grid_points: int = 256,
    seed: int = 0,
) -> PopulationSummary:
    """Population statistics of boundary times, per sample and for the campaign.

    Parameters
    ----------
    records : list of dict
        Crystal records (see ``docs/report.md``): ``sample``, ``crystal``,
        ``error``, ``boundaries[]`` with ``position_um``, ``element``,
        ``time_days {median, p2_5, p97_5, ...}``, ``resolved`` and optionally
        ``time_draws_days``.
    confidence : float, default 0.95
        Level of the DKW band, the bootstrap band and the event intervals.
    n_bootstrap : int, default 200
        Bootstrap resamples for the KDE band (crystals resampled with
        replacement, one random draw per boundary) and the ECDF draw envelope.
    bandwidth : float, optional
        Fixed KDE bandwidth in log10(days); default Scott's rule.
    grid_points : int, default 256
        Points of the KDE grid.
    seed : int, default 0
        Seed of the bootstrap (results are reproducible).

    Returns
    -------
    dict
        ``settings``, ``n_crystals``, ``n_failed``, ``boundaries`` (every
        resolved dated boundary with its median and 95% interval and event),
        ``unresolved`` (upper bounds, listed but left out of the ECDF and KDE),
        ``elements {element: {campaign: summary, samples: {sample: summary},
        events: [...], event_model: {...}, event_intervals: [...]}}`` and
        ``events``, the population's recharge events from every boundary
        (crystal-model ages where a crystal has them, else its single fits;
        :func:`zoneprofile.event_model.population_events`). ``event_intervals`` groups
        the crystals' recharge intervals (``recharge_intervals_days`` of the
        records) by the pair of events their outer and inner boundaries
        belong to.

    Notes
    -----
    Statistics are kept per dated element: Mg and Sr record the same boundary
    with different diffusivities and their times are not one population.
    Events are the components of a censored mixture of boundary ages in
    log10(time), their number chosen by BIC (:mod:`zoneprofile.event_model`);
    upper and lower bounds enter as censored observations. The fraction of
    crystals recording an event counts crystals analysed without error.
    """
    if records is None:
        records = []
    records = list(records)
    if n_bootstrap < 0:
        message = f"n_bootstrap must be >= 0, got {n_bootstrap}"
        raise InputError(message)
    if grid_points < 2:
        message = f"grid_points must be >= 2, got {grid_points}"
        raise InputError(message)
    if not 0 < confidence < 1:
        message = f"confidence must lie between 0 and 1, got {confidence}"
        raise InputError(message)
    rng = np.random.default_rng(seed)
    rows, unresolved = _boundary_rows(records)
    analysed = [r for r in records if not r.get("error")]
    analysed_by_sample = defaultdict(set)
    for r in analysed:
        analysed_by_sample[str(r.get("sample", ""))].add(str(r.get("crystal", "")))
    n_all = sum(len(v) for v in analysed_by_sample.values())

    elements = sorted({r["element"] for r in rows} | {u["element"] for u in unresolved},
                      key=lambda e: "" if e is None else str(e))
    by_element = {}
    for el in elements:
        erows = [r for r in rows if r["element"] == el]
        eunres = [u for u in unresolved if u["element"] == el]
        if erows:
            lo = min(math.log10(r["p2_5_days"]) for r in erows)
            hi = max(math.log10(r["p97_5_days"]) for r in erows)
            h0 = bandwidth or _scott_bandwidth(np.log10([r["median_days"] for r in erows])) or 0.1
            pad = max(0.3, 0.15 * (hi - lo), 4.0 * h0)
            grid = np.linspace(lo - pad, hi + pad, grid_points)
        else:
            grid = np.linspace(0, 1, grid_points)
        model = population_events(records, element=el, confidence=confidence, seed=seed)
        events = _events(erows, eunres, el, model, analysed_by_sample, n_all)
        samples = {}
        for s in sorted(analysed_by_sample):
            srows = [r for r in erows if r["sample"] == s]
            sunres = [u for u in eunres if u["sample"] == s]
            if not srows and not sunres:
                continue
            samples[s] = _scope_summary(srows, sunres, len(analysed_by_sample[s]), grid, rng,
                                        n_boot=n_bootstrap, bandwidth=bandwidth, confidence=confidence)
        by_element[_key(el)] = {
            "element": el,
            "campaign": _scope_summary(erows, eunres, n_all, grid, rng, n_boot=n_bootstrap,
                                       bandwidth=bandwidth, confidence=confidence),
            "samples": samples,
            "events": events,
            "event_model": {k: v for k, v in model.items() if k not in ("events", "members")},
            "event_intervals": _event_intervals(records, erows, el),
        }

    boundaries = []
    for r in rows:
        boundaries.append({k: v for k, v in r.items() if not k.startswith("_") and k != "index"})
    return {
        "settings": {
            "confidence": float(confidence),
            "n_bootstrap": int(n_bootstrap),
            "bandwidth_log10": bandwidth,
            "seed": int(seed),
            "event_rule": "censored mixture of boundary ages in log10(time), number of events by BIC",
            "fraction_denominator": "crystals analysed without error",
        },
        "n_crystals": len(records),
        "n_failed": len(records) - len(analysed),
        "boundaries": boundaries,
        "unresolved": [{k: v for k, v in u.items() if k != "index"} for u in unresolved],
        "elements": by_element,
        "events": population_events(records, confidence=confidence, seed=seed),
    }


def _event_intervals(records, rows, element):
    """Crystal intervals grouped by the pair of events their two boundaries belong to."""
    event_at = {}
    for r in rows:
        if r["event"] and r["position_um"] is not None:  # rows are tagged by _events first
            event_at[(r["sample"], r["crystal"], float(r["position_um"]))] = r["event"]
    groups = defaultdict(list)
    for rec in records:
        if rec.get("error"):
            continue
        s, c = str(rec.get("sample", "")), str(rec.get("crystal", ""))
        for iv in rec.get("recharge_intervals_days") or []:
            if iv.get("element", element) != element or iv.get("median") is None:
                continue
            try:
                a = event_at.get((s, c, float(iv["outer_um"])))
                b = event_at.get((s, c, float(iv["inner_um"])))
            except (KeyError, TypeError, ValueError):
                continue
            if a and b:
                groups[(a, b)].append((s, c, iv))
    out = []
    for (a, b), items in sorted(groups.items()):
        meds = np.array([iv["median"] for _, _, iv in items], dtype=float)
        out.append({
            "from_event": a,
            "to_event": b,
            "n_crystals": len(items),
            "median_of_medians_days": float(np.median(meds)),
            "min_median_days": float(meds.min()),
            "max_median_days": float(meds.max()),
            "crystals": [{"sample": s, "crystal": c} for s, c, _ in items],
        })
    return out


def _key(element) -> str:
    return "unknown" if element is None else str(element)


def _events(rows, unresolved, element, model, analysed_by_sample, n_all):
    """One element's events in the per-element layout, from its mixture model; tags rows with their event."""
    prefix = _key(element)
    where = {}
    for m in model["members"]:
        where[(m["sample"], m["crystal"], m["position_um"])] = m
    for r in list(rows) + list(unresolved):
        x = r["position_um"]
        m = where.get((r["sample"], r["crystal"], float(x))) if isinstance(x, (int, float)) else None
        r["event"] = f"{prefix}-{m['event']}" if m and m["event"] else None
        if m:
            r["event_probabilities"] = {f"{prefix}-{k}": p for k, p in m["probabilities"].items()}
            if m["flags"]:
                r["event_flags"] = list(m["flags"])
    events = []
    for e in model["events"]:
        eid = f"{prefix}-{e['id']}"
        members = [r for r in rows if r["event"] == eid]
        crystals = sorted({(c["sample"], c["crystal"]) for c in e["crystals"]})
        per_sample = {}
        for s, names in sorted(analysed_by_sample.items()):
            n_rec = sum(1 for c in crystals if c[0] == s)
            per_sample[s] = {"n_crystals": n_rec, "n_analysed": len(names),
                             "fraction": n_rec / len(names) if names else None}
        age = e["age_days"]
        events.append({
            "id": eid,
            "element": element,
            "median_days": age["median"],
            "p2_5_days": age["p2_5"],
            "p97_5_days": age["p97_5"],
            "age_days": age,
            "basis": "mixture model (Wald interval on the event's log10 age)",
            "spread_log10": e["log10_days"]["spread"],
            "member_median_range_days": ([min(r["median_days"] for r in members),
                                          max(r["median_days"] for r in members)] if members else None),
            "n_boundaries": e["n_boundaries"],
            "n_bounds": e["n_bounds"],
            "crystals": [{"sample": s, "crystal": c} for s, c in crystals],
            "n_crystals": len(crystals),
            "fraction_of_crystals": len(crystals) / n_all if n_all else None,
            "by_sample": per_sample,
            "warnings": e["warnings"],
        })
    return events
