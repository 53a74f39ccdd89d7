"""Reading any supported table file into rows of text cells.

Text tables (comma, tab, semicolon; decimal commas with semicolons or tabs;
whitespace-aligned as a last resort) and Excel workbooks (.xlsx) come back as
lists of stripped strings with the line (or spreadsheet row) number a user
sees, so every later error can name the row.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pandas as pd

from zoneprofile._validation import InputError, require_file

__all__ = ["RawTable", "read_raw_table", "read_sheet_as_text", "frame_below_header", "header_cells"]

_ENCODINGS = ("utf-8-sig", "cp1252", "latin-1")
_DELIMITERS = ("\t", ";", ",")
_DECIMAL_COMMA = re.compile(r"^[<>]?\s*[-+]?\d+,\d+([eE][-+]?\d+)?$")


@dataclass
class RawTable:
    """Rows of text cells with their 1-based line (spreadsheet row) numbers."""

    rows: list[list[str]]
    lines: list[int]
    path: Path
    delimiter: str | None = None  # None for .xlsx
    sheet: str | None = None
    decimal_comma: bool = False
    sheets: list[str] = field(default_factory=list)
    ends_cleanly: bool = True  # a text file ending with a line break (False hints at truncation)


def _decode(path: Path) -> str:
    raw = path.read_bytes()
    if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):  # UTF-16 text, as spreadsheet programs save "Unicode text"
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError:
            message = "cannot decode this UTF-16 text file (truncated?)"
            raise InputError(message, path=path) from None
    head = raw[:4096]
    if raw[:2] == b"PK":
        message = "looks like a zip or Excel file; give it the .xlsx extension"
        raise InputError(message, path=path)
    if b"\x00" in head or raw[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1":
        message = "looks like a binary file, expected a text table (CSV/TSV) or .xlsx"
        raise InputError(message, path=path)
    control = sum(1 for b in head if b < 32 and b not in (9, 10, 13))
    if control > max(2, len(head) // 50):
        message = "looks like a binary file, expected a text table (CSV/TSV) or .xlsx"
        raise InputError(message, path=path)
    for enc in _ENCODINGS:
        try:
            return raw.decode(enc)
        except UnicodeDecodeError:
            continue
    message = "cannot decode the file as text"  # pragma: no cover - latin-1 decodes anything
    raise InputError(message, path=path)


def _split(lines: list[str], delimiter: str | None) -> list[list[str]]:
    if delimiter is None:  # whitespace-aligned columns
        return [ln.split() for ln in lines]
    return [[c.strip() for c in row] for row in csv.reader(lines, delimiter=delimiter)]


def _text_rows(path: Path, is_header: Callable[[list[str]], int] | None) -> RawTable:
    text = _decode(path)
    lines = text.splitlines()
    if not any(ln.strip() for ln in lines):
        raise InputError("file holds no text", path=path)
    candidates = list(_DELIMITERS) + [None]
    best, best_score = None, (-1, 0)
    for delim in candidates:
        if delim is not None and not any(delim in ln for ln in lines[:200]):
            continue
        rows = _split(lines[:200], delim)
        if is_header is not None:
            score = max((is_header(r) for r in rows), default=0)
        else:
            score = 0
        widths = [len(r) for r in rows if any(c for c in r)]
        common = max(set(widths), key=widths.count) if widths else 0
        key = (score, widths.count(common) * (common > 1))
        if key > best_score:
            best, best_score = delim, key
    if best is None and best_score[0] <= 0:
        best = ","
    rows, decimal_comma = _decimal_points(_split(lines, best))
    return RawTable(
        rows, list(range(1, len(rows) + 1)), path, delimiter=best, decimal_comma=decimal_comma,
        ends_cleanly=text.endswith(("\n", "\r")),
    )


def _decimal_points(rows: list[list[str]]) -> tuple[list[list[str]], bool]:
    """Turn decimal commas ('55,23', '<0,03') into points; a comma inside one
    cell can only be a decimal comma once the row has been split."""
    found = any(_DECIMAL_COMMA.match(c) for r in rows for c in r)
    if not found:
        return rows, False
    return [[c.replace(",", ".") if _DECIMAL_COMMA.match(c) else c for c in r] for r in rows], True


def _cell_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    if hasattr(value, "isoformat"):
        return value.isoformat()
    return str(value).strip()


def _xlsx_rows(path: Path, sheet, is_header) -> RawTable:
    import zipfile

    try:
        import openpyxl
    except ImportError:  # pragma: no cover - a declared dependency
        raise InputError("reading .xlsx needs the 'openpyxl' package", path=path) from None
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError, EOFError) as exc:
        message = f"cannot read this .xlsx (damaged, truncated or not an Excel workbook: {type(exc).__name__})"
        raise InputError(message, path=path) from None
    try:
        names = list(wb.sheetnames)
        if sheet is not None:
            def norm(t):
                return " ".join(str(t).replace("_", " ").split()).lower()

            lookup = {norm(n): n for n in names}
            key = norm(sheet)
            if key not in lookup:
                message = f"no sheet named '{sheet}'; sheets: {', '.join(names)}"
                raise InputError(message, path=path, column="--sheet")
            order = [lookup[key]]
        else:
            order = names
        chosen, chosen_score = None, 0
        for name in order:
            try:
                rows = [[_cell_text(v) for v in row] for row in wb[name].iter_rows(values_only=True)]
                rows, _ = _decimal_points(rows)
            except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError, EOFError) as exc:
                message = f"cannot read sheet '{name}' (damaged workbook: {type(exc).__name__})"
                raise InputError(message, path=path) from None
            table = RawTable(rows, list(range(1, len(rows) + 1)), path, sheet=name, sheets=names)
            if sheet is not None or is_header is None:
                return table
            score = max((is_header(r) for r in rows), default=0)
            if score >= 2:  # a clear header: take this sheet
                return table
            if chosen is None or (score > 0 and chosen_score == 0):
                chosen, chosen_score = table, score
        if chosen is None:
            raise InputError("workbook has no sheets", path=path)
        return chosen
    finally:
        wb.close()


def read_raw_table(path, *, sheet=None, is_header: Callable[[list[str]], int] | None = None) -> RawTable:
    """Read a CSV/TSV/semicolon/whitespace text table or an .xlsx sheet as text rows.

    Parameters
    ----------
    path : path-like
        The table. ``.xlsx``/``.xlsm`` are read as workbooks, anything else as text.
    sheet : str, optional
        Workbook sheet name (case-insensitive). Default: the first sheet holding
        a row for which ``is_header`` is positive, else the first sheet.
    is_header : callable, optional
        Scores a row of cells (> 0: could be the header). Used to choose the
        delimiter of a text file and the default sheet of a workbook.
    """
    p = require_file(path, what="table")
    ext = p.suffix.lower()
    if ext in (".xlsx", ".xlsm"):
        return _xlsx_rows(p, sheet, is_header)
    if ext in (".xls", ".ods", ".numbers"):
        message = f"'{ext}' files cannot be read; save the sheet as .xlsx or CSV"
        raise InputError(message, path=p)
    if sheet is not None:
        message = "--sheet applies to .xlsx workbooks only"
        raise InputError(message, path=p, column="--sheet")
    return _text_rows(p, is_header)


def header_cells(table: RawTable, header_index: int) -> list[str]:
    """The stripped header cells, without trailing blanks."""
    header = [c.strip() for c in table.rows[header_index]]
    while header and header[-1] == "":
        header.pop()
    return header


def frame_below_header(table: RawTable, header_index: int, *, dedupe: bool = False) -> pd.DataFrame:
    """Rows below ``table.rows[header_index]`` as a DataFrame of str with ``_row``.

    Blank rows are skipped; short rows are padded with ''. Duplicate column
    names raise :class:`InputError` naming the header row, unless ``dedupe``
    (the caller has checked the columns it uses), which renames later
    copies ``name#2``, ``name#3``. Columns keep the header's order.
    """
    header = header_cells(table, header_index)
    seen: dict[str, int] = {}
    for j, name in enumerate(header):
        if name and name in seen:
            if dedupe:
                k = 2
                while f"{name}#{k}" in seen:
                    k += 1
                header[j] = f"{name}#{k}"
                seen[header[j]] = j
                continue
            message = f"duplicate column '{name}' (columns {seen[name] + 1} and {j + 1}); rename or remove one"
            raise InputError(message, path=table.path, row=table.lines[header_index], column=name)
        seen[name] = j
    header = [name if name else f"_blank{j + 1}" for j, name in enumerate(header)]
    records, rows = [], []
    for i in range(header_index + 1, len(table.rows)):
        row = table.rows[i]
        if not any(c.strip() for c in row):
            continue
        cells = [c.strip() for c in row] + [""] * max(0, len(header) - len(row))
        records.append(cells[: len(header)])
        rows.append(table.lines[i])
    frame = pd.DataFrame(records, columns=header, dtype=object) if records else pd.DataFrame(columns=header, dtype=object)
    frame["_row"] = rows
    return frame


def read_sheet_as_text(path, *, sheet=None, header_contains=None) -> pd.DataFrame:
    """Read an .xlsx sheet (or a text table) as a DataFrame of stripped strings.

    Parameters
    ----------
    path : path-like
        Workbook (``.xlsx``) or text table.
    sheet : str, optional
        Sheet name; default the first sheet whose rows include a header.
    header_contains : iterable of str, optional
        Lower-case names, one of which must appear in the header row; rows
        above it (titles) are skipped. Default: the first non-empty row.

    Returns
    -------
    DataFrame of str
        One column per header cell ('' for blank cells) and ``_row``, the
        1-based spreadsheet row of each record.
    """
    wanted = None if header_contains is None else {str(w).strip().lower() for w in header_contains}

    def is_header(row):
        cells = {c.strip().lower() for c in row if c.strip()}
        if not cells:
            return 0
        return 1 if wanted is None else len(wanted & cells)

    table = read_raw_table(path, sheet=sheet, is_header=is_header)
    for i, row in enumerate(table.rows):
        if is_header(row) > 0:
            return frame_below_header(table, i)
    need = ", ".join(sorted(wanted)) if wanted else "a header"
    where = f" in sheet '{table.sheet}'" if table.sheet else ""
    message = f"no header row found{where}; expected a row naming {need}"
    raise InputError(message, path=table.path)
