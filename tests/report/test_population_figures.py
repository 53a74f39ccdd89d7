"""The population's paper figures: event ladders on one log-time axis, and the dated profiles.

Checks on the drawn primitives of the report's canvas against the crystal
records' own numbers (invented records, self-consistency): one ladder row per
crystal with a dated boundary or a bound; each 95 % interval at the position
a log10 mapping of its ends gives (the mapping written out here, not the
canvas's); bounds as arrows, never as intervals; the population's events as
shaded spans with legend entries; one small panel per ladder crystal, in pages.
Print sizes: 90 / 180 mm wide (journal single / double column), PNG at 300 dpi
(pHYs chunk, PNG specification 11.3.5.3), SVG with text as text.
"""

from __future__ import annotations

import io
import math
import re

import numpy as np
import pytest

from zoneprofile.event_model import population_events
from zoneprofile.report import population_figures as pf
from zoneprofile.report.style import EVENT_FILLS

Z975 = 1.959963984540054  # normal 97.5 % quantile (scipy.stats.norm.ppf)


def _td(med, s=0.08):
    return {"median": med, "p2_5": med * 10 ** (-Z975 * s), "p97_5": med * 10 ** (Z975 * 1.3 * s),
            "statement": "date", "upper_bound": None, "lower_bound": None}


def _profile(seed):
    x = np.arange(0.0, 200.0, 4.0)
    rng = np.random.default_rng(seed)
    return {"distance_um": x.tolist(), "An": (60 + 10 * (x > 100)).tolist(),
            "Mg_ppm": (300 + 200 * np.exp(-x / 40) + rng.normal(0, 5, x.size)).tolist(), "qc": ["ok"] * x.size}


def _single(sample, crystal, times, *, seed=0):
    """A crystal dated boundary by boundary (Mg): ``times`` oldest first, each a date or ('<', U) / ('>', L)."""
    bs = []
    for k, t in enumerate(times):
        pos = 150.0 - 60.0 * k
        if isinstance(t, tuple):
            kind, v = t
            td = {"median": None, "p2_5": None, "p97_5": None, "statement": "upper_bound" if kind == "<"
                  else "lower_bound", "upper_bound": v if kind == "<" else None,
                  "lower_bound": v if kind == ">" else None}
            b = {"element": "Mg", "position_um": pos, "resolved": kind != "<", "time_days": td}
        else:
            x = np.linspace(pos - 30, pos + 30, 31)
            b = {"element": "Mg", "position_um": pos, "resolved": True, "time_days": _td(t),
                 "curve": {"distance_um": x.tolist(), "model": (350 + 50 * np.tanh((pos - x) / 8)).tolist(),
                           "data": (350 + 50 * np.tanh((pos - x) / 8)).tolist()}}
        bs.append(b)
    return {"sample": sample, "crystal": crystal, "mineral": "plagioclase", "error": None, "boundaries": bs,
            "recharge_intervals_days": [], "profile": _profile(seed), "warnings": []}


def _modelled(sample, crystal, ages):
    """A crystal dated by the whole-crystal model (Mg + Sr); ``ages`` oldest first, a date or ('>', L)."""
    bs = []
    for k, a in enumerate(ages):
        td = ({"median": None, "p2_5": None, "p97_5": None, "statement": "lower_bound", "upper_bound": None,
               "lower_bound": a[1]} if isinstance(a, tuple) else _td(a))
        bs.append({"id": f"B{k + 1}", "position_um": 150.0 - 60 * k, "age_days": td, "by_element": {},
                   "concordance": {"status": "one element", "reasons": []}})
    gaps = [{"older": f"B{k + 1}", "younger": f"B{k + 2}", "days": _td(10.0)} for k in range(len(ages) - 1)]
    return {"sample": sample, "crystal": crystal, "mineral": "plagioclase", "error": None, "boundaries": [],
            "recharge_intervals_days": [], "profile": _profile(7), "warnings": [],
            "crystal_model": {"boundaries": bs, "gaps": gaps, "elements": ["Mg", "Sr"], "temperature_c": 1000.0,
                              "n_draws": 200, "warnings": [], "method": "whole-crystal"}}


