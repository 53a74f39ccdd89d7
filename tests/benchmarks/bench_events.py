"""Benchmark: the population event model on a 200-crystal campaign's records.

Run by hand (not collected by pytest)::

    python tests/benchmarks/bench_events.py [--crystals 200] [--repeat 3]

Records: the report's seeded sample records (two recharges per crystal), each
boundary dated with Mg and again with Sr (times x3), so the population holds
``4 x crystals`` single-boundary fits, as a two-element campaign does. Printed
side by side in one run (medians over ``--repeat``):

* the whole population summary (ECDF, KDE, bootstrap bands, events per element
  and for the population), as the campaign calls it;
* the event model alone: the population fit and one fit per element;
* the single-linkage chaining the model replaced (a copy written here), for scale;
* the share of the population summary spent in the event model.
"""

from __future__ import annotations

import argparse
import copy
import math
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from zoneprofile.chronology import population_summary  # noqa: E402
from zoneprofile.event_model import population_events  # noqa: E402
from zoneprofile.report._sample import sample_records  # noqa: E402


def records(n_crystals):
    recs = sample_records(seed=5, samples=("North", "South"), crystals_per_sample=n_crystals // 2,
                          with_failure=False, with_map=False, n_draws=200)
    for r in recs:
        extra = copy.deepcopy(r["boundaries"])
        for b in extra:
            b["element"] = "Sr"
            med = b["time_days"]["median"]
            b["time_draws_days"] = [med * (t / med) ** 1.5 for t in b["time_draws_days"]]
            b["time_days"] = {k: (med * (v / med) ** 1.5 if isinstance(v, (int, float)) else v)
                              for k, v in b["time_days"].items()}
        r["boundaries"] += extra
    return recs


def chaining(recs):
    """The former rule: single linkage of overlapping 95 % intervals of log10 time, per element."""
    out = {}
    for el in ("Mg", "Sr"):
        iv = sorted((math.log10(b["time_days"]["p2_5"]), math.log10(b["time_days"]["p97_5"]))
                    for r in recs for b in r["boundaries"] if b["element"] == el and b.get("resolved", True))
        groups, reach = 0, -math.inf
        for lo, hi in iv:
            if lo > reach:
                groups += 1
                reach = hi
            else:
                reach = max(reach, hi)
        out[el] = groups
    return out


def timed(fn, repeat):
    ts = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        value = fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts), value


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--crystals", type=int, default=200)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    recs = records(a.crystals)
    n_fits = sum(len(r["boundaries"]) for r in recs)
    t_sum, pop = timed(lambda: population_summary(recs), a.repeat)
    t_pop, pe = timed(lambda: population_events(recs), a.repeat)
    t_el, _ = timed(lambda: [population_events(recs, element=el) for el in ("Mg", "Sr")], a.repeat)
    t_chain, groups = timed(lambda: chaining(recs), a.repeat)
    print(f"crystals {len(recs)}, single-boundary fits {n_fits}, population observations {pe['n_observations']}")
    print(f"events found: population {pe['k']} (BIC by K: "
          + ", ".join(f"{k}: {v:.0f}" for k, v in pe["bic_by_k"].items()) + "); per element "
          + ", ".join(f"{k}: {len(v['events'])}" for k, v in pop["elements"].items())
          + f"; chaining would give {groups}")
    print(f"population summary (all)     {t_sum:7.2f} s")
    print(f"event model, population      {t_pop:7.2f} s")
    print(f"event model, per element x2  {t_el:7.2f} s")
    print(f"former chaining              {t_chain:7.4f} s")
    print(f"event model share of summary {(t_pop + t_el) / t_sum:7.2f}")


if __name__ == "__main__":
    main()
