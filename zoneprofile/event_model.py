"""Population recharge events: a censored mixture model of boundary ages in log time.

Every dated boundary of a population says "this boundary formed ``t`` days
before the eruption" with a 95 % interval; an unresolved boundary says only
``t < upper bound``, an equilibrated one ``t > lower bound``. Boundaries grown
at one recharge share its age, so the population of ages is described as a
few shared *events* in ``y = log10(t / day)``:

* event ``k`` has a weight ``w_k``, a centre ``mu_k`` (its age is ``10**mu_k``
  days) and an intrinsic spread ``tau_k >= tau_min`` (a small floor: crystals
  of one recharge need not all have grown at the same hour, and the floor keeps
  the likelihood bounded);
* a dated boundary with measured ``y_i`` and measurement error ``s_i`` (from
  its 95 % interval, ``s = (log10 p97.5 - log10 p2.5) / (2 * 1.96)``) has the
  density ``N(y_i; mu_k, tau_k**2 + s_i**2)`` under event ``k``;
* a bound is a censored observation: ``P(y < log10 U)`` or ``P(y > log10 L)``
  (or both, for an interval) under ``N(mu_k, tau_k**2 + s_b**2)`` with a
  small bound uncertainty ``s_b``. Bounds are never dropped.

The log-likelihood ``sum_i log sum_k w_k f_k(obs_i)`` is maximised directly
(L-BFGS-B with its analytic gradient, several starts) for ``K = 1 .. k_max``
events; ``K`` is chosen by the Bayesian information criterion
``BIC = -2 log L + p ln n`` with ``p = 3K - 1`` and ``n`` the number of
boundaries (Schwarz 1978, Ann. Stat. 6:461). A ``K`` in which some event is
carried by bounds alone (less than one dated boundary's worth of membership)
does not define an age and is not eligible.

Each event's age interval is a Wald interval on ``mu_k`` from the observed
information of the whole likelihood (numerical Hessian of the analytic
gradient; parameters sitting at their floor held fixed), with a Student t
quantile on ``n_k - 1`` degrees of freedom (``n_k`` the dated membership):
the spread is estimated from the same data, so small events get wide
intervals. Where the crystal records say which part of each boundary's
error is shared by every crystal (the temperature and law-parameter parts of
``uncertainty_budget_log10_time_sd``), that shared part does not average
down over members and is added in quadrature.

Boundaries of one crystal are ordered: the inner boundary grew first and is
older. Memberships are conditioned on that order: over the crystal's chain,
only assignments in which the event index never decreases outwards (``E1``
the oldest) are allowed; the marginal probabilities come from the
forward-backward recursion over the chain and each boundary's event from the
jointly most probable chain (Viterbi). Where this differs from the
boundary-by-boundary choice, or two boundaries of one crystal fall into one
event, the member carries a flag. Event ids run oldest first (``E1``).

The maths and the decisions are in ``docs/chronology.md``.
"""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np
from scipy import optimize, special, stats

from zoneprofile._validation import InputError

__all__ = ["fit_event_model", "observations_from_records", "population_events", "SPREAD_FLOOR",
           "BOUND_SIGMA", "K_MAX"]

#: Floor of an event's intrinsic spread (log10 days; 0.02 is about 5 %).
SPREAD_FLOOR = 0.02
#: Uncertainty given to a bound's own value (log10 days; about 12 %).
BOUND_SIGMA = 0.05
#: Largest number of events tried.
K_MAX = 6
#: Smallest measurement error of a dated boundary (log10 days).
_SIGMA_MIN = 0.01
_Z975 = stats.norm.ppf(0.975)
_LN10 = math.log(10.0)


# --------------------------------------------------------------------------- likelihood
def _lse(x, axis=None):
    """log(sum(exp(x))) along ``axis`` (plain numpy; scipy's version carries array-API overhead)."""
    m = np.max(x, axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    out = np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True)) + m
    return out.squeeze(axis) if axis is not None else float(out.squeeze())


class _Data:
    """Observations split into dated and censored arrays."""

    def __init__(self, y, s, lo, hi, kind):
        self.kind = np.asarray(kind)
        self.date = self.kind == "date"
        self.cens = ~self.date
        self.y = np.asarray(y, float)[self.date]
        self.s2 = np.asarray(s, float)[self.date] ** 2
        self.lo = np.asarray(lo, float)[self.cens]
        self.hi = np.asarray(hi, float)[self.cens]
        self.sb2 = np.asarray(s, float)[self.cens] ** 2
        self.n = self.kind.size


