"""One figure system: every figure drawn by report/figures.py in one style, sized for print.

Checks: the panels a command draws are the report's panels (same elements);
error bars where an sd is known; QC-flagged points hollow, grey and outside
the axis range; a legend entry for every shading; close boundary marks set
apart; print widths and resolution; text kept as text in SVG and PDF.
"""

import io
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from zoneprofile._limits import FIGURE_PNG_DPI, FIGURE_WIDTH_IN
from zoneprofile.report import _canvas
from zoneprofile.report.figures import (
    boundary_entry,
    canvas_bytes,
    chronology_canvas,
    fit_canvas,
    profile_block,
    zoning_canvas,
)
from zoneprofile.report.style import COLOURS, SERIES

NS = "{http://www.w3.org/2000/svg}"


def _texts(canvas):
    return [t[2] for t in canvas.flat()[1]]


def _profile_record(y, qc, sd=None, zones=None):
    x = np.arange(len(y), dtype=float) * 2.0
    prof = {"distance_um": x.tolist(), "An": list(map(float, y)), "qc": list(qc)}
    if sd is not None:
        prof["An_sd"] = list(map(float, sd))
    return {"profile": prof, "zones": dict(zones or {}, column="An"), "boundaries": []}


def _y_ticks(canvas):
    """Values of the y tick labels of the profile panel (right-aligned numbers left of the box)."""
    out = []
    for x, y, s, size, colour, ha, dv, rot in canvas.flat()[1]:
        if ha == "right" and not rot and re.fullmatch(r"[\u2212\d.]+", s):
            out.append(float(s.replace("\u2212", "-")))
    return out


def test_flagged_point_is_hollow_grey_and_never_sets_the_axis_range():
    # An 55-80 with one flagged analysis at An 15 (a bad total): the axis stays on the good points
    rng = np.random.default_rng(3)
    y = 60 + 20 * (np.arange(40) > 20) + rng.normal(0, 0.5, 40)
    y[7] = 15.0
    qc = ["ok"] * 40
    qc[7] = "low total"
    qc[30] = "bad"  # a second flagged point, inside the range
    canvas = profile_block(_profile_record(y, qc), 700)
    ticks = _y_ticks(canvas)
    assert ticks and min(ticks) >= 55 and max(ticks) <= 85  # the old autoscale gave ticks from 10/20 up
    grey = SERIES["flagged"][0]
    hollow = [op for op in canvas.shapes if op[0] == "markers" and op[5] == "#FFFFFF" and op[6] == grey]
    assert any(op[3] == "o" for op in hollow)  # the flagged point in range: a hollow grey circle
    assert any(op[3] == "v" for op in hollow)  # the one off scale: a hollow triangle on the lower edge
    texts = _texts(canvas)
    assert "flagged by QC (left out)" in texts and "flagged, off scale" in texts
    # the good points are drawn filled in the profile colour, the flagged ones not
    filled = [op for op in canvas.shapes if op[0] == "markers" and op[5] == SERIES["profile"][0]]
    assert sum(op[1].size for op in filled) == 38 + 1  # the points and the legend's marker


def test_error_bars_are_one_sd_about_each_point():
    y = np.array([60.0, 61.0, 65.0, 70.0, 71.0, 70.5])
    sd = np.array([0.5, 1.0, 0.5, 2.0, 0.5, 1.0])
    canvas = profile_block(_profile_record(y, ["ok"] * 6, sd), 600)
    colour = SERIES["profile"][0]
    bars = next(op[1] for op in canvas.shapes if op[0] == "segments" and op[2] == colour and len(op[1]) == 6)
    marks = next(op for op in canvas.shapes if op[0] == "markers" and op[5] == colour and op[1].size == 6)
    np.testing.assert_allclose(bars[:, 0], bars[:, 2])  # vertical
    np.testing.assert_allclose((bars[:, 1] + bars[:, 3]) / 2, marks[2], atol=1e-9)  # centred on the point
    scale = (bars[:, 1] - bars[:, 3]) / (2 * sd)  # pixels per mol%: one number for all bars
    np.testing.assert_allclose(scale, scale[0], rtol=1e-9)
    assert "An (±1 sd)" in _texts(canvas)
    # no sd: no bars, the plain label
    plain = profile_block(_profile_record(y, ["ok"] * 6), 600)
    assert not [op for op in plain.shapes if op[0] == "segments" and op[2] == colour]
    assert "An" in _texts(plain) and "An (±1 sd)" not in _texts(plain)


