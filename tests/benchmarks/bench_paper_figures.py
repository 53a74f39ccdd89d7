"""Benchmark: the population's paper figures beside the other population figures (run by hand).

    python tests/benchmarks/bench_paper_figures.py [N_CRYSTALS] [REPEATS]

Times, side by side in one process on the same invented population (N crystals
in two samples, ``zoneprofile.report._sample.sample_records``): the chronology
and events figures of one element (``render_population_figures``) and the event
ladders with every page of dated profiles (``render_paper_figures``), PNG + SVG,
minimum of REPEATS each, and prints their ratio. Results: docs/performance-report.md.
"""

import sys
import tempfile
import time

from zoneprofile.chronology import population_summary
from zoneprofile.report import render_population_figures
from zoneprofile.report._sample import sample_records
from zoneprofile.report.population_figures import render_paper_figures


def _best(call, repeats):
    best = float("inf")
    for _ in range(repeats):
        with tempfile.TemporaryDirectory() as d:
            t = time.perf_counter()
            call(d)
            best = min(best, time.perf_counter() - t)
    return best


def main(n=200, repeats=3):
    recs = sample_records(seed=5, crystals_per_sample=n // 2, n_draws=200)
    pop = population_summary(recs, n_bootstrap=30)
    a = _best(lambda d: render_population_figures(pop, d, formats=("png", "svg")), repeats)
    b = _best(lambda d: render_paper_figures(recs, pop, d, formats=("png", "svg")), repeats)
    pages = -(-sum(1 for r in recs if not r.get("error")) // 24)
    print(f"{n} crystals, min of {repeats}")
    print(f"chronology + events figures (one element): {a:.2f} s")
    print(f"ladders + {pages} pages of dated profiles:   {b:.2f} s  (ratio {b / a:.2f})")


if __name__ == "__main__":
    main(*(int(v) for v in sys.argv[1:3]))