def _unpack(theta, k, floor):
    mu = theta[:k]
    tau = floor + np.exp(theta[k:2 * k])
    a = np.concatenate([[0.0], theta[2 * k:]])
    logw = a - _lse(a)
    return mu, tau, logw


def _component_terms(mu, tau, data, *, grad=False):
    """log f_ik for every observation and event, and (optionally) d/dmu, d/dtau."""
    n, k = data.n, mu.size
    logf = np.empty((n, k))
    dmu = np.empty((n, k)) if grad else None
    dtau = np.empty((n, k)) if grad else None
    if data.date.any():
        v = tau[None, :] ** 2 + data.s2[:, None]
        r = data.y[:, None] - mu[None, :]
        logf[data.date] = -0.5 * (np.log(2 * np.pi * v) + r * r / v)
        if grad:
            dmu[data.date] = r / v
            dtau[data.date] = tau[None, :] * (r * r / v ** 2 - 1.0 / v)
    if data.cens.any():
        v = tau[None, :] ** 2 + data.sb2[:, None]
        sd = np.sqrt(v)
        zu = (data.hi[:, None] - mu[None, :]) / sd
        zl = (data.lo[:, None] - mu[None, :]) / sd
        # P = Phi(zu) - Phi(zl), computed in the tail where it does not cancel
        upper_tail = zl > 0
        p = np.where(upper_tail, special.ndtr(-zl) - special.ndtr(-zu), special.ndtr(zu) - special.ndtr(zl))
        logp = np.where(upper_tail, special.log_ndtr(-zl), special.log_ndtr(zu))
        one_sided_u = np.isneginf(zl)
        one_sided_l = np.isposinf(zu)
        logp = np.where(one_sided_u, special.log_ndtr(zu),
                        np.where(one_sided_l, special.log_ndtr(-zl), np.log(np.maximum(p, 1e-300))))
        logf[data.cens] = logp
        if grad:
            with np.errstate(invalid="ignore", over="ignore"):
                phu = np.where(np.isfinite(zu), np.exp(-0.5 * zu * zu - logp) / math.sqrt(2 * np.pi), 0.0)
                phl = np.where(np.isfinite(zl), np.exp(-0.5 * zl * zl - logp) / math.sqrt(2 * np.pi), 0.0)
                zu_f = np.where(np.isfinite(zu), zu, 0.0)
                zl_f = np.where(np.isfinite(zl), zl, 0.0)
            # dz/dmu = -1/sd; dz/dtau = -z * tau / v
            dmu[data.cens] = (-phu + phl) / sd
            dtau[data.cens] = (-phu * zu_f + phl * zl_f) * tau[None, :] / v
    return logf, dmu, dtau


def _negloglik(theta, k, floor, data, *, grad=True):
    mu, tau, logw = _unpack(theta, k, floor)
    logf, dmu, dtau = _component_terms(mu, tau, data, grad=grad)
    joint = logf + logw[None, :]
    ll_i = _lse(joint, axis=1)
    nll = -float(ll_i.sum())
    if not grad:
        return nll
    r = np.exp(joint - ll_i[:, None])
    g_mu = -(r * dmu).sum(axis=0)
    g_tau = -(r * dtau).sum(axis=0) * (tau - floor)
    w = np.exp(logw)
    g_a = -(r.sum(axis=0) - data.n * w)[1:]
    return nll, np.concatenate([g_mu, g_tau, g_a])


def _responsibilities(theta, k, floor, data):
    mu, tau, logw = _unpack(theta, k, floor)
    logf, _, _ = _component_terms(mu, tau, data)
    joint = logf + logw[None, :]
    return joint, np.exp(joint - _lse(joint, axis=1)[:, None])


def _starts(ydates, k, rng, previous=None):
    """Starting centres: equal-count groups, the largest gaps, the previous fit plus its worst point."""
    ys = np.sort(ydates)
    out = []
    groups = np.array_split(ys, k)
    out.append(np.array([g.mean() for g in groups]))
    if ys.size > 1 and k > 1:
        cuts = np.sort(np.argsort(np.diff(ys))[-(k - 1):] + 1)
        out.append(np.array([g.mean() for g in np.split(ys, cuts)]))
    if previous is not None:
        d = np.min(np.abs(ys[:, None] - previous[None, :]), axis=1)
        out.append(np.sort(np.concatenate([previous, [ys[int(np.argmax(d))]]])))
    if k > 1 and previous is None:
        out.append(np.sort(rng.choice(ys, size=k, replace=False)))
    return out


