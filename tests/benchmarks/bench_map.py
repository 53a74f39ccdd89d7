"""Benchmark of the map stage on an 8192 x 8192 16-bit single-channel map.

Run by hand (not collected by pytest)::

    /work/venv/bin/python tests/benchmarks/bench_map.py [--side 8192] [--keep DIR]

(--keep DIR keeps the map and reuses it on the next run with the same DIR.)

Writes a seeded synthetic map to a temporary uncompressed TIFF, then, in a
fresh child process (so its memory is measured alone), reads it, calibrates
it against the spot table, segments the crystal, takes ten line profiles and
a rim-normal profile. Prints each step's time and the peak memory beside the
goals (10 s; 3 x the map's in-memory size), as ratios.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, math, sys, time, tracemalloc
def status(key):
    for ln in open("/proc/self/status"):
        if ln.startswith(key):
            return int(ln.split()[1]) * 1024
import numpy as np, pandas as pd, scipy.ndimage, skimage.filters
from zoneprofile.maps import read_map, read_spots, calibrate_map, crystal_mask, line_profile, rim_normal_profile
from zoneprofile.maps.calibration import spot_signals
image_path, spots_path, lines = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
base_rss = status("VmRSS:")
tracemalloc.start()
t = {}
cpu0 = time.process_time()
t0 = time.perf_counter()
img = read_map(image_path)
t["read"] = time.perf_counter() - t0
t1 = time.perf_counter()
spots = read_spots(spots_path, column="An", pixel_um=1.0, shape=img.data.shape)
r = spots["spot_um"].to_numpy(float) / 2
sig, _, _ = spot_signals(img.data, spots["x_px"], spots["y_px"], r)
t["spots"] = time.perf_counter() - t1
t1 = time.perf_counter()
mask = crystal_mask(img.data, line=lines[0], crystal_signal=sig)
t["mask"] = time.perf_counter() - t1
t1 = time.perf_counter()
cal = calibrate_map(img.data, spots, pixel_um=1.0, integer_counts=True, noise_region=mask.bbox())
t["calibrate"] = time.perf_counter() - t1
t1 = time.perf_counter()
n_points = 0
for line in lines:
    prof = line_profile(img.data, line, pixel_um=1.0, calibration=cal, width_px=5, mask=mask)
    n_points += len(prof)
t["ten_lines"] = time.perf_counter() - t1
t1 = time.perf_counter()
rim = rim_normal_profile(mask, pixel_um=1.0, calibration=cal)
t["rim_normal"] = time.perf_counter() - t1
t["total"] = time.perf_counter() - t0
t["cpu"] = time.process_time() - cpu0
_, py_peak = tracemalloc.get_traced_memory()
print(json.dumps({"t": t, "base_rss": base_rss, "peak_rss": status("VmHWM:"), "py_peak": py_peak,
                  "map_bytes": int(img.data.nbytes), "memmap": isinstance(img.data, np.memmap),
                  "block": mask.factor, "line_points": n_points, "rim_points": len(rim),
                  "r2": cal.r2, "slope": cal.slope}))
"""


CHILD_E2E = r"""
import json, sys, time
from zoneprofile.maps import extract_profile
image_path, spots_path, line = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
t0 = time.perf_counter()
prof, info = extract_profile(image_path, pixel_um=1.0, spots_path=spots_path, line=line, width_px=5)
t = time.perf_counter() - t0
t0 = time.perf_counter()
rim, _ = extract_profile(image_path, pixel_um=1.0, spots_path=spots_path, rim_normal=True, with_sha256=False)
print(json.dumps({"line": t, "rim": time.perf_counter() - t0,
                  "b": [(b["position_um"], b["obliquity_deg"]) for b in info["boundaries"]]}))
"""


