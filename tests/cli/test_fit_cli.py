"""`zoneprofile fit` end to end: outputs, options and every bad input it refuses (exit 2, one line)."""

import json

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from zoneprofile.diffusion import synthetic_boundary_profile


@pytest.fixture(scope="module")
def mg_profile(tmp_path_factory):
    # invented data from the seeded forward model
    d, truth = synthetic_boundary_profile(seed=7, element="Mg", mineral="plagioclase", temperature_c=900.0,
                                          time_days=30.0, boundary_um=40.0, outer=12000.0, inner=8000.0,
                                          an_outer=72.0, an_inner=52.0, beam_um=4.0, noise_fraction=0.015)
    folder = tmp_path_factory.mktemp("fit")
    path = folder / "mg.csv"
    pd.DataFrame({"distance_um": d["distance_um"], "Mg_ppm": d["value"], "An": d["An"]}).to_csv(path, index=False)
    return path, truth


def _fit(path, out, *extra):
    return run_cli("fit", path, "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "900",
                   "--temperature-sd-c", "15", "--beam-um", "4", "--draws", "200", "-o", out, *extra)


def test_fit_writes_json_and_figure(mg_profile, tmp_path):
    path, truth = mg_profile
    out, fig = tmp_path / "FIT.json", tmp_path / "fit.svg"
    code, stdout, err = _fit(path, out, "--plot", fig)
    assert code == 0, err
    doc = json.loads(out.read_text())
    fit = doc["fits"][0]
    for key in ("position_um", "element", "law", "temperature_c", "log10_dt_m2", "time_days", "resolved",
                "warnings"):
        assert key in fit
    assert set(fit["time_days"]) >= {"best", "median", "p2_5", "p16", "p84", "p97_5"}
    assert fit["time_days"]["p2_5"] <= truth["time_days"] <= fit["time_days"]["p97_5"]
    assert fit["law"] == "costa2003-mg-plag"
    assert fit["resolved"] is True
    assert "hazard" in doc["caution"]
    assert fig.read_text().lstrip().startswith("<?xml")
    assert "Boundary at" in stdout
    # an existing output is kept without --force, replaced with it
    before = out.read_text()
    code, _, err = _fit(path, out, "--draws", "50")
    assert code == 2 and "--force" in err and len(err.strip().splitlines()) == 1
    assert out.read_text() == before


def test_two_boundaries_two_fits_and_an_from_second_table(tmp_path):
    # An from a second (microprobe) table at other positions, aligned with --offset-um
    d, _ = synthetic_boundary_profile(seed=8, element="Sr", mineral="plagioclase", temperature_c=1000.0,
                                      time_days=80.0, boundary_um=50.0, outer=450.0, inner=300.0,
                                      an_outer=62.0, an_inner=62.0, length_um=100.0, spacing_um=2.0,
                                      beam_um=8.0, beam_shape="square", noise_fraction=0.01)
    prof = tmp_path / "sr.csv"
    pd.DataFrame({"distance_um": d["distance_um"], "Sr_ppm": d["value"]}).to_csv(prof, index=False)
    an_tab = tmp_path / "an.csv"
    xa = np.arange(0.0, 101.0, 1.0)  # its own zero, 5 µm coreward of the profile's
    pd.DataFrame({"distance_um": xa, "An": np.full(xa.size, 62.0)}).to_csv(an_tab, index=False)
    out = tmp_path / "FIT.json"
    code, printed, err = run_cli("fit", prof, "--element", "Sr", "--mineral", "plagioclase", "--temperature-c",
                                 "1000", "--beam-um", "8", "--beam-shape", "square", "--an-from", an_tab,
                                 "--offset-um", "5", "--boundary-um", "30", "50", "--draws", "100", "-o", out)
    assert code == 0, err
    doc = json.loads(out.read_text())
    # run-level notes (stated defaults of the budget, the same for both fits) are said once: printed once and
    # kept in FIT.json's top-level warnings, not repeated in each fit's
    defaults = [w for w in doc["warnings"] if w.startswith("stated default used for")]
    assert defaults, doc["warnings"]
    for w in defaults:
        assert printed.count(w) == 1
        assert not any(w in f["warnings"] for f in doc["fits"])
    lines = [ln.strip() for ln in printed.splitlines() if ln.strip().startswith("warning:")]
    assert len(lines) == len(set(lines))
    assert [round(f["position_um"]) for f in doc["fits"]] == [30, 50]
    assert doc["input"]["an_from"]["offset_um"] == 5
    assert doc["fits"][1]["model_setup"]["beam_shape"] == "square"
    # the real boundary (50 µm) is dated; the one at 30 µm sits in a plateau and is not resolved
    assert doc["fits"][1]["resolved"] is True
    assert doc["fits"][0]["resolved"] is False


