"""Benchmark of the whole-crystal model (run by hand: python tests/benchmarks/bench_crystal.py).

One plagioclase crystal with three recharge boundaries (110, 60, 15 µm; events
400, 80 and 7 days before the end at 850 ± 10 °C), Mg and Sr by a 4 µm spot at
2 µm spacing with 2 % noise, An by the same spots, made by the reference solver
of tests/diffusion/test_crystal_model.py (not the model under test). Measured side by
side in one run, interleaved A B A B ..., one BLAS thread (as campaign workers
run):

A. ``fit_crystal``: both elements, all three boundaries, full uncertainty (1000
   draws: the per-element fits, the joint fit, the Laplace covariances, the
   likelihood-ratio checks of every time, shared temperature and section
   obliquity draws). Goal: <= 2 s on one core.
B. today's route for the same crystal: ``fit_boundary`` for each boundary and
   element (6 fits, each on the points between the midpoints to its
   neighbours, position within ±3 µm, 1000 draws).

Prints each run's seconds, the medians and the ratio A/B.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import pytest

pytestmark = pytest.mark.benchmark

HERE = Path(__file__).resolve().parent


def _case():
    sys.path.insert(0, str(HERE.parent / "diffusion"))
    from test_crystal_model import _three_event_case

    return _three_event_case(11)


def run_crystal(case):
    from zoneprofile.diffusion.crystal import fit_crystal

    profiles, x, an, shifted, t = case
    return fit_crystal(profiles, mineral="plagioclase", positions_um=shifted, temperature_c=t,
                       temperature_sd_c=10.0, an_distance_um=x, an=an, an_beam_um=4.0, seed=1, draws=1000)


def run_boundaries(case):
    from zoneprofile.diffusion import fit_boundary

    profiles, x, an, shifted, t = case
    pos = sorted(shifted)
    fits = []
    for k, b in enumerate(pos):
        lo = 0.0 if k == 0 else 0.5 * (pos[k - 1] + b)
        hi = float(x[-1]) + 1.0 if k == len(pos) - 1 else 0.5 * (b + pos[k + 1])
        for el in ("Mg", "Sr"):
            p = profiles[el]
            fits.append(fit_boundary(p["distance_um"], p["value"], element=el, mineral="plagioclase",
                                     temperature_c=t, temperature_sd_c=10.0, an=an, boundary_um=b,
                                     boundary_window_um=3.0, segment_um=(lo, hi), beam_um=4.0, draws=1000,
                                     seed=k))
    return fits


def main(repeats=5):
    from zoneprofile.diffusion._blas import single_thread

    case = _case()
    a_times, b_times = [], []
    with single_thread():
        run_crystal(case)  # warm imports and caches for both routes
        run_boundaries(case)
        for _ in range(repeats):
            from zoneprofile.diffusion.crystal import _Objective

            before = _Objective.element_evaluations
            t0 = time.perf_counter()
            res = run_crystal(case)
            a_times.append(time.perf_counter() - t0)
            n_forward = _Objective.element_evaluations - before
            t0 = time.perf_counter()
            run_boundaries(case)
            b_times.append(time.perf_counter() - t0)
    ma, mb = statistics.median(a_times), statistics.median(b_times)
    print("A whole-crystal model (3 boundaries, Mg + Sr, 1000 draws):", " ".join(f"{v:.2f}" for v in a_times), "s")
    print("B per-boundary fits (6 fits, 1000 draws each):           ", " ".join(f"{v:.2f}" for v in b_times), "s")
    print(f"median A {ma:.2f} s, median B {mb:.2f} s, ratio A/B {ma / mb:.2f}; goal A <= 2 s: "
          f"{'met' if ma <= 2.0 else 'NOT met'}")
    print(f"forward evaluations of one element in A: {n_forward}; grid {res.record['grid_cells']} cells of "
          f"{res.record['cell_um']:.2f} µm")
    return ma, mb


if __name__ == "__main__":
    main()
