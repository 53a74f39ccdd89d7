"""Benchmark: a 200-crystal campaign end to end, 1 vs 2 workers, and an edited rerun.

Run by hand (not collected by pytest)::

    python tests/benchmarks/bench_campaign.py [--crystals 200] [--draws 1000] [--repeat 2] [--keep DIR]
        [--models crystal,boundary]

The campaign is the demo generator scaled up (the same invented volcano,
samples and kinds of crystal: microprobe traverses with Mg and Sr, laser
traverses, mapped crystals). Each run is the command a user types,
``zoneprofile run CAMPAIGN --out DIR --workers N``, timed as a whole process
(start-up, reading, every stage, the report). It prints, side by side:

* T1: one worker; T2: two workers; the same command otherwise, each from an
  empty cache that it fills; interleaved T1 T2 T1 ... (``--repeat`` T2 runs);
  parallel efficiency: each T2 against the mean of the T1 runs either side of
  it, median over pairs (goal >= 0.80); T2 (median) against the goal of 60 s;
* with ``--models crystal,boundary`` (the default) both campaign models, the
  runs of the two interleaved (crystal T1, boundary T1, crystal T2, ...), and
  the ratios crystal / boundary of T1, T2 and of the CPU time (user + system
  of the run and its worker processes, which a loaded machine does not
  inflate the way it inflates wall time);
* a rerun after editing one crystal's temperature (first model only): how
  many crystals were recomputed (goal: 1) and its time;
* where a crystal's time goes (median seconds per stage, from the records).
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def _cpu():
    import resource

    u = resource.getrusage(resource.RUSAGE_CHILDREN)
    return u.ru_utime + u.ru_stime


def run(args, *, label, cpu=None):
    """Wall time of one command; its CPU time (it and its reaped workers) appended to ``cpu``."""
    c0 = _cpu()
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "zoneprofile", *map(str, args)], capture_output=True, text=True)
    dt = time.perf_counter() - t0
    if cpu is not None:
        cpu.append(_cpu() - c0)
    if proc.returncode != 0:
        raise SystemExit(f"{label} failed ({proc.returncode}): {proc.stderr.strip()}")
    return dt


def _ages(r):
    """Medians of a crystal's dated times: the whole-crystal model's ages, else the per-boundary fits."""
    cm = r.get("crystal_model") or {}
    if cm.get("boundaries"):
        return [b["age_days"]["median"] for b in cm["boundaries"]] + [g["days"]["median"] for g in cm["gaps"]]
    return [b["time_days"]["median"] for b in r["boundaries"]]


def n_dated(r):
    cm = r.get("crystal_model") or {}
    if cm.get("boundaries"):
        return sum(1 for b in cm["boundaries"] if b["age_days"]["statement"] == "date")
    return len(r["boundaries"])


def times_of(out: Path):
    res = json.loads((out / "results.json").read_text())
    t = {(r["sample"], r["crystal"]): _ages(r) for r in res["crystals"]}
    return res, t


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--crystals", type=int, default=200)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--keep", type=Path, default=None, help="keep the campaign and outputs in this folder")
    ap.add_argument("--repeat", type=int, default=2, help="T2 runs, each between two T1 runs")
    ap.add_argument("--models", default="crystal,boundary",
                    help="campaign models to time side by side, comma-separated (first: the edited rerun)")
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
    print(f"campaign: {a.crystals} crystals, {a.draws} draws per boundary, generated in {t_gen:.1f} s ({toml})",
          flush=True)

    # T1 and T2: the same command, only --workers differs, each from an empty cache that it
    # fills. The machine's speed drifts by 15-25 % over minutes, so the runs are interleaved
    # T1 T2 T1 T2 ... T1 and each T2 is compared with the mean of the T1 runs either side of
    # it (same stretch of time); the efficiency reported is the median of those pairs. With
    # several models, the models take turns at every step of that order.
    models = [m.strip() for m in a.models.split(",") if m.strip()]
    base = toml.read_text()
    tomls = {}
    for m in models:
        tomls[m] = toml.with_name(f"bench-{m}.toml")
        text = re.sub(r'^model = "[a-z]+"', f'model = "{m}"', base, count=1, flags=re.M)
        if text == base and f'\nmodel = "{m}"' not in base:
            text = base.replace("[defaults]", f'[defaults]\nmodel = "{m}"', 1)
        tomls[m].write_text(text)
    cache = toml.parent / ".zoneprofile-cache"
    runs = {m: {1: [], 2: []} for m in models}
    order = [1, 2] * a.repeat + [1]
    for k, workers in enumerate(order):
        for m in models:
            shutil.rmtree(cache, ignore_errors=True)
            out = root / f"out-{m}-{workers}-{k}"
            cpu = []
            t = run(["run", tomls[m], "--out", out, "--workers", workers, "--quiet"],
                    label=f"{m}, {workers} worker(s)", cpu=cpu)
            runs[m][workers].append((t, out, cpu[0]))
            print(f"  {m}, {workers} worker(s): {t:.1f} s wall, {cpu[0]:.1f} s CPU", flush=True)
            assert json.loads((out / "results.json").read_text())["provenance"]["run"]["from_cache"] == []

    print()
    print(f"load average at the end (1, 5, 15 min): {', '.join(f'{v:.2f}' for v in os.getloadavg())} "
          f"on {os.cpu_count()} cores")
    summary = {}
    for mi, m in enumerate(models):
        t1s, t2s = runs[m][1], runs[m][2]
        pair_eff = [0.5 * (t1s[k][0] + t1s[k + 1][0]) / (2 * t2s[k][0]) for k in range(len(t2s))]
        t1 = float(np.median([t for t, _, _ in t1s]))
        t2 = float(np.median([t for t, _, _ in t2s]))
        c1 = float(np.median([c for _, _, c in t1s]))
        c2 = float(np.median([c for _, _, c in t2s]))
        res1, times1 = times_of(t1s[0][1])
        res2, times2 = times_of(t2s[0][1])
        same = times1 == times2
        # the work itself, summed over the crystals' stage timings, with one and with two workers
        work1 = float(np.median([sum(sum(r["timing_s"].values()) for r in times_of(o)[0]["crystals"])
                                 for _, o, _ in t1s]))
        work2 = float(np.median([sum(sum(r["timing_s"].values()) for r in times_of(o)[0]["crystals"])
                                 for _, o, _ in t2s]))
        eff = float(np.median(pair_eff))
        summary[m] = {"t1": t1, "t2": t2, "c1": c1, "c2": c2, "work1": work1}
        used = {}
        for r in res1["crystals"]:
            key = (r.get("model") or {}).get("used", "boundary")
            used[key] = used.get(key, 0) + 1
        n_boundaries = sum(n_dated(r) for r in res1["crystals"])
        n_failed = sum(1 for r in res1["crystals"] if r["error"])
        print()
        print(f"=== model = \"{m}\" (crystals dated by: "
              f"{', '.join(f'{k} {v}' for k, v in sorted(used.items()))})")
        print(f"{'measure':<44}{'value':>12}{'goal':>12}")
        print(f"T1 runs: {', '.join(f'{t:.1f}' for t, _, _ in t1s)} s; T2 runs: "
              f"{', '.join(f'{t:.1f}' for t, _, _ in t2s)} s (in the order T1 T2 T1 ...)")
        print(f"CPU time of those runs: T1 {', '.join(f'{c:.1f}' for _, _, c in t1s)} s; "
              f"T2 {', '.join(f'{c:.1f}' for _, _, c in t2s)} s")
        print(f"efficiency of each T2 against the T1 runs either side: {', '.join(f'{e:.2f}' for e in pair_eff)}")
        print(f"stage work summed over crystals (median): {work1:.1f} s with 1 worker, {work2:.1f} s with 2")
        print(f"{'T1, 1 worker, end to end (s, median)':<44}{t1:>12.1f}{'':>12}")
        print(f"{'T2, 2 workers, end to end (s, median)':<44}{t2:>12.1f}{'<= 60':>12}")
        print(f"{'CPU time T1 / T2 (s, median)':<44}{f'{c1:.1f} / {c2:.1f}':>12}{'':>12}")
        print(f"{'parallel efficiency (median of pairs)':<44}{eff:>12.2f}{'>= 0.80':>12}")
        print(f"{'same times with 1 and 2 workers':<44}{str(same):>12}{'True':>12}")
        print(f"{'dated boundaries / failed crystals':<44}{f'{n_boundaries} / {n_failed}':>12}{'':>12}")
        if mi == 0:
            # edit one crystal's temperature and rerun (the cache holds the last T1 run of this model)
            shutil.rmtree(cache, ignore_errors=True)
            run(["run", tomls[m], "--out", root / f"out-{m}-fill", "--workers", 2, "--quiet"], label="cache fill")
            text = tomls[m].read_text()
            first_id = res1["crystals"][len(res1["crystals"]) // 2]["crystal"]
            edited = text.replace(f'id = "{first_id}"\n', f'id = "{first_id}"\ntemperature_c = 1005\n', 1)
            assert edited != text
            tomls[m].write_text(edited)
            t_edit = run(["run", tomls[m], "--out", root / "out-edit", "--workers", 2, "--quiet"],
                         label="edited rerun")
            res4, _ = times_of(root / "out-edit")
            computed = res4["provenance"]["run"]["computed"]
            print(f"{'rerun after editing one temperature (s)':<44}{t_edit:>12.1f}{'':>12}")
            print(f"{'crystals recomputed by that rerun':<44}{len(computed):>12d}{'1':>12}")
        stages = {}
        for r in res1["crystals"]:
            for k, v in (r.get("timing_s") or {}).items():
                stages.setdefault(k, []).append(v)
        print("median seconds per crystal and stage (first 1-worker run; a stage counts the crystals that ran it):")
        for k, v in sorted(stages.items(), key=lambda kv: -np.sum(kv[1])):
            print(f"  {k:<24}{np.median(v):>8.3f}   (total {np.sum(v):.1f} s, {len(v)} crystals)")
        print(f"  {'start-up and report':<24}{'':>8}   (about "
              f"{t1s[0][0] - sum(np.sum(v) for v in stages.values()):.1f} s of the first T1 run)")
    if len(models) > 1:
        a0, b0 = models[0], models[1]
        print()
        print(f"ratios {a0} / {b0}: T1 {summary[a0]['t1'] / summary[b0]['t1']:.2f}, "
              f"T2 {summary[a0]['t2'] / summary[b0]['t2']:.2f}, CPU T1 {summary[a0]['c1'] / summary[b0]['c1']:.2f}, "
              f"CPU T2 {summary[a0]['c2'] / summary[b0]['c2']:.2f}, stage work (1 worker) "
              f"{summary[a0]['work1'] / summary[b0]['work1']:.2f}")
    if not a.keep:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