@pytest.fixture(scope="module")
def population():
    """Two samples, two events (~300 d, ~20 d), an upper bound, a lower bound, a model-dated crystal, a
    crystal with no dated boundary and a failed crystal."""
    recs = [
        _single("North vent", "c1", [310.0, 21.0], seed=1),
        _single("North vent", "c2", [280.0, ("<", 35.0)], seed=2),
        _single("North vent", "c10", [330.0, 18.0], seed=3),
        _modelled("South flank", "k1", [(">", 150.0), 19.0]),
        _single("South flank", "k2", [295.0, 23.0], seed=4),
        _single("South flank", "k3", [], seed=5),  # zoned, nothing dated
        {"sample": "South flank", "crystal": "k4", "error": "fit failed: test", "boundaries": []},
    ]
    return recs, {"events": population_events(recs)}


def _x(ax, v):
    """Pixel x of time ``v`` on a log axis: written out independently of the canvas's mapping."""
    x0, _, x1, _ = ax.box
    lo, hi = ax.xlim
    return x0 + (math.log10(v) - math.log10(lo)) / (math.log10(hi) - math.log10(lo)) * (x1 - x0)


def _segments(canvas):
    return np.vstack([op[1] for op in canvas.shapes if op[0] == "segments"] or [np.empty((0, 4))])


def _dated(records):
    """(sample, crystal) -> list of time summaries, from the records (the test's own reading of them)."""
    out = {}
    for r in records:
        if r.get("error"):
            continue
        tds = [b["time_days"] for b in r.get("boundaries") or []]
        tds += [b["age_days"] for b in (r.get("crystal_model") or {}).get("boundaries") or []]
        tds = [t for t in tds if t.get("statement") in ("date", "upper_bound", "lower_bound")]
        if tds:
            out[(r["sample"], r["crystal"])] = tds
    return out


def test_one_ladder_per_dated_crystal_grouped_by_sample(population):
    recs, pop = population
    fig = pf.ladder_figure(recs, pop)
    expected = _dated(recs)
    assert len(expected) == 5
    assert set(fig.rows) == set(expected)
    # grouped by sample, natural order within (c2 before c10), samples apart
    order = sorted(fig.rows, key=fig.rows.get)
    assert order == [("North vent", "c1"), ("North vent", "c2"), ("North vent", "c10"),
                     ("South flank", "k1"), ("South flank", "k2")]
    texts = [t[2] for t in fig.canvas.texts]
    assert "North vent" in texts and "South flank" in texts
    assert all(c in texts for _, c in expected)  # few crystals: every row has its name
    # a rule separates the samples: one grey line across, between the last North and the first South row
    ys = [op[2][0] for op in fig.canvas.shapes if op[0] == "line" and op[2][0] == op[2][-1]
          and fig.rows[("North vent", "c10")] < op[2][0] < fig.rows[("South flank", "k1")]]
    assert len(ys) == 1


def test_each_interval_at_its_log_time_position(population):
    recs, pop = population
    fig = pf.ladder_figure(recs, pop)
    seg = _segments(fig.canvas)
    pitch = min(np.diff(sorted(fig.rows.values())))
    markers = [op for op in fig.canvas.shapes if op[0] == "markers"]
    n_dates = 0
    for key, tds in _dated(recs).items():
        y = fig.rows[key]
        for td in tds:
            if td["statement"] != "date":
                continue
            n_dates += 1
            a, b = _x(fig.axes, td["p2_5"]), _x(fig.axes, td["p97_5"])
            # the interval bar: one horizontal segment from p2.5 to p97.5 within the crystal's row
            hit = seg[(np.abs(seg[:, 0] - a) < 0.01) & (np.abs(seg[:, 2] - b) < 0.01)
                      & (seg[:, 1] == seg[:, 3]) & (np.abs(seg[:, 1] - y) < pitch / 2)]
            assert len(hit) == 1, (key, td)
            # the median symbol on that bar
            m = _x(fig.axes, td["median"])
            assert any(np.any((np.abs(op[1] - m) < 0.01) & (np.abs(op[2] - hit[0, 1]) < 0.01)) for op in markers)
    assert n_dates == 8
    # the SVG carries the same bar (rounded to 0.1 px): North vent / c1, the older boundary
    svg = fig.canvas.svg().decode()
    td = recs[0]["boundaries"][0]["time_days"]
    a, b = _x(fig.axes, td["p2_5"]), _x(fig.axes, td["p97_5"])
    pairs = re.findall(r"M([\d.]+) ([\d.]+)L([\d.]+) ([\d.]+)", svg)
    assert any(abs(float(p) - a) <= 0.06 and abs(float(r) - b) <= 0.06 and q == t for p, q, r, t in pairs)


