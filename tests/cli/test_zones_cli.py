"""`zoneprofile zones`: outputs, and every bad input giving exit 2, one line and no output."""

import json

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from zoneprofile.zoning import synthetic_case


@pytest.fixture
def profile(tmp_path):
    x, y, truth = synthetic_case("resorption", 3)
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"point": [f"p{i}" for i in range(x.size)], "distance_um": x.round(3), "An": y.round(2),
                          "FeO": (0.4 + 0.2 * (x < truth["steps"][0]["position_um"])
                                  + rng.normal(0, 0.02, x.size)).round(3),
                          "qc": "ok"})
    frame.loc[5, "qc"] = "low total"
    frame.loc[5, "An"] = 99.0  # a flagged outlier, left out by default
    path = tmp_path / "profile.csv"
    frame.to_csv(path, index=False)
    return path, truth


def test_zones_writes_json_table_and_figure(profile, tmp_path):
    path, truth = profile
    out, table, fig = tmp_path / "z.json", tmp_path / "zones.csv", tmp_path / "z.svg"
    code, stdout, stderr = run_cli("zones", path, "-o", out, "--table", table, "--plot", fig)
    assert code == 0, stderr
    data = json.loads(out.read_text())
    for key in ("steps", "resorption_surfaces", "oscillatory_bands", "zones", "noise_sd", "column"):
        assert key in data
    assert data["column"] == "An" and data["noise_source"] == "estimated from the profile"
    assert len(data["steps"]) == 1
    step = data["steps"][0]
    for key in ("position_um", "before", "after", "change", "kind", "width_um", "position_sd_um", "recharge"):
        assert key in step
    assert step["kind"] == "reverse"
    assert step["position_um"] == pytest.approx(truth["steps"][0]["position_um"], abs=2.0)
    surface = data["resorption_surfaces"][0]
    assert any(e.startswith("FeO +0.2") for e in surface["evidence"])
    assert pd.read_csv(table)["zone"].tolist() == [1, 2]
    assert fig.read_text().lstrip().startswith("<?xml")
    assert "resorption surface" in stdout


def test_noise_sd_option_and_png(profile, tmp_path):
    path, _ = profile
    out, fig = tmp_path / "z.json", tmp_path / "z.png"
    code, _, stderr = run_cli("zones", path, "-o", out, "--noise-sd", "0.7", "--plot", fig)
    assert code == 0, stderr
    assert json.loads(out.read_text())["noise_sd"] == 0.7
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def _bad(tmp_path, rows, header="distance_um,An"):
    path = tmp_path / "bad.csv"
    path.write_text(header + "\n" + "\n".join(rows) + "\n")
    return path


def _good_rows(n=20):
    return [f"{i * 2.0},{60 + (i % 3) * 0.4}" for i in range(n)]


def _expect_refusal(tmp_path, path, *extra, match):
    out = tmp_path / "out.json"
    code, stdout, stderr = run_cli("zones", path, "-o", out, *extra)
    assert code == 2, stderr
    assert len(stderr.strip().splitlines()) == 1
    assert "Traceback" not in stderr
    assert match in stderr, stderr
    assert not out.exists()
    return stderr


def test_too_few_points(tmp_path):
    path = _bad(tmp_path, _good_rows(6))
    _expect_refusal(tmp_path, path, match="at least 10")


def test_nan_cell_names_row_and_column(tmp_path):
    rows = _good_rows()
    rows[4] = "8.0,nan"
    err = _expect_refusal(tmp_path, _bad(tmp_path, rows), match="row 6")
    assert "'An'" in err


def test_inf_cell(tmp_path):
    rows = _good_rows()
    rows[7] = "14.0,inf"
    _expect_refusal(tmp_path, _bad(tmp_path, rows), match="row 9")


def test_an_out_of_range(tmp_path):
    rows = _good_rows()
    rows[3] = "6.0,120"
    err = _expect_refusal(tmp_path, _bad(tmp_path, rows), match="between 0 and 100")
    assert "row 5" in err and "'An'" in err


def test_unsorted_distances(tmp_path):
    rows = _good_rows()
    rows[5], rows[6] = rows[6], rows[5]
    _expect_refusal(tmp_path, _bad(tmp_path, rows), match="increase")


def test_duplicated_distance(tmp_path):
    rows = _good_rows()
    rows[6] = "10.0,61"
    _expect_refusal(tmp_path, _bad(tmp_path, rows), match="duplicated")


def test_missing_column(tmp_path):
    _expect_refusal(tmp_path, _bad(tmp_path, _good_rows()), "--column", "Fo", match="no 'Fo' column")


def test_bad_precision_column(tmp_path):
    rows = [r + ",0.5" for r in _good_rows()]
    rows[2] = rows[2][:-4] + ",-1"
    _expect_refusal(tmp_path, _bad(tmp_path, rows, header="distance_um,An,An_sd"), match="An_sd")


def test_bad_options(tmp_path, profile):
    path, _ = profile
    _expect_refusal(tmp_path, path, "--noise-sd", "-1", match="--noise-sd")
    _expect_refusal(tmp_path, path, "--endmember", "Sr_ppm=400", match="--endmember")
    _expect_refusal(tmp_path, path, "--plot", tmp_path / "fig.gif", match="--plot")


def test_existing_output_kept_without_force(profile, tmp_path):
    path, _ = profile
    out = tmp_path / "z.json"
    out.write_text("keep")
    code, _, stderr = run_cli("zones", path, "-o", out)
    assert code == 2 and "--force" in stderr and out.read_text() == "keep"
    code, _, stderr = run_cli("zones", path, "-o", out, "--force")
    assert code == 0 and json.loads(out.read_text())["column"] == "An"
