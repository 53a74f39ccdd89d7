"""Reading microprobe tables in every dialect (fixtures written for these tests)."""

import json
from pathlib import Path

import numpy as np
import pytest

from zoneprofile import InputError
from zoneprofile.io import classify, parse_cell, read_analyses, read_profile, read_sheet_as_text
from zoneprofile.traverse import read_traverse

TABLES = Path(__file__).resolve().parents[2] / "fixtures" / "tables"
TRUTH = json.loads((TABLES / "truth.json").read_text())


@pytest.mark.parametrize(
    "key, mineral, column, tol",
    [
        # self-consistency on invented fixtures: oxides printed to 0.01 wt% keep An/Fo within 0.05 mol%
        ("plag_comma.csv", "plagioclase", "An", 0.05),  # comma CSV, title lines, X/Y mm, bdl marks
        ("plag_tab.tsv", "plagioclase", "An", 0.05),  # tab, unit row, lower-case names, X/Y µm
        ("plag_semicolon.csv", "plagioclase", "An", 0.05),  # semicolons, decimal commas, (wt%), FeOT, distance column, rim at end
        ("plag_sheets.xlsx", "plagioclase", "An", 0.05),  # xlsx, default sheet = first with oxides, _wt%, FeO*
        ("plag_sheets.xlsx#crystal 5", "plagioclase", "An", 0.05),  # xlsx, sheet by name
        ("olivine_spaces.txt", "olivine", "Fo", 0.05),  # whitespace-aligned, FeOt
        ("pyroxene_mm.csv", "pyroxene", "Wo", 0.05),  # distance column in mm, n.a. cells
    ],
)
def test_dialect_fixture_recovers_truth(key, mineral, column, tol):
    truth = TRUTH[key]
    name = key.split("#")[0]
    tr = read_traverse(TABLES / name, mineral=mineral, rim=truth["rim"], sheet=truth.get("sheet") if "#" in key else None)
    t = tr.table
    assert len(t) == len(truth[column])
    assert (t["qc"] == "ok").all(), t["qc"].tolist()
    assert np.max(np.abs(t[column].to_numpy() - truth[column])) < tol
    assert np.max(np.abs(t["distance_um"].to_numpy() - truth["distance_um"])) < 0.3
    assert t["distance_um"].iloc[0] == pytest.approx(0.0, abs=1e-9)
    assert np.all(np.diff(t["distance_um"]) > 0)


def test_comma_fixture_keeps_censored_cells_and_names_them():
    tr = read_traverse(TABLES / "plag_comma.csv")
    t = tr.table
    assert np.isnan(t["MgO"]).sum() == 7  # '<0.03', 'bdl', '-', 'b.d.l.', '<LOD', 'n.d.', '-0.01' are not numbers
    assert t["MgO"].iloc[2] == pytest.approx(0.05)
    assert t["censored"].iloc[0] == "MgO<0.03"
    assert t["censored"].iloc[7] == "MgO -0.01"
    assert t["censored"].iloc[2] == ""
    assert any("counted as 0" in n for n in tr.notes)
    # total_wt is the sum of the oxides read; the file's Total left out the MgO 0.05 of P3
    diff = (t["total_wt"] - t["total_reported"]).to_numpy()
    assert diff[2] == pytest.approx(0.05, abs=1e-9)
    assert np.max(np.abs(np.delete(diff, 2))) < 1e-9


def test_xlsx_trace_columns_pass_through_as_ppm():
    t = read_traverse(TABLES / "plag_sheets.xlsx").table
    assert t["Sr_ppm"].tolist() == [1010.5, 1009.5, 1008.5, 1007.5, 1006.5]  # '88Sr'
    assert t["Ba_ppm"].iloc[0] == 220.0  # 'Ba137'
    assert t["Mg_ppm"].iloc[0] == 310.0  # 'Mg25'
    assert "BaO" in t and np.isnan(t["BaO"]).all()  # '<0.04' kept censored, oxide wt%


def test_semicolon_sr_is_ppm_and_sro_is_oxide():
    t = read_traverse(TABLES / "plag_semicolon.csv", rim="end").table
    assert t["Sr_ppm"].iloc[0] == 900.0  # rim point first
    tab = read_traverse(TABLES / "plag_tab.tsv").table
    assert "SrO" in tab and "Sr_ppm" not in tab