def _minimise(theta0, k, floor, data, bounds):
    """BFGS on the analytic gradient, parameters kept inside ``bounds`` by a smooth reflection-free clamp.

    scipy's L-BFGS-B calls LAPACK at every step, which on a shared machine with
    threaded BLAS costs milliseconds per step; BFGS on this small problem is
    plain numpy. Parameters are mapped ``theta = lo + (hi - lo) * sigmoid(x)``.
    """
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    width = hi - lo
    x0 = special.logit(np.clip((theta0 - lo) / width, 1e-6, 1 - 1e-6))

    def fun(x):
        sg = special.expit(x)
        f, g = _negloglik(lo + width * sg, k, floor, data)
        return f, g * width * sg * (1.0 - sg)

    res = optimize.minimize(fun, x0, jac=True, method="BFGS", options={"gtol": 1e-2, "maxiter": 1000})
    res.x = lo + width * special.expit(res.x)
    return res


def _fit_k(k, data, floor, rng, previous=None):
    ydates = data.y
    allv = np.concatenate([data.y, data.lo[np.isfinite(data.lo)], data.hi[np.isfinite(data.hi)]])
    span = (float(allv.min()) - 1.0, float(allv.max()) + 1.0)
    bounds = [span] * k + [(math.log(1e-6), math.log(3.0))] * k + [(-30.0, 30.0)] * (k - 1)
    best = None
    seen = []
    for mu0 in _starts(ydates, k, rng, previous):
        key = tuple(np.round(mu0, 3))
        if key in seen:
            continue
        seen.append(key)
        theta0 = np.concatenate([mu0, np.full(k, math.log(0.1)), np.zeros(k - 1)])
        res = _minimise(theta0, k, floor, data, bounds)
        if best is None or res.fun < best.fun:
            best = res
    # events oldest first: sort by centre, descending log age
    theta = best.x.copy()
    mu, tau, logw = _unpack(theta, k, floor)
    order = np.argsort(-mu)
    a = logw[order] - logw[order][0]
    theta = np.concatenate([mu[order], theta[k:2 * k][order], a[1:]])
    return theta, float(best.fun), bounds


def _hessian(theta, k, floor, data, bounds):
    """Observed information: forward differences of the analytic gradient."""
    p = theta.size
    h = np.empty((p, p))
    _, g0 = _negloglik(theta, k, floor, data)
    for j in range(p):
        step = 1e-5 * max(1.0, abs(theta[j]))
        t = theta.copy()
        lo, hi = bounds[j]
        if t[j] + step > hi:
            step = -step
        t[j] += step
        _, g = _negloglik(t, k, floor, data)
        h[:, j] = (g - g0) / step
    return 0.5 * (h + h.T)


def _mean_se(theta, k, floor, data, bounds):
    """Standard error of each event centre from the observed information."""
    h = _hessian(theta, k, floor, data, bounds)
    free = np.ones(theta.size, bool)
    for j in range(k, 2 * k):  # spreads at the floor are held fixed (a boundary parameter)
        if theta[j] <= bounds[j][0] + 1e-3:
            free[j] = False
    sub = h[np.ix_(free, free)]
    idx = np.flatnonzero(free)
    se = np.full(k, np.nan)
    try:
        cov = np.linalg.inv(sub)
        diag = np.diag(cov)
        for m in range(k):
            pos = int(np.flatnonzero(idx == m)[0])
            if diag[pos] > 0:
                se[m] = math.sqrt(diag[pos])
    except np.linalg.LinAlgError:
        pass
    for m in range(k):  # not positive definite: the centre's own information (other parameters fixed)
        if not np.isfinite(se[m]) and h[m, m] > 0:
            se[m] = 1.0 / math.sqrt(h[m, m])
    return se