def test_bounds_are_arrows_not_intervals(population):
    recs, pop = population
    fig = pf.ladder_figure(recs, pop)
    seg = _segments(fig.canvas)
    heads = [op for op in fig.canvas.shapes if op[0] == "polygon"]
    markers = [op for op in fig.canvas.shapes if op[0] == "markers"]
    for key, value, direction in ((("North vent", "c2"), 35.0, -1), (("South flank", "k1"), 150.0, +1)):
        y_row = fig.rows[key]
        px = _x(fig.axes, value)
        tip = _x(fig.axes, value * 10 ** (direction / 3))
        # a bar at the bound and a shaft from it towards the allowed ages
        shaft = seg[(np.abs(seg[:, 0] - px) < 0.01) & (np.abs(seg[:, 2] - tip) < 0.01) & (seg[:, 1] == seg[:, 3])
                    & (np.abs(seg[:, 1] - y_row) < 10)]
        assert len(shaft) == 1, key
        y = shaft[0, 1]
        # an arrow head whose tip is the shaft's end and whose base lies behind it (pointing the right way)
        head = [h for h in heads if np.any((np.abs(h[1] - tip) < 0.01) & (np.abs(h[2] - y) < 0.01))]
        assert len(head) == 1, key
        base = [bx for bx in head[0][1] if abs(bx - tip) > 0.01]
        assert all(np.sign(tip - bx) == direction for bx in base)
        # no median symbol and no 95 % bar on the bound's line: the shaft is its only horizontal stroke
        assert not any(np.any(np.abs(op[2] - y) < 0.01) for op in markers)
        flat = seg[(seg[:, 1] == seg[:, 3]) & (np.abs(seg[:, 1] - y) < 0.01) & (seg[:, 0] != seg[:, 2])]
        assert len(flat) == 1
    texts = [t[2] for t in fig.canvas.texts]
    assert "upper bound (younger than)" in texts and "lower bound (older than)" in texts


def test_population_events_shaded_with_legend(population):
    recs, pop = population
    events = pop["events"]["events"]
    assert len(events) == 2  # ~300 d and ~20 d
    fig = pf.ladder_figure(recs, pop)
    x0, y0, x1, y1 = fig.axes.box
    rects = [op for op in fig.canvas.shapes if op[0] == "rect" and op[5] is not None]
    texts = [t[2] for t in fig.canvas.texts]
    for k, e in enumerate(events):
        age = e["age_days"]
        a, b = _x(fig.axes, age["p2_5"]), _x(fig.axes, age["p97_5"])
        span = [r for r in rects if abs(r[1] - a) < 0.01 and abs(r[3] - b) < 0.01 and r[2] == y0 and r[4] == y1]
        assert len(span) == 1 and span[0][5] == EVENT_FILLS[k]
        assert any(t.startswith(f"{e['id']}: ") and pf.format_days(age["median"]) in t for t in texts)


def test_rows_close_up_for_two_hundred_crystals():
    recs = [_single(f"S{k % 4}", f"c{k}", [300.0 * (1 + 0.01 * (k % 7)), 20.0], seed=k) for k in range(200)]
    pop = {"events": population_events(recs)}
    fig = pf.ladder_figure(recs, pop)
    assert len(fig.rows) == 200
    ys = sorted(fig.rows.values())
    assert min(np.diff(ys)) > 0  # one row each, none shared
    height_mm = (ys[-1] - ys[0]) / pf.MM
    assert height_mm <= pf._MAX_ROWS_MM  # one page
    texts = {t[2] for t in fig.canvas.texts}
    assert {"S0", "S1", "S2", "S3"} <= texts and "c17" not in texts  # sample names only: rows too thin


def test_small_multiples_one_panel_per_dated_crystal_in_pages(population):
    recs, pop = population
    pages = pf.profile_pages(recs, pop)
    assert len(pages) == 1
    assert pages[0].crystals == sorted(pages[0].crystals, key=lambda k: list(pf.ladder_figure(recs, pop).rows)
                                       .index(k))
    assert set(pages[0].crystals) == set(_dated(recs))
    # model curves: every crystal dated by single fits has one; the model-dated crystal has none (caption says so)
    assert pages[0].with_curve == 4
    # the whole-crystal model's own profile is drawn where its record keeps one
    with_model = [dict(r) for r in recs]
    k1 = next(r for r in with_model if r.get("crystal") == "k1")
    x = np.asarray(k1["profile"]["distance_um"])
    curve = {"distance_um": x.tolist(), "model": (300 + 200 * np.exp(-x / 40)).tolist()}
    k1["crystal_model"] = {**k1["crystal_model"], "curves": {"Mg": curve}}
    assert pf.profile_pages(with_model, pop)[0].with_curve == 5
    titles = [t[2] for t in pages[0].canvas.texts]
    assert "South flank / k1" in titles
    assert any(t.startswith("E1 > ") for t in titles)  # the lower bound in the panel title
    # 30 crystals, double column (24 per page): 2 pages; single column (10 per page): 3 pages
    many = [_single("S", f"c{k}", [300.0, 20.0], seed=k) for k in range(30)]
    pop30 = {"events": population_events(many)}
    pages = pf.profile_pages(many, pop30)
    assert [len(p.crystals) for p in pages] == [24, 6]
    assert [len(p.crystals) for p in pf.profile_pages(many, pop30, width="single")] == [10, 10, 10]


