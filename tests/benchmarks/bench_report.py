"""Benchmark: chronology and report for a large campaign (run by hand).

    python tests/benchmarks/bench_report.py [N_CRYSTALS]
    python tests/benchmarks/bench_report.py figures [CALLS.pkl] [REPEATS]

The first form prints, measured side by side in one run: population_summary
time, the report written serially (figures drawn in the main process), and
the report written with crystal figures drawn by 2 worker processes
beforehand (the way a campaign can draw them in its workers), with the ratio.

    python tests/benchmarks/bench_report.py population [N_CRYSTALS] [REPEATS]

The third form times ``render_population_figures`` (chronology and events
figures, PNG + SVG) for a population of N crystals in two samples, now (the
canvas) and as drawn with matplotlib before (``figures.py`` of ``git show
HEAD``, or of ``POPULATION_REFERENCE`` when HEAD already holds the canvas
version), side by side: warm (same process, minimum of REPEATS) and cold (a
fresh interpreter each, minimum of 3: the shared imports of numpy and
``zoneprofile.report`` timed apart from the first call, which includes what
that call imports, matplotlib before, Pillow now), and checks whether
matplotlib was imported.

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


POPULATION_REFERENCE = "eb2a93d"  # the last commit that drew the population figures with matplotlib

_COLD = """
import pickle, sys, time, types
t0 = time.perf_counter()
if sys.argv[2] == "now":
    from zoneprofile.report.figures import render_population_figures
else:
    mod = types.ModuleType("reference_figures")
    exec(compile(open(sys.argv[2]).read(), "reference_figures", "exec"), mod.__dict__)
    render_population_figures = mod.render_population_figures
pop = pickle.load(open(sys.argv[1], "rb"))
t1 = time.perf_counter()
render_population_figures(pop, sys.argv[3], formats=("png", "svg"))
t2 = time.perf_counter()
print(t1 - t0, t2 - t1, int("matplotlib" in sys.modules))
"""


def _reference_population_module():
    """``figures.py`` with the matplotlib population figures (HEAD, else ``POPULATION_REFERENCE``)."""
    root = Path(__file__).resolve().parents[2]
    for rev in ("HEAD", POPULATION_REFERENCE):
        try:
            src = subprocess.run(["git", "show", f"{rev}:zoneprofile/report/figures.py"], cwd=root, check=True,
                                 capture_output=True, text=True).stdout
        except (OSError, subprocess.CalledProcessError):
            return None, None
        if "def _chronology_figure" in src:  # the matplotlib version
            module = types.ModuleType("reference_figures")
            exec(compile(src, "reference_figures", "exec"), module.__dict__)
            return module, src
    return None, None


def population(n_crystals: int = 200, repeats: int = 5) -> None:
    from zoneprofile.report.figures import render_population_figures

    per_sample = max(1, n_crystals // 2)
    records = sample_records(seed=1, samples=("North vent", "South flank"), crystals_per_sample=per_sample,
                             n_draws=1000, with_failure=False)
    pop = population_summary(records)
    print(f"population figures: {len(records)} crystals, {len(pop['boundaries'])} dated boundaries, "
          f"{len(pop['unresolved'])} upper bound(s); PNG + SVG")
    reference, source = _reference_population_module()
    kinds = [("canvas (now)", render_population_figures)]
    if reference is not None:
        kinds.append(("matplotlib (before)", reference.render_population_figures))
    best, sizes = {}, {}
    with tempfile.TemporaryDirectory() as d:
        for kind, fn in kinds:  # warm up: imports, fonts, glyph caches
            fn(pop, Path(d) / "warm", formats=("png", "svg"))
        for _ in range(repeats):
            for k, (kind, fn) in enumerate(kinds):
                out = Path(d) / f"k{k}"
                t0, c0 = time.perf_counter(), time.process_time()
                fn(pop, out, formats=("png", "svg"))
                wall, cpu = time.perf_counter() - t0, time.process_time() - c0
                w, c = best.get(kind, (float("inf"), float("inf")))
                best[kind] = (min(w, wall), min(c, cpu))
                sizes[kind] = {f.name: f.stat().st_size for f in out.iterdir()}
        cold = {}
        pkl = Path(d) / "pop.pkl"
        pkl.write_bytes(pickle.dumps(pop))
        ref_path = Path(d) / "reference_figures.py"
        if source:
            ref_path.write_text(source)
        for _ in range(3):
            for kind, arg in [("canvas (now)", "now")] + ([("matplotlib (before)", str(ref_path))] if source else []):
                t0 = time.perf_counter()
                res = subprocess.run([sys.executable, "-c", _COLD, str(pkl), arg, str(Path(d) / "cold")],
                                     check=True, capture_output=True, text=True).stdout.split()
                total = time.perf_counter() - t0
                imp, draw, mpl = float(res[0]), float(res[1]), bool(int(res[2]))
                prev = cold.get(kind)
                if prev is None or imp + draw < prev[0] + prev[1]:
                    cold[kind] = (imp, draw, mpl, total)
    for kind, (wall, cpu) in best.items():
        kb = ", ".join(f"{name} {size / 1e3:.0f} kB" for name, size in sorted(sizes[kind].items()))
        print(f"{kind:>20}: warm {wall:.3f} s wall, {cpu:.3f} s CPU (min of {repeats}); {kb}")
    for kind, (imp, draw, mpl, total) in cold.items():
        print(f"{kind:>20}: cold imports {imp:.2f} s + drawing {draw:.2f} s (interpreter total {total:.2f} s); "
              f"matplotlib imported: {mpl}")
    if len(best) == 2:
        now, before = best["canvas (now)"], best["matplotlib (before)"]
        cn, cb = cold["canvas (now)"], cold["matplotlib (before)"]
        print(f"ratio before / now: warm {before[0] / now[0]:.1f} wall, {before[1] / now[1]:.1f} CPU; "
              f"cold drawing (first call, its own imports included) {cb[1] / cn[1]:.1f}; "
              f"cold with the shared imports {(cb[0] + cb[1]) / (cn[0] + cn[1]):.1f}")
    else:
        print("(no git history with the matplotlib population figures: reference not timed)")


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "population":
        population(int(sys.argv[2]) if len(sys.argv) > 2 else 200, int(sys.argv[3]) if len(sys.argv) > 3 else 5)
    elif len(sys.argv) > 1 and sys.argv[1] == "figures":
        figures(sys.argv[2] if len(sys.argv) > 2 else None, int(sys.argv[3]) if len(sys.argv) > 3 else 5)
    else:
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 200)
