"""A bound reads as a bound (titles and tables), and no report table is too wide for the page."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pytest

from zoneprofile.chronology import population_summary
from zoneprofile.report import write_outputs
from zoneprofile.report._sample import sample_provenance, sample_records
from zoneprofile.report.timetext import resolved_text, time_range_text, time_statement, time_title

UPPER = {"best": None, "median": None, "p2_5": None, "p16": None, "p84": None, "p97_5": None,
         "upper_bound": 2.4, "lower_bound": None, "statement": "upper_bound"}


def _texts(svg: bytes) -> list[str]:
    root = ET.fromstring(svg)
    return [t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}text")]


def test_statements():
    assert time_statement(UPPER, False) == "< 2.4 d"
    lower = dict(UPPER, upper_bound=None, lower_bound=300.0, statement="lower_bound")
    assert time_statement(lower, False) == "> 300 d"
    date = {"median": 20.06, "p2_5": 9.1, "p97_5": 41.4, "statement": "date"}
    assert time_statement(date) == "20.1 d"
    assert time_range_text(date) == "9.1 – 41.4 d" and time_range_text(UPPER, False) == "—"
    assert time_statement({"statement": "none"}, False) == "not bounded"
    assert resolved_text(date) == "yes" and resolved_text(lower, False) == "no: lower bound"
    assert resolved_text({"statement": "none"}, False) == "no: not bounded"
    # an older record without "statement": the bound is found from the keys
    assert time_statement({"median": None, "upper_bound": 2.4}, False) == "< 2.4 d"
    assert time_title("Mg", 31.9, UPPER, False) == "Mg at 32 µm: < 2.4 d\nnot resolved: upper bound only"


@pytest.fixture(scope="module")
def unresolved_record():
    rec = sample_records(seed=7, samples=("S",), crystals_per_sample=1, with_failure=False, n_draws=50)[0]
    b = rec["boundaries"][0]
    b["resolved"] = False
    b["time_days"] = dict(UPPER)
    return rec


def test_figure_title_of_an_unresolved_boundary_shows_the_bound(unresolved_record):
    from zoneprofile.report.figures import crystal_figure_bytes

    texts = _texts(crystal_figure_bytes(unresolved_record, ("svg",))["svg"])
    joined = "\n".join(texts)
    position = unresolved_record["boundaries"][0]["position_um"]
    assert f"Mg at {position:.0f} µm: < 2.4 d" in joined  # the old title read "≤ n/a"
    assert "≤" not in joined and "n/a" not in joined


def test_report_tables_show_bounds_and_fit_the_page(tmp_path, unresolved_record):
    recs = sample_records(seed=11, samples=("North", "South"), crystals_per_sample=3, n_draws=100)
    recs[0] = unresolved_record
    pop = population_summary(recs, n_bootstrap=0)
    write_outputs(recs, pop, sample_provenance(recs), tmp_path, formats=("png",))
    page = (tmp_path / "report.html").read_text()
    assert "<td>&lt; 2.4 d</td>" in page and "<td>no: upper bound</td>" in page
    widths = [len(re.findall(r"<th>", t.split("</thead>")[0])) for t in re.findall(r"<table>.*?</table>", page, re.S)]
    assert widths and max(widths) <= 10  # the per-crystal settings table had one column per setting (38)
    assert "Settings shared by every crystal" in page
    for key in recs[1]["parameters"]:  # every setting is still shown
        assert f"<th>{key}</th>" in page or f"<td>{key}</td>" in page, key
