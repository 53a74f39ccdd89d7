"""Written tables stay one cell per cell and never start a formula (CSV injection).

Every written CSV/TSV is read back with the csv module (an independent
reader): each row must have as many cells as the header, and no cell a
spreadsheet would run (OWASP "CSV injection": cells starting with =, +, -, @,
tab or CR, unless a plain number).
"""

import csv

import numpy as np
import pandas as pd
import pytest

from zoneprofile._output import write_table

HOSTILE = [
    "ash\r=HYPERLINK(\"http://x\",\"y\")",  # a CR: a new row starting with '=' for many readers
    "grain\n+1+1",
    "\r\n@SUM(A1)",
    "x\u2028=1",
    "nul\x00bell\x07",
    "\t=1",
    "-2+3",
    "=cmd|' /C calc'!A0",
    "plain name",
]


def _spreadsheet_safe(cell: str) -> bool:
    if not cell or cell[0] not in "=+-@\t\r":
        return True
    try:
        float(cell)
        return True
    except ValueError:
        return False


@pytest.mark.parametrize("ext, sep", [(".csv", ","), (".tsv", "\t")])
def test_hostile_cells_read_back_as_one_safe_cell(tmp_path, ext, sep):
    frame = pd.DataFrame({"sample": HOSTILE, "An": np.linspace(50, 60, len(HOSTILE)), "n": range(len(HOSTILE))})
    p = write_table(tmp_path / f"t{ext}", frame)
    with open(p, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh, delimiter=sep))
    assert len(rows) == 1 + len(HOSTILE)
    assert all(len(r) == 3 for r in rows)
    for r in rows:
        assert all(_spreadsheet_safe(c) for c in r), r
        assert not any(ch in c for c in r for ch in "\r\n\x00\x07\u2028")
    # the text is kept, visibly escaped, and numbers are untouched
    assert rows[1][0] == "ash\\r=HYPERLINK(\"http://x\",\"y\")"
    assert rows[7][0] == "'-2+3"
    np.testing.assert_allclose([float(r[1]) for r in rows[1:]], frame["An"])
    # the raw bytes hold exactly one line break per row
    assert p.read_bytes().count(b"\n") == 1 + len(HOSTILE) and b"\r" not in p.read_bytes()


def test_xlsx_with_control_characters_is_written(tmp_path):
    """openpyxl refuses control characters in cells; they are escaped first."""
    import openpyxl

    frame = pd.DataFrame({"sample": HOSTILE})
    p = write_table(tmp_path / "t.xlsx", frame)
    ws = openpyxl.load_workbook(p).active
    values = [ws.cell(row=k + 2, column=1).value for k in range(len(HOSTILE))]
    assert all(_spreadsheet_safe(v) or v.startswith("'") for v in values)
    assert not any(ch in v for v in values for ch in "\r\n\x00\x07")


def test_hostile_column_name_is_neutralised(tmp_path):
    p = write_table(tmp_path / "h.csv", pd.DataFrame({"=1+1\rx": ["a"]}))
    with open(p, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["'=1+1\\rx"] and rows[1] == ["a"]
