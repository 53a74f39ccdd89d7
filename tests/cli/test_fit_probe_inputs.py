"""Probe data as it comes: MgO wt% instead of Mg ppm, an empty (below-detection) cell, no precision column.

The conversion is checked against periodictable (an independent reference
library of atomic weights): ppm Mg per wt% MgO = 10⁴ · M(Mg)/M(MgO) ≈ 6030.
Run in-process with ``main([...])``.
"""

import json

import numpy as np
import pandas as pd
import pytest

from zoneprofile.cli import main
from zoneprofile.cli._fit_inputs import oxide_to_ppm_factor
from zoneprofile.diffusion import synthetic_boundary_profile


def test_oxide_factor_against_periodictable():
    periodictable = pytest.importorskip("periodictable")
    for el, ox in (("Mg", "MgO"), ("Sr", "SrO"), ("Ba", "BaO")):
        ref = 1e4 * periodictable.elements.symbol(el).mass / periodictable.formula(ox).mass
        assert oxide_to_ppm_factor(el) == pytest.approx(ref, rel=2e-4)  # atomic-weight tables differ in the 5th digit


@pytest.fixture()
def probe_table(tmp_path):
    d, _ = synthetic_boundary_profile(seed=2, element="Mg", mineral="plagioclase", temperature_c=1000.0,
                                      time_days=30.0, outer=900.0, inner=600.0, an_outer=72.0, an_inner=55.0,
                                      beam_um=3.0, noise_fraction=0.02)
    mgo = d["value"] / oxide_to_ppm_factor("Mg")
    frame = pd.DataFrame({"distance_um": d["distance_um"], "MgO": mgo, "An": d["An"]})
    frame["MgO"] = frame["MgO"].map(lambda v: f"{v:.5f}")
    frame.loc[7, "MgO"] = ""  # below detection, left empty
    path = tmp_path / "probe.csv"
    frame.to_csv(path, index=False)
    return path, d


def test_fit_reads_mgo_wt_percent_and_leaves_out_an_empty_cell(probe_table, tmp_path, capsys):
    path, d = probe_table
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--beam-um", "3", "--boundary-um", "40", "--draws", "200", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    fit = json.loads(out.read_text())["fits"][0]
    warnings = " ".join(fit["warnings"])
    assert "Mg_ppm from MgO (wt%)" in warnings
    assert "1 point(s) with an empty MgO cell" in warnings
    assert "estimated from the fit's residuals" in warnings
    assert fit["n_points"] == len(d["distance_um"]) - 1
    # the converted values are the ppm the table was made from (to the 5 decimals written)
    assert np.max(np.abs(np.asarray(fit["points"]["value"]) - np.delete(d["value"], 7))) < 0.1


def test_fit_leaves_out_censored_analyses_and_counts_them(probe_table, tmp_path, capsys):
    """Below-detection marks as ``recalc`` reads them stop no fit; each is left out and counted."""
    path, d = probe_table
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    marks = {12: "<0.01", 30: "bdl", 44: "n.d."}
    for k, mark in marks.items():
        frame.loc[k, "MgO"] = mark
    frame.to_csv(path, index=False)
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--beam-um", "3", "--boundary-um", "40", "--draws", "200", "-o", str(out)])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    fit = json.loads(out.read_text())["fits"][0]
    warnings = " ".join(fit["warnings"])
    assert "3 censored analyses left out" in warnings
    assert "3 censored analyses left out" in printed.out
    assert "1 point(s) with an empty MgO cell" in warnings  # the blank cell is counted apart
    assert fit["n_points"] == len(d["distance_um"]) - 4
    kept = np.delete(d["value"], [7, *marks])
    assert np.max(np.abs(np.asarray(fit["points"]["value"]) - kept)) < 0.1


def test_censored_mark_in_distance_is_still_refused(probe_table, tmp_path, capsys):
    path, _ = probe_table
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    frame.loc[3, "distance_um"] = "bdl"
    frame.to_csv(path, index=False)
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--boundary-um", "40", "--draws", "50", "-o", str(out)])
    assert code == 2
    assert "distance_um" in capsys.readouterr().err
    assert not out.exists()


def _with_precision(path):
    """The table with an MgO_sd column: 2 % of each value, the noise the profile was made with."""
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    frame["MgO_sd"] = [f"{0.02 * float(v):.6f}" if v else "" for v in frame["MgO"]]
    return frame


def test_a_censored_value_beside_a_mark_in_its_precision_column_is_left_out(probe_table, tmp_path, capsys):
    """Probe tables mark a below-detection analysis in the value and in its precision column; the row is
    left out, so its precision cell is not read (it stopped the fit: "not a number (found 'bdl')")."""
    path, d = probe_table
    frame = _with_precision(path)
    frame.loc[12, "MgO"], frame.loc[12, "MgO_sd"] = "<0.01", "bdl"
    frame.loc[7, "MgO_sd"] = ""  # the blank value's precision is blank too
    frame.to_csv(path, index=False)
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--beam-um", "3", "--boundary-um", "40", "--draws", "200", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    fit = json.loads(out.read_text())["fits"][0]
    assert fit["n_points"] == len(d["distance_um"]) - 2
    assert "1 censored analyses left out" in " ".join(fit["warnings"])
    assert not any("is blank for" in w for w in fit["warnings"])  # every kept analysis has its precision


def test_a_precision_column_with_gaps_is_not_used_and_the_fit_says_so(probe_table, tmp_path, capsys):
    path, d = probe_table
    frame = _with_precision(path)
    frame.loc[20, "MgO_sd"] = ""  # a measured analysis without its precision
    frame.to_csv(path, index=False)
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--beam-um", "3", "--boundary-um", "40", "--draws", "200", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    warnings = " ".join(json.loads(out.read_text())["fits"][0]["warnings"])
    assert "Mg_ppm_sd is blank for 1 of the" in warnings or "MgO_sd is blank for 1 of the" in warnings


def test_a_mark_in_the_precision_of_a_measured_analysis_is_refused_with_its_cell(probe_table, tmp_path, capsys):
    path, _ = probe_table
    frame = _with_precision(path)
    frame.loc[20, "MgO_sd"] = "bdl"  # the value was measured: a precision cannot be below detection
    frame.to_csv(path, index=False)
    out = tmp_path / "fit.json"
    code = main(["fit", str(path), "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "1000",
                 "--beam-um", "3", "--boundary-um", "40", "--draws", "200", "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert "row 22" in err and "MgO_sd" in err and "bdl" in err
    assert not out.exists()