def make_map(side: int, folder: Path):
    import numpy as np
    import tifffile

    from zoneprofile.maps import synthetic_zoned_map

    img, sp, truth = synthetic_zoned_map(seed=2026, shape=(side, side), pixel_um=1.0, obliquity_deg=35.0,
                                         return_maps=False, strip_rows=256)
    path = folder / "bench_Ca.tif"
    tifffile.imwrite(path, img)
    sp.to_csv(folder / "bench_spots.csv", index=False)
    rng = np.random.default_rng(1)
    outline = truth["outline_px"]
    centre = outline.mean(axis=0)
    lines = [list(truth["line"])]
    for _ in range(9):  # rim-to-core lines from random points near the outline toward the centre
        k = rng.integers(len(outline))
        p0 = outline[k] + 0.06 * (centre - outline[k])
        p1 = p0 + rng.uniform(0.3, 0.6) * (centre - p0)
        lines.append([float(p0[0]), float(p0[1]), float(p1[0]), float(p1[1])])
    return path, folder / "bench_spots.csv", lines, img.nbytes


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("--side", type=int, default=8192)
    ap.add_argument("--keep", default=None, help="folder to keep the map in")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(args.keep or tmp)
        folder.mkdir(parents=True, exist_ok=True)
        t0 = time.perf_counter()
        saved = folder / f"bench_lines_{args.side}.json"
        if args.keep and saved.exists():  # reuse a map made earlier with --keep
            path, spots = folder / "bench_Ca.tif", folder / "bench_spots.csv"
            lines, nbytes = json.loads(saved.read_text()), args.side * args.side * 2
            print(f"map {args.side} x {args.side} uint16 = {nbytes / 2**20:.0f} MiB reused from {folder}")
        else:
            path, spots, lines, nbytes = make_map(args.side, folder)
            saved.write_text(json.dumps(lines))
            print(f"map {args.side} x {args.side} uint16 = {nbytes / 2**20:.0f} MiB written in "
                  f"{time.perf_counter() - t0:.1f} s")
        out = subprocess.run([sys.executable, "-c", CHILD, str(path), str(spots), json.dumps(lines)],
                             capture_output=True, text=True, check=True)
        res = json.loads(out.stdout.strip().splitlines()[-1])
        e2e = subprocess.run([sys.executable, "-c", CHILD_E2E, str(path), str(spots), json.dumps(lines[0])],
                             capture_output=True, text=True, check=True)
        e2e = json.loads(e2e.stdout.strip().splitlines()[-1])
    t = res["t"]
    mib = 2**20
    print(f"memory-mapped: {res['memmap']}; mask block {res['block']} px; "
          f"{res['line_points']} line points, {res['rim_points']} rim-normal bins; r2 {res['r2']:.4f}")
    print(f"{'step':<14}{'time (s)':>10}")
    for k in ("read", "spots", "mask", "calibrate", "ten_lines", "rim_normal"):
        print(f"{k:<14}{t[k]:>10.3f}")
    print(f"{'measured':<34}{'value':>10}{'goal':>10}{'ratio':>8}")
    print(f"{'total time (s)':<34}{t['total']:>10.2f}{10.0:>10.1f}{t['total'] / 10.0:>8.2f}")
    print(f"{'CPU time of the process (s)':<34}{t['cpu']:>10.2f}{10.0:>10.1f}{t['cpu'] / 10.0:>8.2f}")
    peak, base = res["peak_rss"], res["base_rss"]
    goal = 3 * res["map_bytes"]
    print(f"{'peak RSS (MiB), whole process':<34}{peak / mib:>10.0f}{goal / mib:>10.0f}{peak / goal:>8.2f}")
    print(f"{'peak RSS above imports (MiB)':<34}{(peak - base) / mib:>10.0f}{goal / mib:>10.0f}{(peak - base) / goal:>8.2f}")
    print(f"{'peak numpy/Python heap (MiB)':<34}{res['py_peak'] / mib:>10.0f}{goal / mib:>10.0f}"
          f"{res['py_peak'] / goal:>8.2f}")
    print(f"(map in memory: {res['map_bytes'] / mib:.0f} MiB; the memory map's pages count in RSS once read)")
    print(f"extract_profile end to end (checksums, boundaries, obliquity, truncation): line {e2e['line']:.2f} s, "
          f"rim-normal {e2e['rim']:.2f} s; boundaries on line 1: "
          + ", ".join(f"{p:.1f} um psi {a:.1f}" for p, a in e2e["b"] if a is not None))


if __name__ == "__main__":
    main()