def _fit_dict(resolved=True):
    x = np.linspace(0.0, 80.0, 41)
    model = 100 + 20 / (1 + np.exp(-(x - 40) / 4))
    grid = np.linspace(0.0, 80.0, 120)
    curve = 100 + 20 / (1 + np.exp(-(grid - 40) / 4))
    td = ({"median": 20.0, "p2_5": 9.1, "p97_5": 41.0, "statement": "date", "upper_bound": None}
          if resolved else {"median": 1.1, "p2_5": 0.2, "p97_5": 2.4, "statement": "upper_bound", "upper_bound": 2.4})
    return {"position_um": 40.0, "element": "Mg", "mineral": "plagioclase", "time_days": td, "resolved": resolved,
            "curve": {"distance_um": grid.tolist(), "model": curve.tolist(), "initial": np.where(grid < 40, 100, 120).tolist(),
                      "band_low": (curve - 1).tolist(), "band_high": (curve + 1).tolist()},
            "points": {"distance_um": x.tolist(), "value": (model + 0.5).tolist()}}, x


def test_fit_panel_bars_from_the_value_sd_and_every_shading_in_the_legend():
    d, x = _fit_dict()
    sd = np.full(x.size, 1.5)
    canvas = fit_canvas([boundary_entry(d, value_sd=sd, distance_um=x)])
    black = SERIES["data"][0]
    bars = [op[1] for op in canvas.flat()[0] if op[0] == "segments" and op[2] == black and len(op[1]) == x.size]
    assert len(bars) == 1
    texts = _texts(canvas)
    for label in ("data (±1 sd)", "95% model band", "initial profile (model)", "best fit", "boundary"):
        assert label in texts, label
    assert "Mg at 40 µm: 20 d" in texts and "95%: 9.1 – 41 d" in texts  # one unit, chosen by magnitude


def test_a_bound_reads_as_a_bound_in_the_fit_panel():
    d, _ = _fit_dict(resolved=False)
    texts = _texts(fit_canvas([boundary_entry(d)]))
    assert "Mg at 40 µm: < 2.4 d" in texts
    assert not any("≤" in t or "median" in t for t in texts)


def test_every_shading_has_a_legend_entry():
    zones = {"zones": [{"start_um": 0.0, "end_um": 30.0}, {"start_um": 30.0, "end_um": 60.0}],
             "oscillatory_bands": [{"start_um": 35.0, "end_um": 55.0}]}
    canvas = profile_block(_profile_record(np.linspace(60, 70, 31), ["ok"] * 31, zones=zones), 700)
    texts = _texts(canvas)
    assert "zone (alternate shading)" in texts and "oscillatory band" in texts
    hatched = [op for op in canvas.shapes if op[0] == "rect" and op[8]]
    assert len(hatched) == 2  # the band and its legend swatch
    # the event ranges shaded in the kernel-density panel each have their entry
    block = {"element": "Mg", "campaign": {}, "events": [
        {"id": "Mg-E1", "p2_5_days": 10.0, "p97_5_days": 30.0, "median_days": 17.0},
        {"id": "Mg-E2", "p2_5_days": 100.0, "p97_5_days": 300.0, "median_days": 170.0}]}
    texts = _texts(chronology_canvas("Mg", block, {"boundaries": [], "unresolved": []}))
    assert "Mg-E1: 95% range" in texts and "Mg-E2: 95% range" in texts


def test_a_reverse_step_on_a_resorption_surface_shows_both_lines():
    zones = {"steps": [{"position_um": 30.0, "kind": "reverse"}], "resorption_surfaces": [{"position_um": 30.1}]}
    canvas = profile_block(_profile_record(np.linspace(60, 70, 31), ["ok"] * 31, zones=zones), 700)
    tall = {op[3]: float(op[1][0]) for op in canvas.shapes
            if op[0] == "line" and op[1].size == 2 and op[1][0] == op[1][1] and abs(op[2][1] - op[2][0]) > 100
            and op[3] in (SERIES["step_reverse"][0], SERIES["resorption"][0])}
    assert len(tall) == 2
    gap = abs(tall[SERIES["step_reverse"][0]] - tall[SERIES["resorption"][0]])
    assert gap >= 1.4 * _canvas.PT  # side by side (at least the thicker line's width), not one over the other


