"""Benchmark: chronology and report for a large campaign (run by hand).

    python tests/benchmarks/bench_report.py [N_CRYSTALS]
    python tests/benchmarks/bench_report.py figures [CALLS.pkl] [REPEATS]

The first form prints, measured side by side in one run: population_summary
time, the report written serially (figures drawn in the main process), and
the report written with crystal figures drawn by 2 worker processes
beforehand (the way a campaign can draw them in its workers), with the ratio.

The second form times the crystal figure as a campaign worker draws it
(``zoneprofile.campaign._pictures.render_figures``, PNG + SVG), now and as it
was drawn with matplotlib axes before (the code of commit ``REFERENCE``, read
with ``git show``), side by side, each repeated and the minimum kept (the
machine is shared). ``CALLS.pkl`` is a pickled list of ``(record, map_image,
formats)``, the calls of a real campaign; without it, invented sample records
(one map in four) are used.
"""

from __future__ import annotations

import base64
import pickle
import subprocess
import sys
import tempfile
import time
import types
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


REFERENCE = "0254e77"  # the last commit that drew crystal figures with matplotlib axes


def _reference_render_figures():
    """``render_figures`` as of ``REFERENCE`` (matplotlib), or None without git history."""
    root = Path(__file__).resolve().parents[2]
    sources = {}
    for rel in ("zoneprofile/report/figures.py", "zoneprofile/campaign/_pictures.py"):
        try:
            sources[rel] = subprocess.run(["git", "show", f"{REFERENCE}:{rel}"], cwd=root, check=True,
                                          capture_output=True, text=True).stdout
        except (OSError, subprocess.CalledProcessError):
            return None
    figures = types.ModuleType("reference_figures")
    exec(compile(sources["zoneprofile/report/figures.py"], "reference_figures", "exec"), figures.__dict__)
    pictures = types.ModuleType("reference_pictures")
    pictures.__dict__["_reference_figures"] = figures
    code = sources["zoneprofile/campaign/_pictures.py"].replace(
        "from zoneprofile.report import render_crystal_figure",
        "render_crystal_figure = _reference_figures.render_crystal_figure")
    exec(compile(code, "reference_pictures", "exec"), pictures.__dict__)
    return pictures


def _sample_calls(n=20):
    records = sample_records(seed=1, samples=("A", "B", "C", "D"), crystals_per_sample=max(1, n // 4),
                             n_draws=200, with_failure=False)
    return [(r, None, ("png", "svg")) for r in records]


def figures(calls_path=None, repeats=5) -> None:
    from zoneprofile.campaign._pictures import render_figures, render_map

    if calls_path:
        with open(calls_path, "rb") as fh:
            calls = pickle.load(fh)
    else:
        calls = _sample_calls()
    reference_module = _reference_render_figures()
    reference = reference_module.render_figures if reference_module else None
    n = len(calls)
    n_map = sum(1 for r, image, _ in calls if r.get("map"))
    print(f"crystal figures: {n} calls ({n_map} with a map), formats {sorted({f for c in calls for f in c[2]})}")
    kinds = [("now", render_figures)] + ([("matplotlib axes", reference)] if reference else [])
    best = {}
    sizes = {}
    for kind, fn in kinds:  # warm up: imports, fonts, caches
        fn(calls[0][0], calls[0][2], map_image=calls[0][1])
    for _ in range(repeats):
        for kind, fn in kinds:
            t0, c0 = time.perf_counter(), time.process_time()
            out = [fn(r, fmts, map_image=image) for r, image, fmts in calls]
            wall, cpu = time.perf_counter() - t0, time.process_time() - c0
            w0, c_0 = best.get(kind, (float("inf"), float("inf")))
            best[kind] = (min(w0, wall), min(c_0, cpu))
            sizes[kind] = {fmt: sum(len(base64.b64decode(o[fmt])) for o in out if fmt in o) / n
                           for fmt in ("png", "svg")}
    for kind, (wall, cpu) in best.items():
        print(f"{kind:>16}: {wall:.2f} s wall, {cpu:.2f} s CPU (min of {repeats}); "
              f"{1000 * wall / n:.0f} ms wall per crystal; mean PNG {sizes[kind]['png'] / 1e3:.0f} kB, "
              f"SVG {sizes[kind]['svg'] / 1e3:.0f} kB")
    if reference:
        print(f"ratio matplotlib axes / now: {best['matplotlib axes'][0] / best['now'][0]:.1f} wall, "
              f"{best['matplotlib axes'][1] / best['now'][1]:.1f} CPU")
    else:
        print(f"(no git history: reference commit {REFERENCE} not timed)")
    maps = [(image, r["map"]["line"], r["parameters"].get("pixel_um")) for r, image, _ in calls if image is not None]
    if maps:  # the calibrated map picture (figures/maps/), drawn in the worker for crystals with a map
        kinds = [("now", render_map)] + ([("matplotlib axes", reference_module.render_map)] if reference else [])
        best = {}
        for _ in range(repeats):
            for kind, fn in kinds:
                c0 = time.process_time()
                for (image, stride), line, pixel in maps:
                    fn(image, [v / stride for v in line], pixel * stride if pixel else None, "An (calibrated)")
                best[kind] = min(best.get(kind, float("inf")), time.process_time() - c0)
        print("map picture: " + ", ".join(f"{k} {1000 * t / len(maps):.0f} ms CPU" for k, t in best.items())
              + f" per map ({len(maps)} maps)")


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "figures":
        figures(sys.argv[2] if len(sys.argv) > 2 else None, int(sys.argv[3]) if len(sys.argv) > 3 else 5)
    else:
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
