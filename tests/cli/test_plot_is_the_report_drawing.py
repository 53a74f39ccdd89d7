"""The figure of a command is the report's figure of that item, and ``--figure-width`` is checked.

``fit --plot`` of a boundary and the report's crystal figure of the same
boundary contain the same fit block: the same SVG elements, attribute for
attribute, once the block's placement (its ``translate``) is set aside.
"""

import json
import xml.etree.ElementTree as ET
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from zoneprofile.diffusion import synthetic_boundary_profile

NS = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def mg_profile(tmp_path_factory):
    # invented data from the seeded forward model
    d, _ = synthetic_boundary_profile(seed=7, element="Mg", mineral="plagioclase", temperature_c=900.0,
                                      time_days=30.0, boundary_um=40.0, outer=12000.0, inner=8000.0,
                                      an_outer=72.0, an_inner=52.0, beam_um=4.0, noise_fraction=0.015)
    folder = tmp_path_factory.mktemp("plot")
    path = folder / "mg.csv"
    pd.DataFrame({"distance_um": d["distance_um"], "Mg_ppm": d["value"], "An": d["An"]}).to_csv(path, index=False)
    return path


def _block(svg_bytes, name):
    root = ET.fromstring(svg_bytes)
    blocks = [g for g in root.iter(f"{NS}g") if g.get("class") == name]
    assert len(blocks) == 1
    return blocks[0]


def _drawing(g):
    """The block's elements as (tag, attributes, text), hatch clip ids numbered in order of appearance."""
    ids = {}
    out = []
    for el in g.iter():
        attrs = dict(el.attrib)
        if el is g:
            attrs.pop("transform")
        for key in ("id", "clip-path"):
            if key in attrs:
                ref = attrs[key].removeprefix("url(#").removesuffix(")")
                attrs[key] = ids.setdefault(ref, f"clip{len(ids)}")
        out.append((el.tag, tuple(sorted(attrs.items())), (el.text or "").strip()))
    return out


@pytest.mark.parametrize("width", ["double", pytest.param("single", marks=pytest.mark.slow)])
def test_fit_plot_is_the_report_figure_of_the_boundary(mg_profile, tmp_path, width):
    from zoneprofile.campaign._pipeline import _boundary_entry
    from zoneprofile.report.figures import crystal_figure_bytes

    out, fig = tmp_path / "FIT.json", tmp_path / "fit.svg"
    code, _, err = run_cli("fit", mg_profile, "--element", "Mg", "--mineral", "plagioclase", "--temperature-c",
                           "900", "--temperature-sd-c", "15", "--beam-um", "4", "--draws", "60",
                           "--boundary-um", "40", "-o", out, "--plot", fig, "--figure-width", width)
    assert code == 0, err
    fit = json.loads(out.read_text())["fits"][0]
    # the campaign's record part for this boundary, made by the campaign's own code from the same fit
    entry = _boundary_entry(SimpleNamespace(to_dict=lambda: fit, time_draws_days=None),
                            {"position_um": fit["position_um"], "kind": "reverse", "recharge": True}, "Mg", None)
    record = {"sample": "S", "crystal": "c1", "mineral": "plagioclase", "profile": None, "zones": None,
              "boundaries": [entry]}
    report_svg = crystal_figure_bytes(record, ("svg",), width=width)["svg"]
    plot_svg = fig.read_bytes()
    a, b = _block(plot_svg, "fits"), _block(report_svg, "fits")
    assert _drawing(a) == _drawing(b)
    assert len(_drawing(a)) > 50  # a real drawing: band, curves, points, ticks, labels, legend
    texts = [t for _, _, t in _drawing(a)]
    assert any(t.startswith("Mg at 40 µm: ") for t in texts)
    assert ET.fromstring(plot_svg).get("width") == ET.fromstring(report_svg).get("width")  # same print width


@pytest.mark.slow  # a second fit (~4 s); the bars themselves are checked fast in tests/report/test_figure_system.py
def test_fit_plot_error_bars_from_the_sd_column(mg_profile, tmp_path):
    frame = pd.read_csv(mg_profile)
    frame["Mg_ppm_sd"] = 0.015 * frame["Mg_ppm"]
    path = tmp_path / "mg_sd.csv"
    frame.to_csv(path, index=False)
    fig = tmp_path / "fit.svg"
    code, _, err = run_cli("fit", path, "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "900",
                           "--temperature-sd-c", "15", "--beam-um", "4", "--draws", "60", "--boundary-um", "40",
                           "-o", tmp_path / "FIT.json", "--plot", fig)
    assert code == 0, err
    root = ET.fromstring(fig.read_bytes())
    texts = [t.text for t in root.iter(f"{NS}text")]
    assert "data (±1 sd)" in texts
    n = int(json.loads((tmp_path / "FIT.json").read_text())["fits"][0]["n_points"])
    # one black path of n vertical bars (one per fitted point)
    bars = [p for p in root.iter(f"{NS}path") if p.get("stroke") == "#000000" and p.get("d", "").count("M") == n]
    assert len(bars) == 1


