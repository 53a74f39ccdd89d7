"""Benchmark: a 200-crystal campaign end to end, 1 vs 2 workers, and an edited rerun.

Run by hand (not collected by pytest)::

    python tests/benchmarks/bench_campaign.py [--crystals 200] [--draws 1000] [--repeat 2] [--keep DIR]

The campaign is the demo generator scaled up (the same invented volcano,
samples and kinds of crystal: microprobe traverses with Mg and Sr, laser
traverses, mapped crystals). Each run is the command a user types,
``zoneprofile run CAMPAIGN --out DIR --workers N``, timed as a whole process
(start-up, reading, every stage, the report). It prints, side by side:

* T1: one worker; T2: two workers; the same command otherwise, each from an
  empty cache that it fills; interleaved T1 T2 T1 ... (``--repeat`` T2 runs);
  parallel efficiency: each T2 against the mean of the T1 runs either side of
  it, median over pairs (goal >= 0.80); T2 (median) against the goal of 60 s;
* a rerun after editing one crystal's temperature: how many crystals were
  recomputed (goal: 1) and its time;
* where a crystal's time goes (median seconds per stage, from the records).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def run(args, *, label):
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "zoneprofile", *map(str, args)], capture_output=True, text=True)
    dt = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(f"{label} failed ({proc.returncode}): {proc.stderr.strip()}")
    return dt


def times_of(out: Path):
    res = json.loads((out / "results.json").read_text())
    t = {(r["sample"], r["crystal"]): [b["time_days"]["median"] for b in r["boundaries"]] for r in res["crystals"]}
    return res, t


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--crystals", type=int, default=200)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--keep", type=Path, default=None, help="keep the campaign and outputs in this folder")
    ap.add_argument("--repeat", type=int, default=2, help="T2 runs, each between two T1 runs")
    a = ap.parse_args(argv)

    from zoneprofile.demo import CAMPAIGN_NAME, make_demo

    root = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="zoneprofile-bench-"))
    if root.exists() and a.keep:
        shutil.rmtree(root)
    root.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    made = make_demo(root / "campaign", n_crystals=a.crystals, draws=a.draws)
    t_gen = time.perf_counter() - t0
    toml = Path(made["campaign"])
    print(f"campaign: {a.crystals} crystals, {a.draws} draws per boundary, generated in {t_gen:.1f} s ({toml})")

    # T1 and T2: the same command, only --workers differs, each from an empty cache that it
    # fills. The machine's speed drifts by 15-25 % over minutes, so the runs are interleaved
    # T1 T2 T1 T2 ... T1 and each T2 is compared with the mean of the T1 runs either side of
    # it (same stretch of time); the efficiency reported is the median of those pairs
    cache = toml.parent / ".zoneprofile-cache"
    t1s, t2s = [], []
    order = [1, 2] * a.repeat + [1]
    for k, workers in enumerate(order):
        shutil.rmtree(cache, ignore_errors=True)
        out = root / f"out-{workers}-{k}"
        t = run(["run", toml, "--out", out, "--workers", workers, "--quiet"], label=f"{workers} worker(s)")
        (t1s if workers == 1 else t2s).append((t, out))
        assert json.loads((out / "results.json").read_text())["provenance"]["run"]["from_cache"] == []
    pair_eff = [0.5 * (t1s[k][0] + t1s[k + 1][0]) / (2 * t2s[k][0]) for k in range(len(t2s))]
    t1 = float(np.median([t for t, _ in t1s]))
    t2 = float(np.median([t for t, _ in t2s]))
    res1, times1 = times_of(t1s[0][1])
    res2, times2 = times_of(t2s[0][1])
    same = times1 == times2
    # the work itself, summed over the crystals' stage timings, with one and with two workers
    work1 = float(np.median([sum(sum(r["timing_s"].values()) for r in times_of(o)[0]["crystals"]) for _, o in t1s]))
    work2 = float(np.median([sum(sum(r["timing_s"].values()) for r in times_of(o)[0]["crystals"]) for _, o in t2s]))

    # edit one crystal's temperature and rerun
    text = toml.read_text()
    first_id = res1["crystals"][len(res1["crystals"]) // 2]["crystal"]
    edited = text.replace(f'id = "{first_id}"\n', f'id = "{first_id}"\ntemperature_c = 1005\n', 1)
    assert edited != text
    toml.write_text(edited)
    t_edit = run(["run", toml, "--out", root / "out4", "--workers", 2, "--quiet"], label="edited rerun")
    res4, _ = times_of(root / "out4")
    computed = res4["provenance"]["run"]["computed"]

    stages = {}
    for r in res1["crystals"]:
        for k, v in (r.get("timing_s") or {}).items():
            stages.setdefault(k, []).append(v)
    n_boundaries = sum(len(r["boundaries"]) for r in res1["crystals"])
    n_failed = sum(1 for r in res1["crystals"] if r["error"])

    eff = float(np.median(pair_eff))
    print()
    print(f"load average at the end (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())} "
          f"on {os.cpu_count()} cores")
    print(f"{'measure':<44}{'value':>12}{'goal':>12}")
    print(f"T1 runs: {', '.join(f'{t:.1f}' for t, _ in t1s)} s; T2 runs: {', '.join(f'{t:.1f}' for t, _ in t2s)} s "
          f"(in the order T1 T2 T1 ...)")
    print(f"efficiency of each T2 against the T1 runs either side: {', '.join(f'{e:.2f}' for e in pair_eff)}")
    print(f"stage work summed over crystals (median): {work1:.1f} s with 1 worker, {work2:.1f} s with 2")
    print(f"{'T1, 1 worker, end to end (s, median)':<44}{t1:>12.1f}{'':>12}")
    print(f"{'T2, 2 workers, end to end (s, median)':<44}{t2:>12.1f}{'<= 60':>12}")
    print(f"{'parallel efficiency (median of pairs)':<44}{eff:>12.2f}{'>= 0.80':>12}")
    print(f"{'same times with 1 and 2 workers':<44}{str(same):>12}{'True':>12}")
    print(f"{'rerun after editing one temperature (s)':<44}{t_edit:>12.1f}{'':>12}")
    print(f"{'crystals recomputed by that rerun':<44}{len(computed):>12d}{'1':>12}")
    print(f"{'dated boundaries / failed crystals':<44}{f'{n_boundaries} / {n_failed}':>12}{'':>12}")
    print()
    print("median seconds per crystal and stage (1-worker run):")
    for k, v in sorted(stages.items(), key=lambda kv: -np.median(kv[1])):
        print(f"  {k:<24}{np.median(v):>8.3f}   (total {np.sum(v):.1f} s)")
    print(f"  {'start-up and report':<24}{'':>8}   (about {t1s[0][0] - sum(np.sum(v) for v in stages.values()):.1f} s "
          "of the first T1 run)")
    if not a.keep:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