def _bad(tmp_path, table, *args, name="p.csv"):
    path = tmp_path / name
    if isinstance(table, pd.DataFrame):
        table.to_csv(path, index=False)
    else:
        path.write_text(table)
    out = tmp_path / "FIT.json"
    code, stdout, err = run_cli("fit", path, *args, "-o", out)
    assert code == 2, err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert not out.exists()
    return err


def _good_table():
    x = np.arange(0.0, 60.0, 2.0)
    return pd.DataFrame({"distance_um": x, "Sr_ppm": np.where(x < 30, 900.0, 600.0), "An": 60.0})


SR = ("--element", "Sr", "--mineral", "plagioclase", "--temperature-c", "1000")


@pytest.mark.parametrize(
    "args, expected",
    [
        (("--element", "Zn", "--mineral", "plagioclase", "--temperature-c", "1000"), "unknown element"),
        (("--element", "Sr", "--mineral", "garnet", "--temperature-c", "1000"), "unknown mineral"),
        (("--element", "Sr", "--mineral", "plagioclase", "--temperature-c", "-5"), "valid: from 400 to 1500 °C"),
        (("--element", "Sr", "--mineral", "plagioclase", "--temperature-c", "1700"), "valid: from 400 to 1500 °C"),
        ((*SR, "--boundary-um", "500"), "outside the profile"),
        ((*SR, "--boundary-um", "3"), "too few points"),
        ((*SR, "--plot", "fig.gif"), "unsupported figure"),
        ((*SR, "--geometry", "sphere"), "needs --radius-um"),
        ((*SR, "--cooling-c-per-day", "1", "--path", "x.csv"), "not both"),
    ],
)
def test_bad_arguments(tmp_path, args, expected):
    err = _bad(tmp_path, _good_table(), *args)
    assert expected in err


def test_no_an_column(tmp_path):
    err = _bad(tmp_path, _good_table().drop(columns="An"), *SR)
    assert "no 'An' column" in err and "p.csv" in err


def test_constant_an_option(tmp_path):
    t = _good_table().drop(columns="An")
    path = tmp_path / "p.csv"
    t.to_csv(path, index=False)
    out = tmp_path / "FIT.json"
    code, printed, err = run_cli("fit", path, *SR, "--an", "60", "--beam-um", "3", "--draws", "50", "-o", out)
    assert code == 0, err
    fit = json.loads(out.read_text())["fits"][0]
    assert fit["model_setup"]["reference_composition"]["x_an"] == pytest.approx(0.6)
    assert fit["resolved"] is False  # a perfectly sharp step: only an upper bound
    # the budget's spreads of a bound are not read as the bound's uncertainty
    assert "not a date: these spreads describe the draws, not the bound" in printed


def test_flat_profile(tmp_path):
    t = _good_table().assign(Sr_ppm=700.0)
    assert "flat" in _bad(tmp_path, t, *SR)


def test_negative_concentration_names_row_and_column(tmp_path):
    t = _good_table()
    t.loc[4, "Sr_ppm"] = -3.0
    err = _bad(tmp_path, t, *SR)
    assert "row 6" in err and "Sr_ppm" in err


def test_missing_element_column(tmp_path):
    err = _bad(tmp_path, _good_table().drop(columns="Sr_ppm"), *SR)
    assert "Sr_ppm" in err


def test_olivine_needs_oxygen_fugacity(tmp_path):
    x = np.arange(0.0, 60.0, 2.0)
    t = pd.DataFrame({"distance_um": x, "Fo": np.where(x < 30, 80.0, 85.0)})
    err = _bad(tmp_path, t, "--element", "FeMg", "--mineral", "olivine", "--temperature-c", "1100")
    assert "fo2" in err.lower()


def test_fo_out_of_range(tmp_path):
    x = np.arange(0.0, 60.0, 2.0)
    t = pd.DataFrame({"distance_um": x, "Fo": np.where(x < 30, 80.0, 185.0)})
    err = _bad(tmp_path, t, "--element", "FeMg", "--mineral", "olivine", "--temperature-c", "1100",
               "--fo2-pa", "1e-5")
    assert "Fo" in err and "row" in err


def test_not_a_number_cell(tmp_path):
    text = "distance_um,Sr_ppm,An\n" + "\n".join(f"{x},{900 if x < 30 else 600},60" for x in range(0, 60, 2))
    text = text.replace("10,900,60", "10,abc,60")
    err = _bad(tmp_path, text, *SR)
    assert "row 7" in err and "abc" in err


def test_bad_temperature_path_table(tmp_path):
    table = tmp_path / "path.csv"
    table.write_text("time_days,temperature_c\n5,900\n10,880\n")
    err = _bad(tmp_path, _good_table(), *SR, "--path", table)
    assert "start at 0" in err and "path.csv" in err
