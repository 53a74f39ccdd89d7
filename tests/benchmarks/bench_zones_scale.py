"""`zoneprofile zones` on long profiles: time and peak memory against the number of points.

    python tests/benchmarks/bench_zones_scale.py [--before TREE] [N ...]   (default 10000 30000 100000)

Each size runs ``zoneprofile zones`` in a fresh process on an invented profile (two steps
and noise, 0.5 µm spacing) and reports wall time, CPU time and peak resident memory
(``ru_maxrss`` of the child). With ``--before TREE`` (a checkout of another version) the
same command runs from that tree too, interleaved, and the ratios are printed side by side.
Goal (issue 14): 1e5 points in <= 15 s and <= 500 MB, memory linear in the points.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[2]


def profile(path: Path, n: int) -> None:
    rng = np.random.default_rng(0)
    x = np.arange(n) * 0.5
    an = 60 + 10 * (x > x[-1] * 0.3) - 8 * (x > x[-1] * 0.7) + rng.normal(0, 0.5, n)
    pd.DataFrame({"distance_um": x.round(2), "An": an.round(3)}).to_csv(path, index=False)


def run(tree: Path, csv: Path, out: Path, limit: float = 900.0):
    env = dict(os.environ)
    env["PYTHONPATH"] = str(tree)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.monotonic()
    cmd = [sys.executable, "-c",
           "import resource, sys; from zoneprofile.cli import main; code = main(sys.argv[1:]); "
           "sys.stderr.write(f'MAXRSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}\\n'); sys.exit(code)",
           "zones", str(csv), "-o", str(out), "--force"]
    try:
        proc = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=limit, cwd=out.parent)
    except subprocess.TimeoutExpired:
        return None
    wall = time.monotonic() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    rss = next((int(line.split()[1]) / 1024 for line in proc.stderr.splitlines() if line.startswith("MAXRSS")),
               float("nan"))
    return {"code": proc.returncode, "wall": wall, "cpu": cpu, "rss_mb": rss,
            "err": proc.stderr.strip().splitlines()[:1]}


def main(argv):
    before = None
    if "--before" in argv:
        k = argv.index("--before")
        before = Path(argv[k + 1])
        argv = argv[:k] + argv[k + 2:]
    sizes = [int(a) for a in argv] or [10_000, 30_000, 100_000]
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            csv = Path(tmp) / f"p{n}.csv"
            profile(csv, n)
            now = run(ROOT, csv, Path(tmp) / "now.json")
            line = (f"{n:>7} points: now {now['wall']:.1f} s wall, {now['cpu']:.1f} s CPU, "
                    f"{now['rss_mb']:.0f} MB peak (exit {now['code']})")
            if before is not None:
                old = run(before, csv, Path(tmp) / "old.json")
                if old is None or old["code"] != 0:
                    line += f"; before: failed or over the limit ({old and old['err']})"
                else:
                    line += (f"; before {old['wall']:.1f} s wall, {old['cpu']:.1f} s CPU, {old['rss_mb']:.0f} MB; "
                             f"ratio before/now CPU {old['cpu'] / now['cpu']:.2f}, memory "
                             f"{old['rss_mb'] / now['rss_mb']:.2f}")
            print(line, flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