@pytest.mark.parametrize("width", ["single", "double"])
def test_png_at_300_dpi_at_the_print_width(width):
    from PIL import Image

    canvas = zoning_canvas(_profile_record(np.linspace(60, 70, 31), ["ok"] * 31), width=width)
    img = Image.open(io.BytesIO(canvas_bytes(canvas, "png")))
    # journals: one column ~90 mm (3.54 in), two ~180 mm (7.09 in), 300 dpi (common practice)
    assert abs(img.size[0] - FIGURE_PNG_DPI * FIGURE_WIDTH_IN[width]) <= 1
    assert FIGURE_PNG_DPI == 300 and img.info["dpi"][0] == pytest.approx(300, abs=0.01)
    root = ET.fromstring(canvas_bytes(canvas, "svg"))
    assert float(root.get("width")[:-2]) == pytest.approx(72 * FIGURE_WIDTH_IN[width], abs=0.5)  # points
    assert root.get("width").endswith("pt")


def test_svg_and_pdf_keep_text_as_text():
    canvas = zoning_canvas(_profile_record(np.linspace(60, 70, 31), ["ok"] * 31), width="single")
    root = ET.fromstring(canvas_bytes(canvas, "svg"))
    texts = [t.text for t in root.iter(f"{NS}text")]
    assert "distance from rim (µm)" in texts and "An (mol%)" in texts
    pdf = canvas_bytes(canvas, "pdf")
    assert pdf[:5] == b"%PDF-"
    # TrueType (Type 42) fonts embedded: text stays text, selectable (ISO 32000: /FontFile2 holds TrueType)
    assert b"/FontFile2" in pdf and (b"/TrueType" in pdf or b"/CIDFontType2" in pdf)
    assert b"/Type3" not in pdf  # not glyph procedures (matplotlib's default fonttype 3)


def test_figure_width_is_refused_when_unknown():
    from zoneprofile._validation import InputError

    with pytest.raises(InputError, match="single, double"):
        zoning_canvas(_profile_record(np.linspace(60, 70, 31), ["ok"] * 31), width="wide")


def test_a_crystal_dated_by_the_whole_crystal_model_shows_its_joint_fit():
    import xml.etree.ElementTree as ET

    from zoneprofile.report.figures import crystal_figure_bytes

    x = np.linspace(0.0, 100.0, 51)
    grown = np.where(x < 40, 600.0, 400.0)
    model = 500 + 100 * np.tanh((40 - x) / 5)
    rec = {"sample": "S", "crystal": "c1", "mineral": "plagioclase", "error": None,
           "profile": {"distance_um": x.tolist(), "An": np.where(x < 40, 70.0, 55.0).tolist(), "qc": ["ok"] * 51},
           "trace_profile": {"distance_um": x.tolist(), "Mg_ppm": (model + 3).tolist()},
           "zones": {"column": "An"}, "boundaries": [],
           "crystal_model": {"elements": ["Mg"], "boundaries": [
               {"id": "B1", "position_um": 40.0, "age_days": {"median": 20.0, "statement": "date"}}],
               "curves": {"Mg": {"distance_um": x.tolist(), "model": model.tolist(), "grown": grown.tolist()}}}}
    root = ET.fromstring(crystal_figure_bytes(rec, ("svg",))["svg"])
    block = [g for g in root.iter(f"{NS}g") if g.get("class") == "model"]
    assert len(block) == 1
    texts = [t.text for t in block[0].iter(f"{NS}text")]
    for label in ("Mg: whole-crystal model", "B1 20 d", "B1", "Mg (ppm)", "initial profile (model)", "best fit"):
        assert label in texts, label
    # the data (51 points) and the dated boundary's triangle on the profile
    dots = [p for p in block[0].iter(f"{NS}path") if p.get("fill") == "#000000" and p.get("d", "").count("M") == 51]
    assert len(dots) == 1