# --------------------------------------------------------------------------- order along each crystal
def _chain_posteriors(logp):
    """Forward-backward and Viterbi over one crystal's chain (rows oldest first).

    ``logp[i, k]`` is log(w_k f_ik); allowed chains never decrease in event index
    going outwards (rows in order). Returns (marginals, most probable chain).
    """
    m, k = logp.shape
    p = np.exp(logp - logp.max(axis=1, keepdims=True))
    alpha = np.empty((m, k))
    alpha[0] = p[0] / p[0].sum()
    for i in range(1, m):
        a = p[i] * np.cumsum(alpha[i - 1])
        alpha[i] = a / a.sum()
    beta = np.ones((m, k))
    for i in range(m - 2, -1, -1):
        b = np.cumsum((p[i + 1] * beta[i + 1])[::-1])[::-1]
        beta[i] = b / b.sum()
    post = alpha * beta
    post /= post.sum(axis=1, keepdims=True)
    # Viterbi with non-decreasing states
    score = np.empty((m, k))
    back = np.zeros((m, k), int)
    score[0] = logp[0]
    for i in range(1, m):
        best_prev = np.maximum.accumulate(score[i - 1])
        arg_prev = np.array([int(np.argmax(score[i - 1][: j + 1])) for j in range(k)])
        score[i] = logp[i] + best_prev
        back[i] = arg_prev
    path = np.empty(m, int)
    path[-1] = int(np.argmax(score[-1]))
    for i in range(m - 1, 0, -1):
        path[i - 1] = back[i, path[i]]
    return post, path