def test_print_files_sizes_and_resolution(population, tmp_path):
    from PIL import Image

    recs, pop = population
    out = pf.render_paper_figures(recs, pop, tmp_path, formats=("png", "svg"), width="single")
    assert [p.name for p in out.ladders] == ["ladders.png", "ladders.svg"]
    assert [[p.name for p in page] for page in out.profiles] == [["profiles-1.png", "profiles-1.svg"]]
    with Image.open(out.ladders[0]) as im:
        dpi = im.info["dpi"]
        width_px = im.size[0]
    assert dpi[0] == pytest.approx(300, abs=0.1) and dpi[1] == pytest.approx(300, abs=0.1)
    assert width_px == pytest.approx(90 / 25.4 * 300, abs=300 / pf.DPI + 1)  # 90 mm at 300 dpi, +- 1 canvas px
    svg = out.ladders[1].read_text()
    width_pt = float(re.search(r'<svg[^>]* width="([\d.]+)pt"', svg).group(1))
    assert width_pt == pytest.approx(90 / 25.4 * 72, abs=1.0)  # 90 mm in points (1 pt = 1/72 in), +- 0.35 mm
    assert "<text" in svg and "Recharge events" in svg  # text as text
    # a width that is not a print width is refused before anything is written
    from zoneprofile._validation import InputError

    with pytest.raises(InputError):
        pf.render_paper_figures(recs, pop, tmp_path / "bad", width="triple")
    with pytest.raises(InputError):
        pf.render_paper_figures(recs, pop, tmp_path / "bad", formats=("png", "gif"))
    assert not (tmp_path / "bad").exists()
    # nothing dated: nothing written
    empty = pf.render_paper_figures(recs[-2:], {"events": population_events(recs[-2:])}, tmp_path / "none")
    assert empty.files == [] and not (tmp_path / "none").exists()


def test_report_embeds_and_lists_the_figures(tmp_path):
    from zoneprofile.chronology import population_summary
    from zoneprofile.report import write_outputs
    from zoneprofile.report._sample import sample_provenance, sample_records

    recs = sample_records(seed=5, crystals_per_sample=2, n_draws=100)
    pop = population_summary(recs, n_bootstrap=10)
    res = write_outputs(recs, pop, sample_provenance(recs), tmp_path, formats=("png", "svg"))
    for name in ("figures/ladders.png", "figures/ladders.svg", "figures/profiles-1.png", "figures/profiles-1.svg"):
        assert name in res["files"] and (tmp_path / name).is_file()
    page = (tmp_path / "report.html").read_text()
    chron = page[page.index('id="chronology"'):page.index('id="intervals"')]
    assert chron.count('alt="Event ladders of all crystals"') == 1
    assert chron.count('alt="Dated profiles, small multiples"') == 1
    assert 'href="figures/ladders.svg"' in chron and 'href="figures/profiles-1.png"' in chron
    with __import__("PIL.Image").Image.open(io.BytesIO((tmp_path / "figures/ladders.png").read_bytes())) as im:
        # the canvas rounds its width up to a whole pixel at its own resolution: within one such pixel
        assert im.size[0] == pytest.approx(180 / 25.4 * 300, abs=300 / pf.DPI + 1)


def test_model_curves_stay_out_of_results_json():
    from zoneprofile.report import results_json

    rec = _modelled("S", "k1", [300.0, 20.0])
    rec["crystal_model"]["curves"] = {"Mg": {"distance_um": [0.0, 1.0], "model": [1.0, 2.0]}}
    doc = results_json([rec], {}, {})
    assert "curves" not in doc["crystals"][0]["crystal_model"]
    assert doc["crystals"][0]["crystal_model"]["boundaries"] == rec["crystal_model"]["boundaries"]
    assert "curves" in rec["crystal_model"]  # the record itself is left as it was
