"""Pitfall warnings of ``fit``: plain words, each once, each with its fix, in the output and FIT.json.

Invented olivine and plagioclase profiles from the project's forward model
(self-consistency); the size of the pressure effect is checked against the
Arrhenius factor exp(V·ΔP/RT) written here, with the activation volume of
7 cm³/mol the law cites (Dohmen & Chakraborty 2007). Run in-process.
"""

import json
import math
import re

import numpy as np
import pandas as pd
import pytest

from zoneprofile.cli import main
from zoneprofile.diffusion import simulate_boundary

R = 8.314462618  # J/(mol K), CODATA 2018


@pytest.fixture(scope="module")
def olivine_csv(tmp_path_factory):
    x = np.arange(0.0, 160.01, 2.0)
    fo = simulate_boundary(x, element="FeMg", mineral="olivine", temperature_c=1150, time_days=1.0,
                           boundary_um=60.0, inner=80.0, outer=86.0, fo2_pa=1e-7, beam_um=2.0)
    rng = np.random.default_rng(3)
    path = tmp_path_factory.mktemp("ol") / "ol.csv"
    pd.DataFrame({"distance_um": x, "Fo": (fo + rng.normal(0, 0.15, x.size)).round(3),
                  "Fo_sd": 0.15}).to_csv(path, index=False)
    return path


def _run(path, tmp_path, capsys, *extra, name="fit.json"):
    out = tmp_path / name
    code = main(["fit", str(path), "--element", "FeMg", "--mineral", "olivine", "--temperature-c", "1150",
                 "--temperature-sd-c", "10", "--beam-um", "2", "--direction", "[001]", "--boundary-um", "60",
                 "--draws", "100", "-o", str(out), *extra])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    (fit,) = json.loads(out.read_text())["fits"]
    return fit, printed.out


def test_pressure_default_is_named_with_its_size_and_fix(olivine_csv, tmp_path, capsys):
    fit, printed = _run(olivine_csv, tmp_path, capsys, "--fo2-pa", "1e-7")
    notes = [w for w in fit["warnings"] if w.startswith("pressure not given")]
    assert len(notes) == 1 and printed.count("pressure not given") == 1
    assert "0.1 MPa" in notes[0] and "--pressure-mpa" in notes[0]
    factor = float(re.search(r"at 200 MPa the time would be ([0-9.]+)×", notes[0]).group(1))
    expected = math.exp(7e-6 * (200e6 - 1e5) / (R * (1150 + 273.15)))  # D(0.1 MPa)/D(200 MPa)
    assert factor == pytest.approx(expected, abs=0.006)  # printed to 2 decimals
    fit2, printed2 = _run(olivine_csv, tmp_path, capsys, "--fo2-pa", "1e-7", "--pressure-mpa", "200",
                          name="fit2.json")
    assert not any("pressure not given" in w for w in fit2["warnings"])


def test_fo2_range_warning_says_what_it_means_and_what_to_do(olivine_csv, tmp_path, capsys):
    # QFM at 1150 °C is above the 1e-5 Pa where the TaMED calibration stops
    fit, printed = _run(olivine_csv, tmp_path, capsys, "--fo2-buffer", "QFM")
    notes = [w for w in fit["warnings"] if "outside the calibrated range" in w and w.startswith("fO2")]
    assert len(notes) == 1 and printed.count("outside the calibrated range") == 1
    (w,) = notes
    assert "extrapolated" in w and "less certain" in w and "bias is unknown" in w
    assert "--fo2-pa within 1e-10–1e-05 Pa" in w and "accept and report" in w
    fit2, _ = _run(olivine_csv, tmp_path, capsys, "--fo2-pa", "1e-7", name="fit2.json")
    assert not any("outside the calibrated range" in w for w in fit2["warnings"])


def test_unknown_obliquity_says_it_widens_and_how_to_narrow(olivine_csv, tmp_path, capsys):
    fit, printed = _run(olivine_csv, tmp_path, capsys, "--fo2-pa", "1e-7")
    notes = [w for w in fit["warnings"] if "section obliquity" in w]
    assert len(notes) == 1 and printed.count("section obliquity") == 1
    assert "widens the interval" in notes[0] and "narrows it" in notes[0] and "EBSD" in notes[0]
    assert "--obliquity-deg" in notes[0]
    fit2, _ = _run(olivine_csv, tmp_path, capsys, "--fo2-pa", "1e-7", "--obliquity-deg", "10", name="fit2.json")
    assert not any("widens the interval" in w for w in fit2["warnings"])


