"""The report: results.json keys, HTML safety and content, tables, figures."""

import base64
import csv
import json
import re
from html import escape as html_escape

import numpy as np
import pytest

from zoneprofile import InputError
from zoneprofile.chronology import population_summary
from zoneprofile.report import CAUTION, render_crystal_figure, write_outputs
from zoneprofile.report._sample import sample_provenance, sample_records

HOSTILE_SAMPLE = "<script>alert(1)</script>"


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    recs = sample_records(seed=11, samples=(HOSTILE_SAMPLE, "=HYPERLINK(\"x\")"), crystals_per_sample=2,
                          n_draws=300)
    recs[1]["crystal"] = "-cmd"
    recs[2]["crystal"] = "@SUM(1)"
    recs[3]["warnings"] = ["+danger & <b>bold</b>"]
    pop = population_summary(recs, n_bootstrap=40)
    assert pop["elements"]["Mg"]["event_intervals"]
    result = write_outputs(recs, pop, sample_provenance(recs), out, formats=("png", "svg"))
    return out, recs, pop, result


def test_files_written(built):
    out, recs, _, result = built
    for name in ("report.html", "results.json", "tables/zones.csv", "tables/fits.csv", "tables/intervals.csv",
                 "tables/crystals.csv", "tables/events.csv"):
        assert (out / name).is_file() and name in result["files"]
    n_ok = sum(1 for r in recs if not r["error"])
    for ext in ("png", "svg"):
        # one figure per analysed crystal + chronology + events for the one element
        # + the population's ladders and one page of dated profiles
        assert len(list((out / "figures").glob(f"*.{ext}"))) == n_ok + 2 + 2
    assert all((out / f).exists() for f in result["files"])
    assert not list((out / "figures").glob("*.pdf"))  # PDF only on request


def test_results_json_has_design_keys_and_no_draws(built):
    out, recs, _, _ = built
    text = (out / "results.json").read_text()
    assert "time_draws_days" not in text and '"curve"' not in text
    doc = json.loads(text)
    assert set(doc) >= {"crystals", "population", "provenance"}
    assert len(doc["crystals"]) == len(recs)
    dated = 0
    n_intervals = 0
    for c in doc["crystals"]:
        assert {"sample", "crystal", "boundaries", "recharge_intervals_days", "error"} <= set(c)
        for b in c["boundaries"]:
            assert {"position_um", "kind", "element", "law", "time_days", "resolved", "warnings"} <= set(b)
            assert set(b["time_days"]) >= {"best", "median", "p2_5", "p16", "p84", "p97_5"}
            dated += 1
        for iv in c["recharge_intervals_days"]:
            assert {"outer_um", "inner_um", "median", "p2_5", "p97_5"} <= set(iv)
            n_intervals += 1
    assert dated >= 4 and n_intervals >= 2
    failed = [c for c in doc["crystals"] if c["error"]]
    assert len(failed) == 1 and "fit failed" in failed[0]["error"]
    prov = doc["provenance"]
    assert prov["software"]["version"]
    assert all(len(i["sha256"]) == 64 for i in prov["inputs"])
    assert prov["laws"][0]["citation"] and prov["laws"][0]["status"] == "from memory"
    assert prov["caution"] == CAUTION
    # map arrays are not copied into results.json
    mapped = [c for c in doc["crystals"] if c.get("map")]
    assert mapped and mapped[0]["map"]["image"] == "omitted (array)"


def test_html_escapes_user_text_and_needs_no_network(built):
    out, _, _, _ = built
    page = (out / "report.html").read_text()
    assert "<script" not in page.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "&lt;b&gt;bold&lt;/b&gt;" in page and "<b>bold</b>" not in page
    # no external resource of any kind: no http(s) reference, no external stylesheet/font/script
    assert not re.search(r"https?://", page)
    assert not re.search(r"<link\b|@import|<iframe|<object|<embed", page, re.I)
    srcs = re.findall(r'src="([^"]*)"', page)
    assert len(srcs) >= 4 and all(s.startswith("data:image/png;base64,") for s in srcs)
    for s in srcs:
        assert base64.b64decode(s.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)


