"""Benchmark: chronology and report for a large campaign (run by hand).

    python tests/benchmarks/bench_report.py [N_CRYSTALS]

Prints, measured side by side in one run: population_summary time, the report
written serially (figures drawn in the main process), and the report written
with crystal figures drawn by 2 worker processes beforehand (the way a
campaign can draw them in its workers), with the ratio.
"""

from __future__ import annotations

import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from zoneprofile.chronology import population_summary
from zoneprofile.report import crystal_figure_name, render_crystal_figure, write_outputs
from zoneprofile.report._sample import sample_provenance, sample_records


def _draw(args):
    index, record, fig_dir = args
    paths = render_crystal_figure(record, Path(fig_dir) / (crystal_figure_name(record, index) + ".png"),
                                  formats=("png", "svg"))
    return index, str(paths[0])


def main(n_crystals: int = 200) -> None:
    per_sample = max(1, n_crystals // 4)
    records = sample_records(seed=1, samples=("A", "B", "C", "D"), crystals_per_sample=per_sample,
                             n_draws=1000, with_failure=False)
    prov = sample_provenance(records)
    t0 = time.perf_counter()
    pop = population_summary(records)
    t_pop = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as d:
        t0 = time.perf_counter()
        write_outputs(records, pop, prov, d, formats=("png", "svg"))
        t_serial = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as d:
        t0 = time.perf_counter()
        (Path(d) / "figures").mkdir()
        with ProcessPoolExecutor(2) as pool:
            drawn = dict(pool.map(_draw, [(k, r, str(Path(d) / "figures")) for k, r in enumerate(records)],
                                  chunksize=8))
        write_outputs(records, pop, prov, d, formats=("png", "svg"), crystal_figures=drawn)
        t_par = time.perf_counter() - t0
        size = (Path(d) / "report.html").stat().st_size
    n = len(records)
    print(f"crystals: {n}, dated boundaries: {len(pop['boundaries'])}")
    print(f"population_summary: {t_pop:.2f} s")
    print(f"write_outputs, serial figures (png+svg): {t_serial:.1f} s ({t_serial / n * 1000:.0f} ms/crystal)")
    print(f"write_outputs, crystal figures in 2 processes: {t_par:.1f} s; ratio serial/parallel "
          f"{t_serial / t_par:.2f}")
    print(f"report.html size: {size / 1e6:.1f} MB")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