# --------------------------------------------------------------------------- public: the model
def fit_event_model(observations, *, k_max: int = K_MAX, spread_floor: float = SPREAD_FLOOR,
                    confidence: float = 0.95, seed: int = 0) -> dict:
    """Fit the censored mixture of events to boundary observations.

    Parameters
    ----------
    observations : list of dict
        Each with ``statement`` (``"date"``, ``"upper_bound"``, ``"lower_bound"``
        or ``"interval"``), ``log10_days`` (dates), ``sigma_log10`` (dates:
        measurement error; bounds: the bound's own uncertainty, default
        :data:`BOUND_SIGMA`), ``upper_log10`` / ``lower_log10`` (bounds),
        ``crystal`` (any hashable naming the crystal), ``rank`` (sorts the
        crystal's boundaries oldest first) and optionally ``shared_sd_log10``
        (the part of the error shared by all crystals) and ``sample``.
    k_max : int
        Largest number of events tried (capped by the number of dated boundaries).
    spread_floor : float
        Floor of each event's intrinsic spread, log10 days.
    confidence : float
        Level of each event's age interval.
    seed : int
        Seed of the random starting points (the answer is reproducible).

    Returns
    -------
    dict
        ``k``, ``bic_by_k`` ({"1": bic, ...}), ``eligible_by_k``, ``events``
        (oldest first: ``mean_log10``, ``se_log10``, ``spread_log10``,
        ``weight``, ``median_days``, ``p2_5_days``, ``p97_5_days``,
        ``n_dated``), ``probabilities`` (n x K, order-conditioned),
        ``probabilities_free`` (n x K, without the order), ``assignment`` (n
        event indices, 0 = oldest), ``flags`` (one list of strings per
        observation) and ``n_observations``.
    """
    obs = list(observations)
    if not 0 < confidence < 1:
        raise InputError(f"confidence must lie between 0 and 1, got {confidence}")
    if k_max < 1:
        raise InputError(f"k_max must be at least 1, got {k_max}")
    if not spread_floor > 0:
        raise InputError(f"spread_floor must be > 0 (log10 days), got {spread_floor}")
    kind, y, s, lo, hi = [], [], [], [], []
    for i, o in enumerate(obs):
        st = o.get("statement")
        if st == "date":
            yy, ss = float(o["log10_days"]), float(o["sigma_log10"])
            if not (math.isfinite(yy) and math.isfinite(ss) and ss > 0):
                raise InputError(f"observation {i}: a date needs a finite log10_days and sigma_log10 > 0")
            kind.append("date"); y.append(yy); s.append(max(ss, _SIGMA_MIN)); lo.append(-np.inf); hi.append(np.inf)
        elif st in ("upper_bound", "lower_bound", "interval"):
            u = float(o.get("upper_log10", np.inf)) if st != "lower_bound" else np.inf
            lw = float(o.get("lower_log10", -np.inf)) if st != "upper_bound" else -np.inf
            if not (np.isfinite(u) or np.isfinite(lw)) or (np.isfinite(u) and np.isfinite(lw) and lw >= u):
                raise InputError(f"observation {i}: a bound needs a finite value (and lower < upper)")
            kind.append("cens"); y.append(np.nan); s.append(float(o.get("sigma_log10") or BOUND_SIGMA))
            lo.append(lw); hi.append(u)
        else:
            raise InputError(f"observation {i}: unknown statement {st!r}")
    data = _Data(y, s, lo, hi, kind)
    n_dates = int(data.date.sum())
    out = {"n_observations": len(obs), "n_dated": n_dates, "n_bounds": len(obs) - n_dates,
           "criterion": "BIC", "spread_floor_log10": spread_floor, "confidence": confidence,
           "bic_by_k": {}, "eligible_by_k": {}, "k": 0, "events": [], "probabilities": [],
           "probabilities_free": [], "assignment": [], "flags": [[] for _ in obs]}
    if n_dates == 0:
        for f in out["flags"]:
            f.append("no dated boundary in the population: no event can be dated")
        return out
    rng = np.random.default_rng(seed)
    fits = {}
    previous = None
    for k in range(1, min(k_max, n_dates) + 1):
        theta, nll, bounds = _fit_k(k, data, spread_floor, rng, previous)
        p = 3 * k - 1
        bic = 2.0 * nll + p * math.log(data.n)
        _, r = _responsibilities(theta, k, spread_floor, data)
        dated_share = r[data.date].sum(axis=0)
        eligible = bool(np.all(dated_share >= 1.0))
        out["bic_by_k"][str(k)] = bic
        out["eligible_by_k"][str(k)] = eligible
        fits[k] = (theta, bounds, bic, eligible)
        previous = theta[:k]
        best_k = min((kk for kk in fits if fits[kk][3]), key=lambda kk: fits[kk][2], default=None)
        if best_k is not None and k >= best_k + 2:
            break  # two more events did not lower the criterion: stop searching
    good = [k for k in fits if fits[k][3]]
    k = min(good, key=lambda kk: fits[kk][2]) if good else 1
    theta, bounds, _, _ = fits[k]
    mu, tau, logw = _unpack(theta, k, spread_floor)
    joint, r = _responsibilities(theta, k, spread_floor, data)
    se = _mean_se(theta, k, spread_floor, data, bounds)

    # order along each crystal
    crystals = defaultdict(list)
    for i, o in enumerate(obs):
        crystals[o.get("crystal")].append(i)
    post = r.copy()
    assign = np.argmax(r, axis=1)
    free_assign = assign.copy()
    for key, idx in crystals.items():
        idx = sorted(idx, key=lambda j: (obs[j].get("rank", 0), j))
        if len(idx) < 2:
            continue
        pm, path = _chain_posteriors(joint[idx])
        post[idx] = pm
        assign[idx] = path
        free = free_assign[idx]
        if np.any(np.diff(free) < 0):
            for j in idx:
                out["flags"][j].append("this crystal's boundaries date out of order (an inner boundary "
                                       "younger than an outer one); event choice kept in order")
        for j, e_free, e_path in zip(idx, free, path):
            if e_free != e_path:
                out["flags"][j].append(f"placed in E{e_path + 1} rather than E{e_free + 1} to keep the "
                                       "crystal's inner boundaries older")
        counts = np.bincount(path, minlength=k)
        for j, e_path in zip(idx, path):
            if counts[e_path] > 1:
                out["flags"][j].append(f"two boundaries of this crystal fall in E{e_path + 1}")

    a = (1.0 - confidence) / 2.0
    events = []
    for m in range(k):
        n_eff = float(r[data.date, m].sum())
        df = max(n_eff - 1.0, 1.0)
        tq = float(stats.t.ppf(1.0 - a, df))
        members = np.flatnonzero(assign == m)
        shared = [float(obs[j]["shared_sd_log10"]) for j in members
                  if obs[j].get("shared_sd_log10") is not None and kind[j] == "date"]
        sys_sd = float(np.median(shared)) if shared else 0.0
        se_m = float(se[m]) if np.isfinite(se[m]) else float("nan")
        half = math.hypot(tq * se_m, stats.norm.ppf(1.0 - a) * sys_sd) if np.isfinite(se_m) else float("nan")
        ev = {
            "mean_log10": float(mu[m]), "se_log10": se_m, "shared_sd_log10": sys_sd,
            "spread_log10": float(tau[m]), "weight": float(math.exp(logw[m])),
            "n_dated": n_eff, "t_quantile": tq,
            "median_days": 10.0 ** float(mu[m]),
            "p2_5_days": float(10.0 ** (mu[m] - half)) if np.isfinite(half) else None,
            "p97_5_days": float(10.0 ** (mu[m] + half)) if np.isfinite(half) else None,
            "members": members.tolist(),
        }
        events.append(ev)
    out.update({"k": k, "events": events, "probabilities": post.tolist(), "probabilities_free": r.tolist(),
                "assignment": assign.tolist()})
    return out