def test_html_content(built):
    out, recs, pop, _ = built
    page = (out / "report.html").read_text()
    assert "inform, and do not replace" in page and "observatory" in page and "local authorities" in page
    for section in ("Summary", "Recharge chronology", "Crystals", "Failed crystals", "Warnings",
                    "Laws and parameters", "Provenance", "How to cite"):
        assert f"<h2>{section}</h2>" in page
    assert "fit failed: no boundary wider than the beam" in page
    assert "from memory" in page
    assert "Time between events, from crystals recording both" in page
    for e in pop["elements"]["Mg"]["events"]:
        assert e["id"] in page
    # every input's checksum is shown
    for r in recs:
        for i in r["inputs"]:
            assert i["sha256"] in page


def _rows(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _decimals(text: str) -> int:
    return len(text.split(".")[1]) if "." in text else 0


def test_tables_neutralise_formula_cells(built):
    out, recs, _, _ = built
    crystals = _rows(out / "tables/crystals.csv")
    samples = {r["sample"] for r in crystals}
    assert "'=HYPERLINK(\"x\")" in samples  # common practice (OWASP CSV injection): quote prefix
    names = {r["crystal"] for r in crystals}
    assert "'-cmd" in names and "'@SUM(1)" in names
    assert not any(v.startswith(("=", "+", "@")) for r in crystals for v in r.values())
    zones = _rows(out / "tables/zones.csv")
    # numbers that start with '-' stay numbers
    changes = [float(r["change"]) for r in zones if r["feature"] == "step"]
    assert changes and all(np.isfinite(changes))
    fits = _rows(out / "tables/fits.csv")
    assert len(fits) == sum(len(r["boundaries"]) for r in recs)
    first = recs[0]["boundaries"][0]
    # rounded to two significant digits of the 68 % half-width (docs/report.md, "Rounding")
    td = first["time_days"]
    half_unit = 0.5 * 10.0 ** -_decimals(fits[0]["time_median_days"])
    assert abs(float(fits[0]["time_median_days"]) - td["median"]) <= half_unit + 1e-12
    assert half_unit <= (td["p84"] - td["p16"]) / 2 / 10  # the last kept digit is below a tenth of the sd
    intervals = _rows(out / "tables/intervals.csv")
    assert len(intervals) == sum(len(r["recharge_intervals_days"]) for r in recs)
    events = _rows(out / "tables/events.csv")
    assert [e["event"] for e in events] == ["E1", "E2", "Mg-E1", "Mg-E2"]  # population, then per element; oldest first
    assert [e["scope"] for e in events] == ["population"] * 2 + ["element"] * 2


def test_svg_keeps_text_with_units(built):
    out, _, _, _ = built
    svg = next((out / "figures").glob("chronology-*.svg")).read_text()
    assert "time since boundary formed (days, log scale)" in svg
    assert "density (per log10 day)" in svg
    crystal_svg = sorted((out / "figures").glob("crystal-*.svg"))[1].read_text()
    assert "distance from rim (µm)" in crystal_svg and "Mg (ppm)" in crystal_svg


def test_map_from_png_file(tmp_path):
    from matplotlib.image import imsave

    rec = sample_records(seed=1, samples=("S",), crystals_per_sample=1, with_failure=False)[0]
    img = np.asarray(rec["map"].pop("image"))
    (tmp_path / "maps").mkdir()
    imsave(tmp_path / "maps" / "m.png", np.nan_to_num(img), cmap="gray")
    rec["map"]["image_png"] = "maps/m.png"
    (svg,) = render_crystal_figure(rec, tmp_path / "f.png", formats=("svg",), map_dir=tmp_path)
    assert "<image" in svg.read_text()  # the map raster is drawn
    rec["map"]["image_png"] = "maps/missing.png"
    (svg2,) = render_crystal_figure(rec, tmp_path / "g.svg", formats=("svg",), map_dir=tmp_path)
    text = svg2.read_text()
    assert "<image" not in text and "map image not found" in text


def test_finished_map_picture_is_not_read_as_a_map(tmp_path):
    """A map picture with its own axes (figures/maps/) is named, never redrawn as raw pixels."""
    from PIL import Image

    rec = sample_records(seed=1, samples=("S",), crystals_per_sample=1, with_failure=False)[0]
    rec["map"].pop("image")
    (tmp_path / "figures" / "maps").mkdir(parents=True)
    Image.new("RGB", (40, 30), (200, 10, 10)).save(tmp_path / "figures" / "maps" / "p.png")
    rec["map"]["picture_png"] = "figures/maps/p.png"
    (svg,) = render_crystal_figure(rec, tmp_path / "f.svg", formats=("svg",), map_dir=tmp_path)
    text = svg.read_text()
    assert "<image" not in text and "map picture: figures/maps/p.png" in text


def test_bad_arguments(tmp_path):
    recs = sample_records(seed=2, crystals_per_sample=1, with_failure=False, with_map=False)
    pop = population_summary(recs, n_bootstrap=0)
    with pytest.raises(InputError, match="does not exist"):
        write_outputs(recs, pop, {}, tmp_path / "nope")
    with pytest.raises(InputError, match="unknown figure format 'gif'"):
        write_outputs(recs, pop, {}, tmp_path, formats=("gif",))


def test_sparse_records_render(tmp_path):
    # a record with no zoning, no curves and no map still gives a page; no provenance given
    # a '$' in a name would start matplotlib mathtext: it must be drawn literally
    recs = [{"sample": "S $5 & $_{bad", "crystal": "c1", "mineral": "olivine", "error": None,
             "boundaries": [{"position_um": 5.0, "element": "FeMg", "law": "unknown-law",
                             "time_days": {"median": 3.0, "p2_5": 1.0, "p97_5": 9.0}, "resolved": True}]}]
    pop = population_summary(recs, n_bootstrap=10)
    res = write_outputs(recs, pop, None, tmp_path, formats=("pdf",))
    pdfs = sorted((tmp_path / "figures").glob("*.pdf"))
    # crystal, chronology, events + the population's ladders and dated profiles
    assert len(pdfs) == 5 and all(p.read_bytes()[:5] == b"%PDF-" for p in pdfs)  # PDF header (ISO 32000)
    page = res["report"].read_text()
    assert "citation not recorded" in page
    assert page.count("<img") == 5


def test_only_upper_bounds_and_nothing_dated(tmp_path):
    recs = sample_records(seed=3, samples=("S",), crystals_per_sample=1, with_failure=False, with_map=False,
                          n_draws=100)
    for b in recs[0]["boundaries"]:
        b["resolved"] = False
    pop = population_summary(recs, n_bootstrap=5)
    assert pop["boundaries"] == [] and len(pop["unresolved"]) == 2
    (tmp_path / "a").mkdir()
    res = write_outputs(recs, pop, {}, tmp_path / "a", formats=("png",))
    page = res["report"].read_text()
    # crystal, events + the ladders (two bounds drawn as arrows) and the dated profiles
    assert page.count("<img") == 5 and "upper bound" in page
    # a crystal without any boundary and a campaign where nothing is dated
    recs = [{"sample": "S", "crystal": "c1", "error": None, "boundaries": []}]
    (tmp_path / "b").mkdir()
    res = write_outputs(recs, population_summary(recs), {}, tmp_path / "b", formats=("png",))
    page = res["report"].read_text()
    assert "No dated boundary" in page and page.count("<img") == 1


def test_prerendered_crystal_figures_are_reused(tmp_path):
    from PIL import Image

    recs = sample_records(seed=4, samples=("S",), crystals_per_sample=1, with_failure=False, with_map=False,
                          n_draws=50)
    (tmp_path / "figures").mkdir()
    marker = tmp_path / "figures" / "drawn-by-worker.png"
    Image.new("RGB", (12, 7), (213, 94, 0)).save(marker)
    res = write_outputs(recs, population_summary(recs, n_bootstrap=0), {}, tmp_path, formats=("png",),
                        crystal_figures={0: "figures/drawn-by-worker.png"})
    page = res["report"].read_text()
    assert base64.b64encode(marker.read_bytes()).decode() in page
    assert "figures/drawn-by-worker.png" in res["files"]
    assert not list((tmp_path / "figures").glob("crystal-*"))


def test_law_citation_from_the_registry(tmp_path):
    # a law not listed in the provenance is looked up in the diffusion registry
    diffusion = pytest.importorskip("zoneprofile.diffusion")
    law_id = next(iter(diffusion.LAWS))
    law = diffusion.get_law(law_id)
    recs = [{"sample": "S", "crystal": "c1", "error": None,
             "boundaries": [{"position_um": 5.0, "element": "Mg", "law": law_id,
                             "time_days": {"median": 3.0, "p2_5": 1.0, "p97_5": 9.0}, "resolved": True}]}]
    res = write_outputs(recs, population_summary(recs, n_bootstrap=0), {}, tmp_path, formats=("png",))
    doc = json.loads(res["results"].read_text())
    (entry,) = doc["provenance"]["laws"]
    assert entry["id"] == law_id and entry["citation"] == law.citation
    assert entry["n_boundaries"] == 1
    page = res["report"].read_text()
    assert html_escape(law.citation) in page
    assert str(law.status).lower() in page


def test_range_text():
    from zoneprofile.report.provenance import range_text

    law = {"t_range_c": [800.0, 1200.0], "composition_range": {"x_an": [0.4, 0.9]}, "fo2_range_pa": None}
    assert range_text(law) == "T 800–1200 °C; x_an 0.4–0.9"
    assert range_text({"range": "725-1075 °C, dry"}) == "725-1075 °C, dry"
    assert range_text({}) == "not recorded"


def test_two_elements_get_their_own_chronology(tmp_path):
    import copy

    recs = sample_records(seed=6, samples=("S",), crystals_per_sample=1, with_failure=False, with_map=False,
                          n_draws=100)
    for r in recs:
        extra = copy.deepcopy(r["boundaries"])
        for b in extra:
            b["element"] = "Sr"
            b["time_draws_days"] = [3 * t for t in b["time_draws_days"]]
            b["time_days"] = {k: 3 * v for k, v in b["time_days"].items()}
        r["boundaries"] += extra
    pop = population_summary(recs, n_bootstrap=5)
    assert set(pop["elements"]) == {"Mg", "Sr"}
    write_outputs(recs, pop, {}, tmp_path, formats=("png",))
    names = sorted(p.name for p in (tmp_path / "figures").glob("*.png"))
    assert {"chronology-Mg.png", "chronology-Sr.png", "events-Mg.png", "events-Sr.png"} <= set(names)
    page = (tmp_path / "report.html").read_text()
    assert "Sr-E1" in page and "Mg-E1" in page


# --------------------------------------------------------------------------- crystal figure canvas
def _svg_texts(svg_bytes):
    import xml.etree.ElementTree as ET

    root = ET.fromstring(svg_bytes)  # well-formed XML (user text escaped)
    ns = "{http://www.w3.org/2000/svg}"
    return root, [t.text for t in root.iter(f"{ns}text")]


def test_nice_ticks_and_labels():
    from zoneprofile.report._canvas import nice_ticks, tick_labels

    assert nice_ticks(0.0, 100.0, 6).tolist() == [0, 20, 40, 60, 80, 100]
    assert nice_ticks(52.3, 77.8, 6).tolist() == [55, 60, 65, 70, 75]
    rng = np.random.default_rng(0)
    for _ in range(200):  # invariants: inside the range, at most max_n, a 1/2/2.5/5 x 10^k step
        lo = rng.uniform(-1e4, 1e4)
        hi = lo + 10 ** rng.uniform(-3, 5)
        n = int(rng.integers(3, 9))
        t = nice_ticks(lo, hi, n)
        assert 2 <= t.size <= n and t[0] >= lo - 1e-9 * abs(hi - lo) and t[-1] <= hi + 1e-9 * abs(hi - lo)
        step = t[1] - t[0]
        mantissa = step / 10 ** np.floor(np.log10(step))
        assert min(abs(mantissa - m) for m in (1, 2, 2.5, 5, 10)) < 1e-6
        labels = tick_labels(t)
        assert len(set(labels)) == len(labels)  # neighbours tell apart
    assert tick_labels([0.0, 0.25, 0.5]) == ["0.00", "0.25", "0.50"]
    assert tick_labels([-10.0, -0.0, 10.0]) == ["\u221210", "0", "10"]  # a true minus sign; no "-0"


def test_dashes_cover_the_pattern_fraction():
    from zoneprofile.report._canvas import _dash

    # a straight 100 px line, 3 on / 2 off: 20 dashes of 3 px = 60 px of ink (arithmetic)
    pieces = _dash(np.array([0.0, 100.0]), np.array([5.0, 5.0]), [3.0, 2.0])
    assert len(pieces) == 20
    assert sum(float(np.hypot(*np.diff(p, axis=0).T).sum()) for p in pieces) == pytest.approx(60.0)
    # a bent line keeps its vertices inside the dashes and its length of ink
    x = np.array([0.0, 30.0, 30.0])
    y = np.array([0.0, 0.0, 40.0])
    pieces = _dash(x, y, [4.0, 1.0])
    assert sum(float(np.hypot(*np.diff(p, axis=0).T).sum()) for p in pieces) == pytest.approx(56.0)


def test_canvas_png_matches_its_geometry():
    from PIL import Image

    from zoneprofile.report._canvas import Canvas, text_width

    c = Canvas(120, 80)
    c.rect(10, 20, 50, 60, fill="#0072B2")
    c.line([60, 110], [40, 40], "#D55E00", 3.0)
    c.text(60, 10, "Ab 12", 9, va="top")
    img = np.asarray(Image.open(__import__("io").BytesIO(c.png())).convert("RGB")).astype(int)
    assert img.shape == (80, 120, 3)
    assert (abs(img[40, 30] - [0, 114, 178]) <= 3).all()  # inside the rectangle
    assert (img[5, 5] == 255).all() and (img[70, 30] == 255).all()  # outside stays white
    assert (abs(img[40, 85] - [213, 94, 0]) <= 20).all()  # on the line
    assert (img[46, 85] == 255).all()  # 3 pt = 4.6 px wide: 6 px away is white
    ink = np.argwhere(img[:19].sum(axis=2) < 600)  # the text, dark pixels (above the rectangle)
    assert ink.size and ink[:, 1].min() >= 59 and ink[:, 1].max() <= 60 + text_width("Ab 12", 9) + 1
    assert ink[:, 0].min() >= 9


@pytest.fixture(scope="module")
def mapped_record():
    rec = sample_records(seed=7, samples=("S",), crystals_per_sample=1, with_failure=False, n_draws=50)[0]
    assert rec["map"] and len([b for b in rec["boundaries"] if b.get("curve")]) == 2
    return rec


def test_crystal_figure_shows_every_part_with_units(mapped_record):
    from PIL import Image

    from zoneprofile.report.figures import crystal_figure_bytes

    drawn = crystal_figure_bytes(mapped_record, ("png", "svg"))
    root, texts = _svg_texts(drawn["svg"])
    joined = "\n".join(texts)
    for label in ("distance from rim (µm)", "An (mol%)", "Mg (ppm)", "x (µm)", "y (µm)", "Profile and zoning (An)",
                  "95% model band", "initial profile (model)", "data", "best fit", "traverse (rim → core)", "Map"):
        assert label in texts, label
    assert joined.count("Mg (ppm)") >= 2 and joined.count(" at ") >= 2  # one panel per fit
    ns = "{http://www.w3.org/2000/svg}"
    assert len(list(root.iter(f"{ns}image"))) == 2  # the map and its colour bar
    bands = [p for p in root.iter(f"{ns}path") if p.get("fill-opacity") == "0.35"]
    assert len(bands) >= 2  # a 95% band per fit (plus its legend swatch is a rect)
    zones = [r for r in root.iter(f"{ns}rect") if r.get("fill") in ("#E8F1F8", "#FBF0DC", "#E3F4EE", "#F6E6EF")]
    assert len(zones) == len(mapped_record["zones"]["zones"]) + 1  # and the legend's swatch
    png = Image.open(__import__("io").BytesIO(drawn["png"]))
    # the PNG is the SVG's drawing at 300 dpi: its viewBox is in pixels at 110 per inch (report/style.py)
    vw, vh = (float(v) for v in root.get("viewBox").split()[2:])
    assert png.size == (round(vw * 300 / 110), round(vh * 300 / 110))
    rgb = np.asarray(png.convert("RGB")).reshape(-1, 3).astype(int)
    for colour in ((213, 94, 0), (0, 114, 178)):  # Okabe & Ito vermilion (fits) and blue (profile)
        assert (abs(rgb - colour).max(axis=1) <= 10).sum() > 50
    assert crystal_figure_bytes(mapped_record, ("png", "svg")) == drawn  # same inputs, same files


def test_crystal_figure_text_is_escaped_and_literal(tmp_path, mapped_record):
    from zoneprofile.report.figures import crystal_figure_bytes

    rec = dict(mapped_record, sample='<b x="1">S & $x$</b>', crystal="c]]>1")
    prof = dict(rec["profile"])
    prof["$An"] = prof.pop("An")
    rec["profile"] = prof
    rec["zones"] = dict(rec["zones"], column="$An")
    _, texts = _svg_texts(crystal_figure_bytes(rec, ("svg",))["svg"])
    assert '<b x="1">S & $x$</b> / c]]>1 (plagioclase)' in texts
    assert "$An" in texts and "Profile and zoning ($An)" in texts  # drawn as given, no escape characters
    (pdf,) = render_crystal_figure(rec, tmp_path / "f.png", formats=("pdf",))
    assert pdf.read_bytes()[:5] == b"%PDF-"  # PDF header (ISO 32000); '$' does not start mathtext


def test_worker_figures_with_a_strided_map(mapped_record):
    from zoneprofile.campaign._pictures import render_figures

    rec = dict(mapped_record, parameters={"pixel_um": 1.0})
    image = np.asarray(rec["map"]["image"], dtype=float)
    m = {k: v for k, v in rec["map"].items() if k != "image"}
    rec["map"] = dict(m, image_png_base64="not drawn")
    out = render_figures(rec, ("png", "svg"), map_image=(image[::2, ::2], 2))
    assert set(out) == {"png", "svg"}
    assert base64.b64decode(out["png"])[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)
    root, texts = _svg_texts(base64.b64decode(out["svg"]))
    assert "x (µm)" in texts and "traverse (rim → core)" in texts
    assert "not drawn" not in base64.b64decode(out["svg"]).decode()
    assert rec["map"]["image_png_base64"] == "not drawn"  # the record itself is not changed


def test_map_picture():
    from PIL import Image

    from zoneprofile.campaign._pictures import render_map

    yy, xx = np.mgrid[0:60, 0:90]
    image = 40.0 + 0.3 * xx
    image[:5] = np.nan  # outside the crystal
    png = render_map(image, [10.0, 30.0, 80.0, 30.0], 2.0, "An (calibrated)")
    img = np.asarray(Image.open(__import__("io").BytesIO(png)).convert("RGB")).reshape(-1, 3).astype(int)
    # both ends of cividis appear (Nuñez et al. 2018; matplotlib's table as the reference)
    import matplotlib

    for end in (0.0, 1.0):
        colour = np.round(np.asarray(matplotlib.colormaps["cividis"](end)[:3]) * 255)
        assert (abs(img - colour).max(axis=1) <= 12).sum() > 20


# --------------------------------------------------------------------------- population figures (canvas)
def test_log_ticks_sit_at_log10_of_their_values():
    import math

    from zoneprofile.report._canvas import Axes, Canvas, log_tick_labels, log_ticks

    major, minor = log_ticks(1.0, 1000.0, 7)
    assert major.tolist() == [1, 10, 100, 1000]
    assert sorted(minor.tolist()) == sorted(m * 10.0**e for e in range(3) for m in range(2, 10))
    assert log_tick_labels(major) == ["1", "10", "100", "1000"]
    # a short range gets 1-2-5 labels, a shorter one every multiple, within a factor of 3 round linear values
    assert log_ticks(8.0, 600.0, 7)[0].tolist() == [10, 20, 50, 100, 200, 500]
    assert log_ticks(15.0, 45.0, 7)[0].tolist() == [20, 30, 40]
    assert log_ticks(12.0, 18.0, 7)[0].tolist() == [12, 13, 14, 15, 16, 17, 18]
    assert log_ticks(1.1, 999.0, 7)[0].tolist() == [3, 10, 30, 100, 300]  # 1-2-5 would be 8 labels
    assert log_ticks(2.1, 4.2, 7)[0].tolist() == [2.5, 3, 3.5, 4]  # not just "3" and "4"
    wide, skipped = log_ticks(1e-2, 1e8, 6)  # 11 decades, at most 6 labels: every 2nd decade
    assert wide.tolist() == [1e-2, 1, 1e2, 1e4, 1e6, 1e8] and skipped.size == 5
    assert log_tick_labels([1e5, 2e6, 1e-4, 0.001, 0.5]) == ["10\u2075", "2\u00d710\u2076", "10\u207b\u2074", "0.001",
                                                           "0.5"]
    # pixel positions: left + width * (log10 v - log10 lo) / (log10 hi - log10 lo) (the definition of a log axis)
    ax = Axes(Canvas(500, 100), (100, 0, 400, 100), (3.0, 4000.0), (0, 1), xlog=True)
    for v in (3.0, 7.0, 10.0, 250.0, 4000.0):
        expected = 100 + 300 * (math.log10(v) - math.log10(3.0)) / (math.log10(4000.0) - math.log10(3.0))
        assert float(ax.x(v)) == pytest.approx(expected, abs=1e-9)
    assert np.isnan(ax.x([0.0, -1.0])).all()  # no logarithm: the line breaks there
    rng = np.random.default_rng(3)
    for _ in range(300):  # invariants: inside the range, increasing, 2..max_n labels, distinct label texts
        lo = 10 ** rng.uniform(-4, 6)
        hi = lo * 10 ** rng.uniform(0.2, 9)
        n = int(rng.integers(4, 9))
        major, minor = log_ticks(lo, hi, n)
        assert 2 <= major.size <= n and np.all(np.diff(major) > 0)
        assert major[0] >= lo * (1 - 1e-9) and major[-1] <= hi * (1 + 1e-9)
        assert not set(major.tolist()) & set(minor.tolist())
        labels = log_tick_labels(major)
        assert len(set(labels)) == len(labels)


HOSTILE_POP = 'N<1> & "vent"'


@pytest.fixture(scope="module")
def pop_figures(tmp_path_factory):
    from zoneprofile.report import render_population_figures

    out = tmp_path_factory.mktemp("population")
    recs = sample_records(seed=21, samples=(HOSTILE_POP, "South"), crystals_per_sample=3, n_draws=200)
    recs[3]["crystal"], recs[4]["crystal"] = "c2", "c10"  # natural order: c2 before c10
    pop = population_summary(recs, n_bootstrap=20)
    paths = render_population_figures(pop, out, formats=("png", "svg"))
    return out, recs, pop, paths


def test_population_figures_written(pop_figures):
    out, _, _, paths = pop_figures
    assert set(paths) == {"Mg"}
    assert [p.name for p in paths["Mg"]["chronology"]] == ["chronology-Mg.png", "chronology-Mg.svg"]
    assert [p.name for p in paths["Mg"]["events"]] == ["events-Mg.png", "events-Mg.svg"]
    for p in out.iterdir():
        head = p.read_bytes()[:8]
        assert head == b"\x89PNG\r\n\x1a\n" if p.suffix == ".png" else head.startswith(b"<?xml")  # PNG spec


def test_chronology_figure_shows_every_part_with_units(pop_figures):
    out, _, pop, _ = pop_figures
    root, texts = _svg_texts((out / "chronology-Mg.svg").read_bytes())
    block = pop["elements"]["Mg"]
    ecdf, kde = block["campaign"]["ecdf"], block["campaign"]["kde"]
    expected = ["Recharge chronology: Mg", "Empirical CDF of boundary times", "Kernel density of log10 time",
                "fraction of dated boundaries", "density (per log10 day)", "spread from time draws (95%)",
                "DKW band limits (95%)", f"all samples (n = {ecdf['n']})", "upper bound (not in ECDF)",
                "bootstrap over crystals (95%)", f"kernel density (h = {kde['bandwidth_log10']:.2f} log10 d)",
                "boundary medians"]
    expected += [f"{name} (n = {s['ecdf']['n']})" for name, s in block["samples"].items()]
    expected += [e["id"] for e in block["events"]]
    for label in expected:
        assert label in texts, label
    assert texts.count("time since boundary formed (days, log scale)") == 2  # both panels, with units
    assert "10" in texts and "100" in texts  # decade ticks
    ns = "{http://www.w3.org/2000/svg}"
    fills = {p.get("fill") for p in root.iter(f"{ns}path")} | {r.get("fill") for r in root.iter(f"{ns}rect")}
    assert {"#E69F00", "#009E73"} <= fills  # draw envelope, KDE band (Okabe & Ito 2008)
    strokes = {p.get("stroke") for p in root.iter(f"{ns}path")}
    assert "#56B4E9" in strokes  # the DKW band's limits, drawn as lines
    assert {"#D4E9F7", "#F9DCCB"} <= fills  # event spans


def _x_of_tick(root, label):
    ns = "{http://www.w3.org/2000/svg}"
    for t in root.iter(f"{ns}text"):
        if t.text == label and t.get("text-anchor") == "middle":
            return float(t.get("x"))
    raise AssertionError(label)


def test_events_figure_rows_bars_and_spans(pop_figures):
    import io
    import math

    from PIL import Image

    out, recs, pop, _ = pop_figures
    root, texts = _svg_texts((out / "events-Mg.svg").read_bytes())
    for label in ("Dated boundaries and recharge events: Mg", "sample / crystal", "event (band: 95% range)", "upper bound",
                  "time since boundary formed (days, log scale; bars: 95%)"):
        assert label in texts, label
    ns = "{http://www.w3.org/2000/svg}"
    rows = [t for t in root.iter(f"{ns}text") if " / " in (t.text or "") and t.get("text-anchor") == "end"]
    names = [t.text for t in rows]
    assert len(names) == len({(r["sample"], r["crystal"]) for r in recs if not r["error"]})
    assert f"{HOSTILE_POP} / c01" in names
    y_of = {t.text: float(t.get("y")) for t in rows}
    assert y_of["South / c2"] < y_of["South / c10"]  # natural order
    # one bar and two caps per dated boundary, in the colour of its event (and the legend's two caps)
    events = pop["elements"]["Mg"]["events"]
    colours = {"Mg-E1": "#0072B2", "Mg-E2": "#D55E00"}  # events oldest first
    for e in events:
        counts = sorted(p.get("d").count("M") for p in root.iter(f"{ns}path")
                        if p.get("stroke") == colours[e["id"]] and "L" in p.get("d"))
        n = sum(1 for b in pop["boundaries"] if b["event"] == e["id"])
        assert counts == sorted([2, n, 2 * n]), e["id"]
    # the first event's span sits at log10 of its 95% limits, on the scale given by the decade ticks
    x10, x100 = _x_of_tick(root, "10"), _x_of_tick(root, "100")
    span = next(r for r in root.iter(f"{ns}rect") if r.get("fill") == "#D4E9F7")
    e = events[0]
    left = x10 + (math.log10(e["p2_5_days"]) - 1.0) * (x100 - x10)
    right = x10 + (math.log10(e["p97_5_days"]) - 1.0) * (x100 - x10)
    sx, sw, sy = float(span.get("x")), float(span.get("width")), float(span.get("y"))
    assert sx == pytest.approx(left, abs=0.6) and sx + sw == pytest.approx(right, abs=0.6)
    # ... and the PNG shows it there: light blue inside, not outside
    img = np.asarray(Image.open(io.BytesIO((out / "events-Mg.png").read_bytes())).convert("RGB")).astype(int)
    k = 300 / 110  # the PNG is the drawing at 300 dpi; the SVG's units are pixels at 110 per inch
    row = round((sy + 4) * k)
    inside = img[row, round((left + right) / 2 * k)]
    assert (abs(inside - [0xD4, 0xE9, 0xF7]) <= 3).all()
    for x in (round(left * k) - 8, round(right * k) + 8):
        assert (abs(img[row, x] - [0xD4, 0xE9, 0xF7]) > 10).any()


def test_population_figures_escape_user_text(pop_figures):
    out, _, _, _ = pop_figures
    for name in ("chronology-Mg.svg", "events-Mg.svg"):
        raw = (out / name).read_text()
        assert "N<1>" not in raw and "N&lt;1&gt; &amp; " in raw  # XML-escaped in the file
        _, texts = _svg_texts(raw.encode())  # parses, and reads back literally
        assert any(t and t.startswith(HOSTILE_POP) for t in texts)


def test_population_figures_do_not_import_matplotlib(tmp_path):
    import subprocess
    import sys

    code = f"""
import sys
import zoneprofile.report
from zoneprofile.chronology import population_summary
from zoneprofile.report import render_population_figures
from zoneprofile.report._sample import sample_records
recs = sample_records(seed=5, crystals_per_sample=2, n_draws=100, with_map=False)
render_population_figures(population_summary(recs, n_bootstrap=5), {str(tmp_path)!r}, formats=("png", "svg"))
print("matplotlib" in sys.modules)
paths = render_population_figures(population_summary(recs, n_bootstrap=5), {str(tmp_path)!r}, formats=("pdf",))
print("matplotlib" in sys.modules, paths["Mg"]["events"][0].read_bytes()[:5])
"""
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert res.stdout.split("\n")[:2] == ["False", "True b'%PDF-'"]  # only a PDF brings matplotlib in
