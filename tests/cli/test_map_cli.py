"""`zoneprofile map` on the command line: outputs and every refused input."""

import json
from pathlib import Path

import numpy as np
import pytest
import tifffile

from conftest import run_cli
from zoneprofile.io import read_profile
from zoneprofile.maps import synthetic_zoned_map

FIX = Path(__file__).resolve().parents[2] / "fixtures" / "maps"


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    d = tmp_path_factory.mktemp("mapcli")
    img, sp, truth = synthetic_zoned_map(seed=3, shape=(240, 240), obliquity_deg=35.0, return_maps=False)
    tifffile.imwrite(d / "grain_Ca.tif", img)
    sp.to_csv(d / "spots.csv", index=False)
    sp.iloc[:2].to_csv(d / "two_spots.csv", index=False)
    outside = sp.copy()
    outside.loc[3, "x_px"] = 250.0
    outside.to_csv(d / "outside.csv", index=False)
    line = ",".join(f"{v:.3f}" for v in truth["line"])
    return d, line, truth


def _base(d, line, spots="spots.csv", image="grain_Ca.tif"):
    return [d / image, "--pixel-um", "1", "--spots", d / spots, "--line", line, "--width-px", "5"]


def test_writes_profile_json_and_figure(case):
    d, line, truth = case
    out = d / "ok" / "plag.csv"
    out.parent.mkdir()
    code, stdout, stderr = run_cli("map", *_base(d, line), "-o", out, "--plot", d / "ok" / "plag.png")
    assert code == 0, stderr
    assert out.exists() and (d / "ok" / "plag.json").exists() and (d / "ok" / "plag.png").stat().st_size > 10000
    prof = read_profile(out, columns=("An", "An_sd"))
    assert np.all(np.diff(prof["distance_um"]) > 0)
    info = json.loads((d / "ok" / "plag.json").read_text())
    assert {"slope", "intercept", "r2", "rmse", "n", "loo_rmse", "slope_sd", "intercept_sd"} <= set(info["calibration"])
    assert info["image"]["sha256"] and info["spots"]["sha256"]
    assert info["geometry"]["section_angle_deg"] == 90.0
    growth = next(b for b in truth["boundaries"] if b["kind"] == "growth")
    found = min(info["boundaries"], key=lambda b: abs(b["position_um"] - growth["position_um"]))
    assert abs(found["obliquity_deg"] - 35.0) < 5 and abs(found["position_um"] - growth["position_um"]) < 3
    # never over an existing output without --force (checked before any work); with it, fine
    from zoneprofile.cli import main

    before = out.read_bytes()
    assert main(["map", *map(str, _base(d, line)), "-o", str(out)]) == 2
    assert out.read_bytes() == before
    assert main(["map", *map(str, _base(d, line)), "-o", str(out), "--force"]) == 0


def test_rim_normal(case, capsys):
    from zoneprofile.cli import main

    d, _, _ = case
    out = d / "rim.csv"
    code = main(["map", str(d / "grain_Ca.tif"), "--pixel-um", "1", "--spots", str(d / "spots.csv"),
                 "--rim-normal", "-o", str(out)])
    assert code == 0, capsys.readouterr().err
    prof = read_profile(out, columns=("An",))
    assert prof["distance_um"].iloc[0] < 3.0 and np.all(np.diff(prof["distance_um"]) > 0)
    info = json.loads(out.with_suffix(".json").read_text())
    assert info["mode"] == "rim-normal" and info["line"] is None


# the cases the issue names, each run as a user would (a fresh interpreter)
BAD = {
    "not_an_image": (lambda d, line: [FIX / "not_an_image_Ca.tif", "--pixel-um", "1", "--spots", d / "spots.csv",
                                      "--line", line], "not a TIFF image"),
    "truncated_tiff": (lambda d, line: [FIX / "truncated_Ca.tif", "--pixel-um", "1", "--spots", d / "spots.csv",
                                        "--line", "2,2,30,30"], "truncated"),
    "spots_outside": (lambda d, line: _base(d, line, spots="outside.csv"), "row 5, column 'x_px': spot lies outside"),
    "two_spots": (lambda d, line: _base(d, line, spots="two_spots.csv"), "at least 3 spot"),
    "line_outside": (lambda d, line: _base(d, "10,10,400,20"), "outside the image"),
    "line_zero_length": (lambda d, line: _base(d, "50,60,50,60"), "0 pixels long"),
    "pixel_zero": (lambda d, line: [d / "grain_Ca.tif", "--pixel-um", "0", "--spots", d / "spots.csv", "--line",
                                    line], "--pixel-um must be > 0"),
    "no_such_channel": (lambda d, line: _base(d, line) + ["--channel", "Na"], "channel 'Na' does not exist"),
}


@pytest.fixture(scope="module")
def bad_runs(case):
    d, line, _ = case
    runs = {}
    for name, (make, _) in BAD.items():  # in this process, one after the other (output capture is global)
        out = d / f"bad_{name}.csv"
        runs[name] = (out, run_cli("map", *make(d, line), "-o", out, "--plot", d / f"bad_{name}.png"))
    return runs


@pytest.mark.parametrize("name", sorted(BAD))
def test_bad_input_exit_2_one_line_nothing_written(bad_runs, case, name):
    import re

    d, _, _ = case
    out, (code, stdout, stderr) = bad_runs[name]
    assert code == 2, stderr
    assert len(stderr.strip().splitlines()) == 1 and "Traceback" not in stderr
    assert re.search(BAD[name][1], stderr), stderr
    assert not out.exists() and not out.with_suffix(".json").exists() and not (d / f"bad_{name}.png").exists()


# further refusals, run in-process through the same entry point (same exit code and message path)
MORE_BAD = {
    "pixel_negative": (lambda d, line: [d / "grain_Ca.tif", "--pixel-um", "-1.5", "--spots", d / "spots.csv",
                                        "--line", line], "--pixel-um must be > 0"),
    "no_pixel_size": (lambda d, line: [d / "grain_Ca.tif", "--spots", d / "spots.csv", "--line", line],
                      "pixel size unknown"),
    "bad_line_text": (lambda d, line: _base(d, "1,2,x,4"), "four numbers|4 comma-separated"),
    "bad_cell_matrix": (lambda d, line: [FIX / "bad_cell_Ca.csv", "--pixel-um", "1", "--spots", d / "spots.csv",
                                         "--line", "1,1,4,6"], "row 5, column '4'"),
    "missing_column": (lambda d, line: _base(d, line) + ["--column", "Fo"], "no 'Fo' column"),
    "width_zero": (lambda d, line: _base(d, line)[:-1] + ["0"], "at least 1"),
    "both_modes": (lambda d, line: _base(d, line) + ["--rim-normal"], "not allowed with"),
}


@pytest.mark.parametrize("name", sorted(MORE_BAD))
def test_more_bad_input_in_process(case, capsys, name):
    import re

    from zoneprofile.cli import main

    d, line, _ = case
    out = d / f"more_{name}.csv"
    try:
        code = main(["map", *map(str, MORE_BAD[name][0](d, line)), "-o", str(out)])
    except SystemExit as exc:  # argparse usage errors
        code = exc.code
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert re.search(MORE_BAD[name][1], err), err
    assert not out.exists() and not out.with_suffix(".json").exists()