# --------------------------------------------------------------------------- records -> observations
def _sigma_from(td):
    def pos(x):
        return x is not None and isinstance(x, (int, float)) and math.isfinite(x) and x > 0
    lo, hi = td.get("p2_5"), td.get("p97_5")
    if pos(lo) and pos(hi) and hi > lo:
        return (math.log10(hi) - math.log10(lo)) / (2.0 * _Z975)
    lo, hi = td.get("p16"), td.get("p84")
    if pos(lo) and pos(hi) and hi > lo:
        return (math.log10(hi) - math.log10(lo)) / 2.0
    return None


def _statement(td, resolved=True):
    """The statement of a time summary: explicit, else read from the older keys."""
    st = td.get("statement")
    if st in ("date", "upper_bound", "lower_bound", "none"):
        return st
    if not resolved:  # older records: an unresolved fit is an upper bound unless it says it has none
        return "none" if ("upper_bound" in td and td["upper_bound"] is None) else "upper_bound"
    return "date" if td.get("median") is not None else "none"


def _one(td, resolved=True):
    """An observation dict (without identity) from a time summary, or (None, reason)."""
    td = td or {}
    st = _statement(td, resolved)

    def ok(x):
        return isinstance(x, (int, float)) and math.isfinite(x) and x > 0

    if st == "date":
        med = td.get("median")
        sig = _sigma_from(td)
        if not ok(med) or sig is None:
            return None, "dated without a positive median and a 95 % interval"
        return {"statement": "date", "log10_days": math.log10(med), "sigma_log10": sig}, None
    if st == "upper_bound":
        u = td.get("upper_bound")
        if u is None and not resolved:
            u = td.get("p97_5")
        if not ok(u):
            return None, "an upper bound without a value"
        return {"statement": "upper_bound", "upper_log10": math.log10(u)}, None
    if st == "lower_bound":
        lw = td.get("lower_bound")
        if not ok(lw):
            return None, "a lower bound without a value"
        return {"statement": "lower_bound", "lower_log10": math.log10(lw)}, None
    return None, "the data do not bound the time"


def _combine(cands):
    """One observation for a boundary dated by several elements (single-boundary fits).

    The date with the narrowest 95 % interval in log time carries the boundary
    (ties: the element named first alphabetically); where two elements' dates
    disagree beyond their combined 95 % intervals the observation carries a
    note. With no date, the tightest upper and lower bounds are combined (an
    interval when both exist and agree). Returns ``(observation, element, reason)``.
    """
    dates = sorted((c for c in cands if c[0]["statement"] == "date"),
                   key=lambda c: (round(c[0]["sigma_log10"], 9), c[1]))
    if dates:
        best = dict(dates[0][0])
        notes = []
        for o, el in dates[1:]:
            d = abs(o["log10_days"] - best["log10_days"])
            if d > _Z975 * math.hypot(o["sigma_log10"], best["sigma_log10"]):
                notes.append(f"{dates[0][1]} and {el} dates disagree beyond their 95 % intervals "
                             f"(factor {10 ** d:.2g}); the narrower ({dates[0][1]}) carries the boundary")
        if notes:
            best["notes"] = notes
        return best, dates[0][1], None
    ups = [c for c in cands if c[0]["statement"] == "upper_bound"]
    lows = [c for c in cands if c[0]["statement"] == "lower_bound"]
    if ups and lows:
        u = min(ups, key=lambda c: c[0]["upper_log10"])
        lw = max(lows, key=lambda c: c[0]["lower_log10"])
        if lw[0]["lower_log10"] < u[0]["upper_log10"]:
            o = {"statement": "interval", "upper_log10": u[0]["upper_log10"], "lower_log10": lw[0]["lower_log10"]}
            return o, f"{lw[1]} (lower), {u[1]} (upper)", None
        return None, None, "the elements' bounds contradict each other (lower bound above upper bound)"
    if ups:
        u = min(ups, key=lambda c: c[0]["upper_log10"])
        return u[0], u[1], None
    lw = max(lows, key=lambda c: c[0]["lower_log10"])
    return lw[0], lw[1], None


def _shared_sd(b):
    budget = b.get("uncertainty_budget_log10_time_sd") or {}
    parts = [budget.get("temperature"), budget.get("law_parameters")]
    parts = [float(p) for p in parts if isinstance(p, (int, float)) and math.isfinite(p)]
    return math.sqrt(sum(p * p for p in parts)) if parts else None


