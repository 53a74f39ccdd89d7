"""Benchmark of `zoneprofile recalc` at scale (run by hand).

    python tests/benchmarks/bench_recalc.py [--sizes 10000,100000] [--repeat 3] [--keep DIR]

Goal (issue 14, item 5): ``recalc`` of 1e5 analyses in <= 15 s.

For each size it writes a seeded invented plagioclase traverse (stage X/Y in
mm, a Total and a Comment column, below-detection marks), then times, in turn
and interleaved so that the load of the shared machine falls on all alike:

1. the whole command, ``python -m zoneprofile recalc TABLE -o OUT.csv``, in a
   fresh process (start-up, reading, parsing every cell, recalculation, QC,
   projection on the traverse line, writing);
2. a floor for the same file: a fresh process that only reads it with
   ``pandas.read_csv`` (no parsing of cell states, no chemistry) and writes it
   back with ``to_csv``.

It prints the median wall and CPU time (user + system of the child) of each,
their ratio, and the time per analysis; and, in one process, the cell parser's
fast path for plain numbers against ``parse_cell`` on every cell of the
largest table (identical values checked).
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

def _child(cmd) -> tuple[float, float]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise SystemExit(f"failed: {' '.join(map(str, cmd))}\n{proc.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


FLOOR = "import pandas as pd, sys; pd.read_csv(sys.argv[1], skiprows=2, dtype=str).to_csv(sys.argv[2], index=False)"


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="10000,100000")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--keep", default=None)
    a = ap.parse_args()
    from zoneprofile.io.synthetic import synthetic_traverse_table

    folder = Path(a.keep or tempfile.mkdtemp(prefix="bench_recalc."))
    folder.mkdir(parents=True, exist_ok=True)
    print(f"machine load average {os.getloadavg()[0]:.1f} (2 cores, shared)")
    print(f"{'analyses':>9} | {'recalc wall s':>13} {'cpu s':>6} | {'read+write floor wall s':>23} {'cpu s':>6} | "
          f"{'ratio (cpu)':>11} | {'µs/analysis (cpu)':>17} | goal 15 s")
    largest = None
    for n in (int(s) for s in a.sizes.split(",")):
        table = folder / f"traverse_{n}.csv"
        if not table.exists():
            synthetic_traverse_table(table, n_points=n, step_um=1.0, seed=1)
        largest = table
        runs, floors = [], []
        for k in range(a.repeat):
            out = folder / f"out_{n}_{k}.csv"
            runs.append(_child([sys.executable, "-m", "zoneprofile", "recalc", str(table), "-o", str(out), "--force"]))
            floors.append(_child([sys.executable, "-c", FLOOR, str(table), str(folder / f"floor_{n}.csv")]))
        rw, rc = (statistics.median(v) for v in zip(*runs))
        fw, fc = (statistics.median(v) for v in zip(*floors))
        print(f"{n:>9} | {rw:>13.2f} {rc:>6.2f} | {fw:>23.2f} {fc:>6.2f} | {rc / fc:>11.2f} | {rc / n * 1e6:>17.1f} | "
              f"{'met' if rw <= 15 else 'NOT met'} (wall {rw:.1f} s)")

    # the cell parser: fast path for plain numbers vs parse_cell, same values
    from zoneprofile.io.cells import parse_cell
    from zoneprofile.io.microprobe import _PLAIN_NUMBER

    cells = []
    for line in largest.read_text().splitlines()[3:]:
        cells.extend(line.split(",")[3:10])
    t0 = time.process_time()
    slow = [parse_cell(c) for c in cells]
    t_slow = time.process_time() - t0
    t0 = time.process_time()
    fast = [float(c) if _PLAIN_NUMBER(c) else parse_cell(c).value for c in cells]
    t_fast = time.process_time() - t0
    same = np.array_equal(np.array([c.value for c in slow]), np.array(fast), equal_nan=True)
    print(f"cell parsing, {len(cells):,} cells: parse_cell {t_slow:.2f} s, fast path {t_fast:.2f} s, "
          f"{t_slow / t_fast:.1f}x, identical values: {same}")
    print(f"files in {folder}")


if __name__ == "__main__":
    main()