@pytest.mark.parametrize("command", ["fit", "zones", "map"])
def test_unknown_figure_width_exits_2_with_one_line_and_writes_nothing(tmp_path, command, mg_profile):
    out = tmp_path / ("o.json" if command != "map" else "o.csv")
    fig = tmp_path / "f.png"
    args = {"fit": [mg_profile, "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "900"],
            "zones": [mg_profile, "--column", "An"],
            "map": [tmp_path / "none.tif", "--spots", tmp_path / "s.csv", "--line", "1,1,5,5"]}[command]
    code, stdout, err = run_cli(command, *args, "-o", out, "--plot", fig, "--figure-width", "wide")
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "--figure-width" in lines[0] and "single" in lines[0] and "double" in lines[0]
    assert "Traceback" not in err
    assert not out.exists() and not fig.exists()


@pytest.mark.slow  # two zoning runs (~9 s)
def test_zones_plot_single_column_png_keeps_flagged_points(tmp_path):
    from PIL import Image

    from zoneprofile.zoning import synthetic_case

    x, an, _ = synthetic_case("steps+band", seed=1)
    an = np.array(an)
    qc = ["ok"] * len(x)
    an[10], qc[10] = 15.0, "low total"  # an outlier flagged by QC
    table = tmp_path / "z.csv"
    pd.DataFrame({"distance_um": x, "An": an, "An_sd": 0.6, "qc": qc}).to_csv(table, index=False)
    png, svg = tmp_path / "z.png", tmp_path / "z.svg"
    for fig in (png, svg):
        code, _, err = run_cli("zones", table, "-o", tmp_path / f"{fig.suffix[1:]}.json", "--plot", fig,
                               "--figure-width", "single")
        assert code == 0, err
    with Image.open(png) as img:
        assert abs(img.size[0] - 300 * 3.54) <= 1  # 90 mm at 300 dpi
    texts = [t.text for t in ET.fromstring(svg.read_bytes()).iter(f"{NS}text")]
    assert "flagged, off scale" in texts and "An (±1 sd)" in texts and "oscillatory band" in texts


_CAMPAIGN = """title = "figure width"
figure_width = "{width}"

[defaults]
mineral = "plagioclase"
elements = ["Mg"]
temperature_c = 1000

[samples.S]

[[crystals]]
sample = "S"
id = "c1"
traverse = "missing.csv"
"""


def test_campaign_figure_width_key_is_read_and_checked(tmp_path):
    from zoneprofile._validation import InputError
    from zoneprofile.campaign import load_campaign

    (tmp_path / "missing.csv").write_text("distance_um,An\n0,50\n")
    path = tmp_path / "c.toml"
    path.write_text(_CAMPAIGN.format(width="Single"))
    assert load_campaign(path).figure_width == "single"
    path.write_text(_CAMPAIGN.replace('figure_width = "{width}"\n', ""))
    assert load_campaign(path).figure_width == "double"  # the default (zoneprofile/_limits.py CHOICES)
    path.write_text(_CAMPAIGN.format(width="wide"))
    with pytest.raises(InputError, match=r"line 2.*figure_width.*single, double"):
        load_campaign(path)
    out = tmp_path / "out"
    code, _, err = run_cli("run", path, "--out", out, "--quiet")
    assert code == 2 and len(err.strip().splitlines()) == 1 and "figure_width" in err
    assert not out.exists()


def test_report_figures_at_the_campaign_width(tmp_path):
    from PIL import Image

    from zoneprofile.report import write_outputs
    from zoneprofile.report._sample import sample_provenance, sample_records

    recs = sample_records(seed=7, samples=("S",), crystals_per_sample=2, with_failure=False, n_draws=50)
    write_outputs(recs, {}, sample_provenance(recs), tmp_path, formats=("png",), figure_width="single")
    crystal = sorted((tmp_path / "figures").glob("crystal-*.png"))
    assert crystal
    for p in crystal:
        with Image.open(p) as img:
            assert abs(img.size[0] - 300 * 3.54) <= 1  # one column, 90 mm at 300 dpi