def observations_from_records(records, *, element=None, position_tolerance_um: float = 1.0):
    """Boundary observations of a population, and the boundaries left out with their reasons.

    A crystal with ``crystal_model.boundaries`` contributes each boundary's joint
    ``age_days``; otherwise its single-boundary fits are grouped by position
    (within ``position_tolerance_um``) and each group gives one observation
    (see :func:`_combine`). With ``element`` given, only that element's
    single-boundary fits are used, one observation per fit, and crystal models
    are ignored. Failed crystals are skipped (they are counted elsewhere).
    """
    obs, excluded = [], []
    for rec in records or []:
        if rec.get("error"):
            continue
        sample, crystal = str(rec.get("sample", "")), str(rec.get("crystal", ""))
        ident = {"sample": sample, "crystal": crystal}
        cm = rec.get("crystal_model") or {}
        if element is None and isinstance(cm, dict) and cm.get("boundaries"):
            for j, b in enumerate(cm["boundaries"]):
                if not isinstance(b, dict):
                    excluded.append({**ident, "boundary": f"B{j + 1}", "position_um": None,
                                     "source": "crystal model", "element": None,
                                     "reason": f"not a boundary entry ({type(b).__name__})"})
                    continue
                o, why = _one(b.get("age_days") if isinstance(b.get("age_days"), dict) else None)
                bid = str(b.get("id") or f"B{j + 1}")
                base = {**ident, "boundary": bid, "position_um": b.get("position_um"), "source": "crystal model",
                        "element": "+".join(cm.get("elements") or []) or None}
                if o is None:
                    excluded.append({**base, "reason": why})
                    continue
                sh = b.get("shared_sd_log10")
                if o["statement"] == "date" and isinstance(sh, (int, float)) and math.isfinite(sh) and sh >= 0:
                    o["shared_sd_log10"] = float(sh)
                obs.append({**base, **o, "crystal_key": (sample, crystal), "rank": j})
            continue
        groups = []
        for b in rec.get("boundaries") or []:
            if not isinstance(b, dict):
                continue  # not a fit entry (the chronology reports malformed records itself)
            if element is not None and b.get("element") != element:
                continue
            x = b.get("position_um")
            if not isinstance(x, (int, float)) or not math.isfinite(x):
                excluded.append({**ident, "boundary": None, "position_um": x, "source": "single fit",
                                 "element": b.get("element"), "reason": "no position"})
                continue
            for g in groups:
                if element is None and abs(g[0] - x) <= position_tolerance_um:
                    g[1].append(b)
                    break
            else:
                groups.append((float(x), [b]))
        groups.sort(key=lambda g: -g[0])  # innermost (oldest) first
        for j, (x, bs) in enumerate(groups):
            bid = f"{x:.1f} um"
            cands, reasons = [], []
            for b in bs:
                td = b.get("time_days") if isinstance(b.get("time_days"), dict) else None
                o, why = _one(td, bool(b.get("resolved", True)))
                if o is None:
                    reasons.append(f"{b.get('element')}: {why}")
                    continue
                sh = _shared_sd(b)
                if sh is not None and o["statement"] == "date":
                    o["shared_sd_log10"] = sh
                cands.append((o, str(b.get("element"))))
            base = {**ident, "boundary": bid, "position_um": x, "source": "single fit"}
            if not cands:
                excluded.append({**base, "element": "+".join(str(b.get("element")) for b in bs),
                                 "reason": "; ".join(reasons)})
                continue
            o, el, why = _combine(cands)
            if o is None:
                excluded.append({**base, "element": "+".join(c[1] for c in cands), "reason": why})
                continue
            obs.append({**base, **o, "element": el, "crystal_key": (sample, crystal), "rank": j})
    for o in obs:
        # crystals are compared on the part of their error they do not share: the sample's temperature
        # and the law's parameters move every crystal's ages together, so that part cannot tell two
        # events apart; it is added back to each event's interval
        sh = o.get("shared_sd_log10")
        if o["statement"] == "date" and sh:
            o["sigma_total_log10"] = o["sigma_log10"]
            o["sigma_log10"] = math.sqrt(max(o["sigma_log10"] ** 2 - sh ** 2, SPREAD_FLOOR ** 2))
    return obs, excluded


def _time_summary(ev):
    return {"median": ev["median_days"], "p2_5": ev["p2_5_days"], "p97_5": ev["p97_5_days"],
            "statement": "date", "upper_bound": None, "lower_bound": None}