def _mg_sr_table(tmp_path, t_mg, t_sr):
    from zoneprofile.diffusion import synthetic_boundary_profile

    kw = dict(seed=2, mineral="plagioclase", temperature_c=1000.0, an_outer=72.0, an_inner=55.0, beam_um=3.0,
              noise_fraction=0.02)
    mg, _ = synthetic_boundary_profile(element="Mg", time_days=t_mg, outer=900.0, inner=600.0, **kw)
    sr, _ = synthetic_boundary_profile(element="Sr", time_days=t_sr, outer=1100.0, inner=800.0, **kw)
    path = tmp_path / "mgsr.csv"
    pd.DataFrame({"distance_um": mg["distance_um"], "An": mg["An"], "Mg_ppm": mg["value"],
                  "Sr_ppm": sr["value"]}).to_csv(path, index=False)
    return path


def _fit_mg_sr(path, tmp_path, capsys):
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg,Sr", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--temperature-sd-c", "10", "--beam-um", "3", "--boundary-um", "40", "--draws", "200",
                 "-o", str(out)])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    return json.loads(out.read_text()), printed.out


def test_two_elements_disagreeing_at_one_boundary_are_flagged_once(tmp_path, capsys):
    # Mg made 30 d old, Sr 3000 d: growth, not diffusion, would give such a pair
    doc, printed = _fit_mg_sr(_mg_sr_table(tmp_path, 30.0, 3000.0), tmp_path, capsys)
    assert [f["element"] for f in doc["fits"]] == ["Mg", "Sr"]
    assert doc["input"]["options"]["element"] == "Mg,Sr"
    mg, sr = doc["fits"]
    assert mg["time_days"]["p2_5"] <= 30.0 <= mg["time_days"]["p97_5"]
    assert sr["time_days"]["p2_5"] <= 3000.0 <= sr["time_days"]["p97_5"]
    (note,) = [w for w in doc["warnings"] if w.startswith("growth or diffusion?")]  # with the run's shared notes
    assert note.startswith("growth or diffusion? Sr and Mg date the boundary at 40.0 µm differently")
    for reason in ("temperature", "non-instant growth", "law", "partitioning", "fix:"):
        assert reason in note
    assert printed.count("growth or diffusion?") == 1
    assert sum(note in f["warnings"] for f in doc["fits"]) == 1


def test_two_elements_agreeing_are_not_flagged(tmp_path, capsys):
    doc, printed = _fit_mg_sr(_mg_sr_table(tmp_path, 300.0, 300.0), tmp_path, capsys)
    assert len(doc["fits"]) == 2
    assert not any(w.startswith("growth or diffusion?") for w in doc["warnings"])
    assert "growth or diffusion?" not in printed


@pytest.mark.parametrize("extra, words", [(["--element", "Mg,mg"], "twice"),
                                          (["--element", "Mg,Sr", "--plot", "f.png"], "--plot")])
def test_several_elements_bad_requests_exit_2_and_write_nothing(tmp_path, capsys, extra, words):
    path = _mg_sr_table(tmp_path, 30.0, 30.0)
    out = tmp_path / "fit.json"
    extra = [e if e != "f.png" else str(tmp_path / "f.png") for e in extra]
    code = main(["fit", str(path), "--mineral", "plagioclase", "--temperature-c", "1000", "--boundary-um", "40",
                 "--draws", "50", "-o", str(out), *extra])
    assert code == 2 and words in capsys.readouterr().err
    assert not out.exists() and not (tmp_path / "f.png").exists()


def test_same_boundary_distance_is_the_campaigns():
    from zoneprofile.campaign._boundaries import MATCH_UM
    from zoneprofile.diffusion._checks import SAME_BOUNDARY_UM

    assert SAME_BOUNDARY_UM == MATCH_UM