def test_unknown_sheet_lists_sheets():
    with pytest.raises(InputError, match="no sheet named 'nope'; sheets: notes, crystal 4, crystal 5"):
        read_analyses(TABLES / "plag_sheets.xlsx", sheet="nope")


def test_read_sheet_as_text_finds_header_below_titles():
    f = read_sheet_as_text(TABLES / "plag_sheets.xlsx", header_contains=["no."])
    assert list(f.columns)[:3] == ["No.", "Stage X", "Stage Y"]
    assert f["_row"].tolist() == [4, 5, 6, 7, 8]
    assert all(isinstance(v, str) for v in f["SiO2_wt%"])


def test_read_profile_reads_xlsx_through_tables(tmp_path):
    import pandas as pd

    p = tmp_path / "profile.xlsx"
    pd.DataFrame({"distance_um": [0.0, 2.0, 4.0], "An": [50.0, 55.0, 60.0], "qc": ["ok", "total 95.0 < 98.5", "ok"]}).to_excel(p, index=False)
    prof = read_profile(p)
    assert prof["An"].tolist() == [50.0, 60.0]
    assert prof["_row"].tolist() == [2, 4]


@pytest.mark.parametrize(
    "name, kind, canonical",
    [
        ("SiO2", "oxide", "SiO2"), ("SiO2 (wt%)", "oxide", "SiO2"), ("sio2", "oxide", "SiO2"), ("SiO2_wt%", "oxide", "SiO2"),
        ("Na2O ", "oxide", "Na2O"), ("FeO*", "oxide", "FeO"), ("FeOt", "oxide", "FeO"), ("FeOT", "oxide", "FeO"),
        ("FeO (t)", "oxide", "FeO"), ("FeO total", "oxide", "FeO"), ("Fe2O3T", "oxide", "Fe2O3"), ("K2O_wt.%", "oxide", "K2O"),
        ("SrO", "oxide", "SrO"), ("Al₂O₃", "oxide", "Al2O3"), ("Wt% SiO2", "oxide", "SiO2"), ("FeO_T", "oxide", "FeO"), ("Sr", "trace", "Sr"), ("Sr_ppm", "trace", "Sr"), ("Sr88", "trace", "Sr"),
        ("88Sr", "trace", "Sr"), ("Mg25", "trace", "Mg"), ("Ba (ppm)", "trace", "Ba"), ("Y89", "trace", "Y"),
        ("distance_um", "distance", ""), ("Distance (µm)", "distance", ""), ("dist_um", "distance", ""),
        ("Distance", "distance", ""), ("distance_mm", "distance", ""), ("X", "x", ""), ("Stage Y [µm]", "y", ""),
        ("Total", "total", ""), ("Point", "point", ""), ("No.", "point", ""), ("Comment", "comment", ""),
        ("SiO2 DL", "limit", "SiO2"), ("DL Na", "limit", "Na2O"), ("Beam DL", "limit", ""), ("Na2O 1σ", "error", ""), ("Z", "ignored", ""), ("Beam current", "ignored", ""),
    ],
)
def test_column_names(name, kind, canonical):
    c = classify(name, has_x=True)
    assert (c.kind, c.canonical) == (kind, canonical)


@pytest.mark.parametrize(
    "text, state, value, limit",
    [
        ("55.2", "number", 55.2, None), ("0", "number", 0.0, None), ("1e-2", "number", 0.01, None),
        ("<0.03", "censored", None, 0.03), ("< 0.03", "censored", None, 0.03), ("<LOD", "censored", None, None),
        ("bdl", "censored", None, None), ("b.d.l.", "censored", None, None), ("n.d.", "censored", None, None),
        ("-", "censored", None, None), ("-0.02", "censored", -0.02, None), ("", "missing", None, None),
        ("n.a.", "missing", None, None), ("abc", "bad", None, None), ("12.3.4", "bad", None, None), ("<x", "bad", None, None),
    ],
)
def test_cells(text, state, value, limit):
    c = parse_cell(text)
    assert c.state == state
    if value is not None:
        assert c.value == pytest.approx(value)
    assert c.limit == limit


def test_unit_row_and_units_from_header():
    a = read_analyses(TABLES / "plag_tab.tsv")
    assert a.units["x"] == "um" and a.header_row == 1
    assert a.data["_row"].tolist()[0] == 3
    assert any("unit row" in n for n in a.notes)