def population_events(records, *, element=None, k_max: int = K_MAX, spread_floor: float = SPREAD_FLOOR,
                      confidence: float = 0.95, seed: int = 0) -> dict:
    """The population's recharge events, in the shape of ``results["population"]["events"]``.

    See the module docstring for the model and ``docs/chronology.md`` for the keys.
    """
    obs, excluded = observations_from_records(records, element=element)
    for o in obs:
        o["crystal"], o["crystal_key_"] = o["crystal"], o.pop("crystal_key")
    fit = fit_event_model([{**o, "crystal": o["crystal_key_"]} for o in obs], k_max=k_max,
                          spread_floor=spread_floor, confidence=confidence, seed=seed)
    analysed = defaultdict(set)
    for rec in records or []:
        if not rec.get("error"):
            analysed[str(rec.get("sample", ""))].add(str(rec.get("crystal", "")))
    n_all = sum(len(v) for v in analysed.values())
    k = fit["k"]
    ids = [f"E{m + 1}" for m in range(k)]
    events = []
    for m, ev in enumerate(fit["events"]):
        mem = [obs[j] for j in ev["members"]]
        crystals = sorted({(o["sample"], o["crystal"]) for o in mem})
        by_sample = {s: sum(1 for c in crystals if c[0] == s) for s in sorted(analysed)}
        warnings = []
        if len(crystals) == 1:
            warnings.append("recorded by one crystal only: check that boundary before quoting this event")
        if ev["n_dated"] < 2:
            warnings.append("carried by fewer than two dated boundaries; its interval is wide")
        events.append({
            "id": ids[m], "age_days": _time_summary(ev),
            "log10_days": {"mean": ev["mean_log10"], "se": ev["se_log10"], "shared_sd": ev["shared_sd_log10"],
                           "spread": ev["spread_log10"], "t_quantile": ev["t_quantile"]},
            "weight": ev["weight"], "n_boundaries": len(mem),
            "n_dated": sum(1 for o in mem if o["statement"] == "date"),
            "n_bounds": sum(1 for o in mem if o["statement"] != "date"),
            "n_crystals": len(crystals), "fraction_of_crystals": len(crystals) / n_all if n_all else None,
            "by_sample": by_sample,
            "n_analysed_by_sample": {s: len(v) for s, v in sorted(analysed.items())},
            "crystals": [{"sample": s, "crystal": c} for s, c in crystals],
            "warnings": warnings,
        })
    members = []
    for j, o in enumerate(obs):
        probs = fit["probabilities"][j] if k else []
        members.append({
            "sample": o["sample"], "crystal": o["crystal"], "boundary": o["boundary"],
            "position_um": o["position_um"], "element": o["element"], "source": o["source"],
            "statement": o["statement"],
            "time_days": _obs_summary(o),
            "probabilities": {ids[m]: float(p) for m, p in enumerate(probs)},
            "event": ids[fit["assignment"][j]] if k else None,
            "flags": list(o.get("notes") or []) + fit["flags"][j],
        })
    return {
        "criterion": "BIC",
        "criterion_text": "Bayesian information criterion, -2 log L + (3K - 1) ln n",
        "bic_by_k": fit["bic_by_k"], "eligible_by_k": fit["eligible_by_k"], "k": k,
        "interval_method": ("Wald interval on the event's log10 age from the observed information, Student t on "
                            "(dated members - 1) degrees of freedom, shared temperature/law error added in quadrature"),
        "spread_floor_log10": spread_floor, "bound_sigma_log10": BOUND_SIGMA, "confidence": confidence,
        "element": element, "n_observations": fit["n_observations"], "n_dated": fit["n_dated"],
        "n_bounds": fit["n_bounds"], "events": events, "members": members, "excluded": excluded,
    }


def _obs_summary(o):
    if o["statement"] == "date":
        y, s = o["log10_days"], o["sigma_log10"]
        return {"median": 10 ** y, "p2_5": 10 ** (y - _Z975 * s), "p97_5": 10 ** (y + _Z975 * s),
                "statement": "date", "upper_bound": None, "lower_bound": None}
    up = 10 ** o["upper_log10"] if "upper_log10" in o else None
    low = 10 ** o["lower_log10"] if "lower_log10" in o else None
    return {"median": None, "p2_5": None, "p97_5": None,
            "statement": "lower_bound" if up is None else "upper_bound",
            "upper_bound": up, "lower_bound": low}
