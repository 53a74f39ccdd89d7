"""`zoneprofile fit` on long profiles: CPU time and peak memory against the number of points.

    python tests/benchmarks/bench_fit_scale.py [N ...]   (default 2000 100000)

An invented olivine Fo profile (a diffused step at 80 µm over 200 µm, noise 0.3 mol%) with N
points is fitted by ``zoneprofile fit`` (Fe–Mg, 1150 °C, default draws) in a fresh process;
CPU time and peak resident memory of the child are printed, with the ratio to the smallest N.
Goal (issue 14): 1e5 points in <= 15 s.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.special import erfc

ROOT = Path(__file__).resolve().parents[2]


def profile(path: Path, n: int) -> None:
    x = np.linspace(0, 200.0, n)
    rng = np.random.default_rng(0)
    fo = 80 + 5 * 0.5 * erfc((x - 80) / 6.0) + rng.normal(0, 0.3, n)
    pd.DataFrame({"distance_um": x.round(4), "Fo": fo.round(3)}).to_csv(path, index=False)


def run(csv: Path, out: Path):
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    cmd = [sys.executable, "-c",
           "import resource, sys; from zoneprofile.cli import main; code = main(sys.argv[1:]); "
           "sys.stderr.write(f'MAXRSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}\\n'); sys.exit(code)",
           "fit", str(csv), "--element", "FeMg", "--mineral", "olivine", "--temperature-c", "1150",
           "--fo2-pa", "1e-5", "--boundary-um", "80", "-o", str(out), "--force"]
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True, cwd=out.parent, timeout=1800)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    rss = next((int(x.split()[1]) / 1024 for x in proc.stderr.splitlines() if x.startswith("MAXRSS")), float("nan"))
    return proc.returncode, cpu, rss


def main(argv):
    sizes = [int(a) for a in argv] or [2000, 100_000]
    first = None
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            csv = Path(tmp) / f"p{n}.csv"
            profile(csv, n)
            code, cpu, rss = run(csv, Path(tmp) / "fit.json")
            first = first or (n, cpu, rss)
            print(f"{n:>7} points: {cpu:.1f} s CPU, {rss:.0f} MB peak (exit {code}); ratio to {first[0]} points: "
                  f"CPU {cpu / first[1]:.2f}, memory {rss / first[2]:.2f}", flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
