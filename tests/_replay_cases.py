"""Fits replayed before and after a refactor of the optimisers (self-consistency, invented data).

``record()`` writes the optimum of every case (all fitted parameters, χ² and the
noise-refit spread of log10 D·t) to ``tests/data/replay_fits.json``;
``tests/diffusion/test_fit_replay.py`` refits and compares. These numbers come from the
optimisers alone (coarse search, variable projection, the An-step tie, the last least-squares step),
not from the Monte Carlo draws, so changes to the uncertainty budget do not
disturb them.
"""

import json
import pathlib

import numpy as np

from zoneprofile.diffusion import fit_boundary, synthetic_boundary_profile

PATH = pathlib.Path(__file__).parent / "data" / "replay_fits.json"


def _case(name, fit_kw, **gen):
    data, _ = synthetic_boundary_profile(**gen)
    kw = dict(element=gen["element"], mineral=gen["mineral"], temperature_c=gen["temperature_c"],
              draws=200, seed=3, noise_refits=20)
    if "An" in data:
        kw["an"] = data["An"]
    kw.update(fit_kw)
    return name, data, kw


def cases():
    return [
        _case("mg-plag-coupled", {"beam_um": 4.0}, seed=1, element="Mg", mineral="plagioclase",
              temperature_c=900.0, time_days=30.0, outer=12000.0, inner=8000.0, an_outer=72.0, an_inner=52.0,
              beam_um=4.0, noise_fraction=0.015),
        _case("sr-plag-fixed-sd", {"beam_um": 3.0, "boundary_um": 40.0, "value_sd": 8.0}, seed=2, element="Sr",
              mineral="plagioclase", temperature_c=1000.0, time_days=200.0, outer=500.0, inner=800.0,
              beam_um=3.0, noise_sd=8.0),
        _case("ti-quartz-auto-rim", {"beam_um": 5.0, "rim": "auto"}, seed=4, element="Ti", mineral="quartz",
              temperature_c=800.0, time_days=3000.0, outer=80.0, inner=40.0, beam_um=5.0, noise_fraction=0.02),
        _case("femg-olivine-nonlinear", {"beam_um": 2.0, "fo2_pa": 1e-7, "direction": "001"}, seed=5,
              element="FeMg", mineral="olivine", temperature_c=1100.0, time_days=20.0, outer=78.0, inner=86.0,
              beam_um=2.0, noise_sd=0.2, fo2_pa=1e-7, direction="001"),
    ]


def summary(res):
    out = {name: p["value"] for name, p in res.parameters.items()}
    out["chi2"] = res.chi2
    return out


def record():
    got = {}
    for name, data, kw in cases():
        res = fit_boundary(data["distance_um"], data["value"], **kw)
        got[name] = summary(res)
    PATH.write_text(json.dumps(got, indent=1, sort_keys=True) + "\n")
    return got


if __name__ == "__main__":
    print(json.dumps(record(), indent=1))
