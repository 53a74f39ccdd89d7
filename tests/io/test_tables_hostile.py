"""Tables that used to give a silent wrong number or a silent lost row, read right now.

The refusals are in ``test_hostile_inputs.py``; here are the cases whose right
answer is a result: kept rows, flagged points, counted skips, re-zeroed
distances. Invariant used throughout: the same analyses without the fault.
"""

import numpy as np
import pytest

from hostile_corpus import plag_rows, plag_table, profile_table
from zoneprofile._validation import InputError
from zoneprofile.io import read_profile
from zoneprofile.traverse import read_traverse


def test_point_labelled_n_and_comment_max_are_analyses(tmp_path):
    """'N' (a traverse label) and a 'max' comment were dropped as summary rows."""
    rows = plag_rows()
    rows[3] = "N" + rows[3][2:]
    rows[4] = rows[4].replace("plag c2", "max")
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    assert len(tr.table) == 12
    assert "N" in set(tr.table["point"])


def test_real_summary_rows_are_skipped_and_counted(tmp_path):
    rows = plag_rows() + [
        "Average,,,52.00,30.00,0.42,,12.50,4.40,0.10,99.42,",
        "N,,,12,12,12,,12,12,12,12,",
        "max,,,55.06,31.59,0.42,,14.23,5.43,0.10,100.4,",
    ]
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    assert len(tr.table) == 12
    assert any("skipped 3 of 15 rows below the header (3 summary)" in n for n in tr.notes)


def test_summary_word_in_the_comment_of_an_unlabelled_row(tmp_path):
    rows = plag_rows() + [",,,52.00,30.00,0.42,,12.50,4.40,0.10,99.42,Average"]
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    assert len(tr.table) == 12 and any("1 summary" in n for n in tr.notes)


def test_footer_rows_are_counted(tmp_path):
    rows = plag_rows() + ["Operator: invented,,,,,,,,,,,", "Session end,,,,,,,,,,,"]
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    assert len(tr.table) == 12
    assert any("skipped 2 of 14 rows" in n and "2 without oxide values" in n for n in tr.notes)


def test_quoted_comment_with_a_line_break_keeps_row_numbers(tmp_path):
    rows = plag_rows()
    rows[2] = rows[2].replace("plag c2", '"crack,\nnear rim"')
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    assert len(tr.table) == 12
    # the rows after the two-line record keep the line numbers a text editor shows
    assert tr.table["_row"].tolist()[3:5] == [6, 7]


def test_mistyped_stage_coordinate_is_flagged_and_does_not_move_the_others(tmp_path):
    """A dropped digit moved a point by 157 µm and tilted the line: every distance shifted."""
    clean = read_traverse(plag_table(tmp_path, "clean.csv")).table.set_index("point")["distance_um"]
    rows = plag_rows()
    cells = rows[5].split(",")
    cells[1] = "12.518"  # 12.3586 with digits lost: about 160 µm along X
    rows[5] = ",".join(cells)
    tr = read_traverse(plag_table(tmp_path, "typo.csv", rows=rows))
    t = tr.table.set_index("point")
    assert t.loc["P6", "qc"].startswith("off the traverse line by")
    others = [p for p in clean.index if p != "P6"]
    # the line is fitted to the 11 good points: their distances agree with the clean
    # table to the rounding of the stage coordinates (0.1 µm in mm with 4 decimals)
    np.testing.assert_allclose(t.loc[others, "distance_um"], clean[others], atol=0.1)
    assert tr.max_offset_um < 1.0
    assert any("row 7 lies" in n for n in tr.notes)


def test_distance_column_with_another_zero_is_rezeroed(tmp_path):
    header = "Point,Distance (µm),SiO2,Al2O3,FeO,MgO,CaO,Na2O,K2O,Total,Comment"
    rows = []
    for k, r in enumerate(plag_rows()):
        cells = r.split(",")
        rows.append(",".join([cells[0], f"{-100 + 3 * k}", *cells[3:]]))
    tr = read_traverse(plag_table(tmp_path, rows=rows, header=header))
    assert tr.table["distance_um"].iloc[0] == 0.0
    np.testing.assert_allclose(np.diff(tr.table["distance_um"]), 3.0)
    assert any("re-zeroed" in n and "-100" in n for n in tr.notes)


def test_utf16_profile_is_read(tmp_path):
    """A UTF-16 profile was called a binary file (recalc reads UTF-16 tables)."""
    text = "distance_um,Sr_ppm,An\n" + "".join(f"{x},{900 if x < 30 else 600},60\n" for x in range(0, 60, 2))
    p = tmp_path / "u16.csv"
    p.write_bytes(text.encode("utf-16"))
    ref = read_profile(profile_table(tmp_path, text=text), columns=("Sr_ppm",))
    got = read_profile(p, columns=("Sr_ppm",))
    np.testing.assert_array_equal(got["Sr_ppm"], ref["Sr_ppm"])


@pytest.mark.parametrize("cell", ["7_0.5", "1_000"])
def test_underscores_are_not_digit_separators(tmp_path, cell):
    text = f"distance_um,Sr_ppm\n0,900\n2,{cell}\n4,600\n"
    with pytest.raises(InputError, match="row 3.*not a number"):
        read_profile(profile_table(tmp_path, text=text), columns=("Sr_ppm",))


@pytest.mark.parametrize("char", ["\x0b", "\x0c", "\x1c", "\x1e", "\x85", "\u2028"])
def test_unicode_line_separators_inside_a_cell_do_not_split_the_row(tmp_path, char):
    """str.splitlines broke a row at these characters: the second half became a row of shifted cells."""
    rows = plag_rows()
    rows[2] = rows[2].replace("plag c2", f"plag{char}c2")
    tr = read_traverse(plag_table(tmp_path, rows=rows))
    clean = read_traverse(plag_table(tmp_path, "clean.csv"))
    assert len(tr.table) == 12
    np.testing.assert_array_equal(tr.table["An"], clean.table["An"])
