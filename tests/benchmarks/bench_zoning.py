"""Measure the zoning detectors on seeded invented profiles (run by hand).

    python tests/benchmarks/bench_zoning.py [N_SEEDS]

Prints, for each profile kind, the figures the zoning issue asks for (noise is
never given: it is estimated from each profile), and the time per profile.
"""

import sys
import time

import numpy as np

from zoneprofile.zoning import analyse_zoning, synthetic_case


def match(found, truth, tol=2.0):
    used, hits = set(), 0
    for t in truth:
        near = [i for i, s in enumerate(found) if i not in used and abs(s.position_um - t["position_um"]) <= tol
                and s.kind == t["kind"]]
        if near:
            used.add(near[0])
            hits += 1
    return hits, len(found) - len(used)


def main(n):
    for case in ("steps", "close-steps", "steps+band", "band", "resorption", "smooth", "noise"):
        t0 = time.process_time()
        hits = total = 0
        extras, wl_ok, cover, bands_found, big_steps, alone = [], 0, [], 0, 0, 0
        for seed in range(n):
            x, y, truth = synthetic_case(case, seed)
            res = analyse_zoning(x, y)
            h, e = match(res.steps, truth["steps"])
            hits, total = hits + h, total + len(truth["steps"])
            extras.append(e)
            bands_found += len(res.oscillatory_bands)
            big_steps += sum(abs(s.change) >= 3.0 for s in res.steps)
            for tb in truth["bands"]:
                best = max(res.oscillatory_bands, default=None,
                           key=lambda b: min(b.end_um, tb["end_um"]) - max(b.start_um, tb["start_um"]))
                if best is not None:
                    wl_ok += abs(best.wavelength_um / tb["wavelength_um"] - 1) <= 0.15
                    ov = max(min(best.end_um, tb["end_um"]) - max(best.start_um, tb["start_um"]), 0)
                    cover.append(ov / (tb["end_um"] - tb["start_um"]))
                else:
                    cover.append(0.0)
            if case == "resorption":
                rs = res.resorption_surfaces
                alone += (len(rs) == 1 and len(res.steps) == 1
                          and abs(rs[0]["position_um"] - truth["steps"][0]["position_um"]) <= 2.0)
        dt = (time.process_time() - t0) / n
        line = f"{case:11s} n={n:3d}  {dt:.2f} s/profile"
        if total:
            line += f"  steps found {hits}/{total} ({100 * hits / total:.1f} %), extras per profile max {max(extras)}" \
                    f" mean {np.mean(extras):.2f}"
        if case in ("band", "steps+band"):
            line += f"  wavelength within 15 %: {wl_ok}/{n}; coverage median {np.median(cover):.2f} min {min(cover):.2f}"
        if case == "resorption":
            line += f"  found alone at its position: {alone}/{n}"
        if case in ("smooth", "noise"):
            line += f"  steps >= 3 mol%: {big_steps}; bands: {bands_found}"
        print(line, flush=True)


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 30)