def test_summary_rows_are_skipped(tmp_path):
    src = (TABLES / "plag_comma.csv").read_text().splitlines()
    src.append("Average,,,55.00,28.00,0.42,,10.00,5.50,0.10,99.0,")
    p = tmp_path / "with_average.csv"
    p.write_text("\n".join(src) + "\n")
    t = read_traverse(p).table
    assert len(t) == 8


def test_utf16_tab_text_as_saved_by_spreadsheets(tmp_path):
    src = (TABLES / "plag_tab.tsv").read_text(encoding="utf-8")
    p = tmp_path / "unicode.txt"
    p.write_bytes(src.encode("utf-16"))  # BOM + UTF-16 LE
    t = read_traverse(p).table
    assert np.max(np.abs(t["An"] - TRUTH["plag_tab.tsv"]["An"])) < 0.05


def test_element_wt_twins_are_not_read_as_ppm(tmp_path):
    p = tmp_path / "twins.csv"
    p.write_text("Point,Distance,SiO2,Si,Al2O3,CaO,Na2O,Na,Sr\n"
                 "a,0,55.59,25.98,28.30,10.38,5.73,4.25,1200\n"
                 "b,2,55.59,25.98,28.30,10.38,5.73,4.25,1150\n")
    tr = read_traverse(p)
    assert "Si_ppm" not in tr.table and "Na_ppm" not in tr.table
    assert tr.table["Sr_ppm"].tolist() == [1200.0, 1150.0]  # no SrO column: a bare Sr is ppm
    assert any("Si, Na" in n for n in tr.notes)


def test_decimal_comma_in_quoted_csv_cells(tmp_path):
    p = tmp_path / "q.csv"
    p.write_text('Point,Distance (µm),SiO2,Al2O3,CaO,Na2O\n'
                 'a,0,"55,59","28,30","10,38","5,73"\n'
                 'b,"2,5","55,59","28,30","10,38","5,73"\n')
    t = read_traverse(p).table
    assert t["distance_um"].tolist() == [0.0, 2.5]
    assert t["An"].iloc[0] == pytest.approx(50.0, abs=0.05)


def test_repeated_header_footer_and_parenthesised_unit_row():
    # an export with a blank line, a '(wt%)' unit row, the header repeated at a
    # page break, and a footer line: three analyses, nothing else
    tr = read_traverse(TABLES / "plag_footer_repeated_header.csv")
    assert tr.table["point"].tolist() == ["1", "2", "3"]
    assert (tr.sample, tr.crystal) == ("S1", "C3")  # constant Sample / Crystal columns
    assert tr.table["distance_um"].iloc[-1] == pytest.approx(np.hypot(4.0, 1.0))
    assert any("header repeated" in n for n in tr.notes) and any("no oxide values" in n for n in tr.notes)


@pytest.mark.parametrize(
    "oxide, factor",
    # source: docs/references.md §2 element -> oxide factors (printed to 4 decimals)
    [("SiO2", 2.1393), ("Al2O3", 1.8894), ("FeO", 1.2865), ("MgO", 1.6583), ("CaO", 1.3992), ("Na2O", 1.3480),
     ("K2O", 1.2046), ("SrO", 1.1826), ("BaO", 1.1165), ("TiO2", 1.6685), ("MnO", 1.2912)],
)
def test_element_to_oxide_factors(oxide, factor):
    from zoneprofile.io.columns import element_to_oxide_factor

    assert element_to_oxide_factor(oxide) == pytest.approx(factor, abs=6e-5)


def test_detection_limit_columns(tmp_path):
    p = tmp_path / "dl.csv"
    p.write_text("Point,Distance,SiO2,Al2O3,CaO,Na2O,K2O,K2O DL,FeO,Fe DL\n"
                 "a,0,55.59,28.30,10.38,5.73,0.02,0.03,bdl,0.02\n"
                 "b,2,55.59,28.30,10.38,5.73,bdl,0.03,0.05,0.02\n")
    tr = read_traverse(p)
    # element wt% limit of Fe converted to FeO wt% with the factor 1.2865 (docs/references.md §2)
    first, second = tr.table["censored"].tolist()
    assert "K2O 0.02 below DL 0.03 (kept)" in first and "FeO<0.0257" in first
    assert second == "K2O<0.03"  # FeO 0.05 is above its limit: nothing to say
    assert tr.table["K2O"].iloc[0] == pytest.approx(0.02)  # a measured value is never zeroed
    assert "K2O DL" not in " ".join(tr.notes)  # used, so not listed as unused
